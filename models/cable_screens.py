"""Circulating currents in the screens of single-core cables bonded at both ends.

A single-core cable's metallic screen (or sheath) is a thin tube concentric with the
conductor.  When the three screens of a circuit are joined to each other (and earthed)
at both ends of a section, the conductor currents induce voltages along the screens
that drive currents round the loops so formed.  Those currents flow in the opposite
sense to the conductor currents and lower the magnetic field outside the trench.

Model (per unit length, quasi-static, infinitely long parallel cables)
----------------------------------------------------------------------
Every current-carrying wire ``k`` of the section (cable conductors, overhead
conductors, earth wires) and every both-end-bonded screen ``a`` are filaments at the
cable centres.  The longitudinal voltage drop along screen ``a`` is

    ``dV_a = R_a I_sa + j omega (mu0 / 2 pi) [ sum_k I_k ln(1/d_ak) + sum_b I_sb ln(1/d_ab) ]``

with ``d_ak`` the centre distance, except ``d = r_a`` (the screen's mean radius) for the
screen's own conductor and for the screen itself: the flux of a current inside or on
the tube links the tube's loop only outside ``r_a``, and a thin tube has no internal
flux of its own (its geometric mean radius is its mean radius).  The reference distance
of the logarithms (1 m) drops out, see below.

Bonding (the constraint this module assumes, for every circuit with
``screen.bonding == "both_ends"``):

* the screens of the circuit are joined by bonding leads of negligible impedance at
  both ends, so every screen of the circuit has the same drop ``dV_a = V_g`` (``V_g``
  unknown, one per circuit);
* no screen current returns through the earth: ``sum_{a in circuit} I_sa = 0``.  The
  circulating currents flow out in one screen and back in the others.  This is the
  basis of the loss factors of IEC 60287-1-1 for both-end bonded cables (clause 2.3.1
  to 2.3.3, from memory).  For a balanced circuit the earth-return current of both-end
  bonded screens is small anyway; for unbalanced currents (net conductor current) the
  real screens would also carry part of the return current and lower B further, so
  neglecting it errs on the high (cautious) side for B.

Because the reference distance only adds the same term ``ln(D) * (sum of all
currents)`` to every drop, it is absorbed by ``V_g``: results do not depend on it (the
tests check this).  The linear system, for the ``n`` bonded screens and ``g`` circuits,

    ``[[Z_ss, -G], [G^T, 0]] [I_s; V] = [-Z_sc I_c; 0]``

(``G`` the screen-to-circuit incidence) is solved once for the unit response of every
wire, giving the transfer matrix ``T`` with ``I_s = T I_c``: screen currents are linear
in the conductor currents (load cases and phase-arrangement studies reuse ``T``).

Screens bonded at a single point, or cross-bonded, carry no circulating current in this
model: a single-point bonded screen is open at the other end (only a standing voltage),
and ideal cross-bonding (three equal minor sections, screens transposed) cancels the
induced voltages over each major section.  Their cables' field is that of the conductor
currents alone, as for cables without screen data.

For the field outside a cable the screen current sits at the cable centre (a uniform
concentric tube acts on the outside as a filament on its axis), so B is computed from
``I_c + I_s`` at each cable position.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from .geometry import CrossSection
from .sources import Sources
from .units import MU0_H_PER_M

__all__ = ["FORMATIONS", "ScreenCurrents", "bonded_cables", "formation_positions", "screen_currents",
           "screen_transfer_matrix", "section_screen_transfer",
           "with_screen_currents"]

OHM_PER_KM = 1e-3
"""ohm/km -> ohm/m."""


def screen_transfer_matrix(x_m, y_m, screened, screen_radius_m, screen_resistance_ohm_per_m, group,
                           frequency_hz: float) -> np.ndarray:
    """Transfer matrix from wire currents to screen currents, ``I_s = T @ I`` (see the module notes).

    Parameters
    ----------
    x_m, y_m : array_like, shape (m,)
        Centres of every current-carrying wire of the section [m].
    screened : bool array_like, shape (m,)
        True where the wire is a cable whose screen is bonded at both ends.
    screen_radius_m, screen_resistance_ohm_per_m : array_like, shape (m,)
        Mean radius [m] and resistance per length [ohm/m] of each screen (read only
        where ``screened``).
    group : int array_like, shape (m,)
        Bonding group of each screened wire (the circuit): screens of one group are
        joined at both ends and their currents sum to zero.
    frequency_hz : float

    Returns
    -------
    complex ndarray, shape (m, m)
        Row ``a`` gives screen ``a``'s current per ampere of each wire's current; rows
        of wires without a bonded screen are zero.

    Examples
    --------
    Three cables in touching trefoil (spacing 0.1 m, screen mean diameter 0.08 m,
    0.1 ohm/km), balanced currents: the screens carry about half the current.

    >>> h = 0.1 * math.sqrt(3) / 2
    >>> x, y = [-0.05, 0.05, 0.0], [-1.0, -1.0, -1.0 + h]
    >>> t = screen_transfer_matrix(x, y, [True] * 3, [0.04] * 3, [1e-4] * 3, [0, 0, 0], 50.0)
    >>> i_c = 1000.0 * np.exp(-2j * np.pi / 3 * np.arange(3))
    >>> np.round(np.abs(t @ i_c), 1)
    array([498.9, 498.9, 498.9])
    """
    x = np.asarray(x_m, dtype=float)
    y = np.asarray(y_m, dtype=float)
    s = np.flatnonzero(np.asarray(screened, dtype=bool))
    m = x.size
    out = np.zeros((m, m), dtype=complex)
    if s.size == 0:
        return out
    r = np.asarray(screen_radius_m, dtype=float)[s]
    res = np.asarray(screen_resistance_ohm_per_m, dtype=float)[s]
    labels, g = np.unique(np.asarray(group)[s], return_inverse=True)
    n, n_g = s.size, labels.size
    jx = 1j * 2.0 * math.pi * float(frequency_hz) * MU0_H_PER_M / (2.0 * math.pi)
    d = np.hypot(x[s, None] - x[None, :], y[s, None] - y[None, :])   # (n, m): screen a to wire k
    own = s[:, None] == np.arange(m)[None, :]
    d = np.where(own, r[:, None], d)                                   # own conductor: linked outside r_a
    z_sc = jx * np.log(1.0 / d)                                        # (n, m)
    z_ss = z_sc[:, s] + np.diag(res)                                   # screen b sits at wire s[b]
    incidence = np.zeros((n, n_g))
    incidence[np.arange(n), g] = 1.0
    k = np.zeros((n + n_g, n + n_g), dtype=complex)
    k[:n, :n] = z_ss
    k[:n, n:] = -incidence
    k[n:, :n] = incidence.T
    rhs = np.zeros((n + n_g, m), dtype=complex)
    rhs[:n] = -z_sc
    out[s] = np.linalg.solve(k, rhs)[:n]
    return out


def bonded_cables(section: CrossSection, sources: Sources) -> np.ndarray:
    """True for each wire of ``sources`` that is a cable of a circuit whose screens are bonded at both ends."""
    bonded = [i for i, c in enumerate(section.circuits)
              if c.kind == "underground" and c.screen is not None and c.screen.bonding == "both_ends"]
    return np.isin(sources.circuit_index, bonded)


def section_screen_transfer(section: CrossSection, sources: Sources, frequency_hz: float) -> np.ndarray | None:
    """:func:`screen_transfer_matrix` for the wires of ``sources`` (built from ``section``); None without bonded screens.

    Call :func:`models.sources.validate_cross_section` first (screens need one cable
    per phase position, resistance and mean diameter); :func:`screen_currents` shows a use.
    """
    m = sources.x_m.size
    screened = bonded_cables(section, sources)
    radius = np.zeros(m)
    resistance = np.zeros(m)
    for i, circuit in enumerate(section.circuits):
        mine = screened & (sources.circuit_index == i)
        if mine.any():
            radius[mine] = circuit.screen.mean_diameter_m / 2.0
            resistance[mine] = circuit.screen.resistance_ohm_per_km * OHM_PER_KM
    if not screened.any():
        return None
    return screen_transfer_matrix(sources.x_m, sources.y_m, screened, radius, resistance, sources.circuit_index,
                                  frequency_hz)


@dataclass(frozen=True)
class ScreenCurrents:
    """Screen current of every cable with a both-end bonded screen.

    ``circuit_index``, ``conductor_index`` locate each cable in the input;
    ``conductor_current_a`` and ``screen_current_a`` are its rms phasors [A] (positive
    along the same direction).
    """

    circuit_index: np.ndarray
    conductor_index: np.ndarray
    conductor_current_a: np.ndarray
    screen_current_a: np.ndarray


def screen_currents(section: CrossSection, sources: Sources, frequency_hz: float) -> ScreenCurrents | None:
    """The screen currents of a section's bonded cables (None when no screen is bonded at both ends).

    Examples
    --------
    >>> from models.geometry import Bundle, CableScreen, Circuit, Conductor
    >>> from models.sources import build_sources
    >>> cable = Circuit("c1", "underground", 132.0, 800.0,
    ...     (Conductor("L1", -0.2, -1.2), Conductor("L2", 0.0, -1.2), Conductor("L3", 0.2, -1.2)),
    ...     Bundle(0.04), screen=CableScreen("both_ends", 0.08, 0.09))
    >>> section = CrossSection((cable,))
    >>> sc = screen_currents(section, build_sources(section), 50.0)
    >>> bool(abs(sc.screen_current_a.sum()) < 1e-9 * abs(sc.screen_current_a).max())   # they circulate
    True
    """
    t = section_screen_transfer(section, sources, frequency_hz)
    if t is None:
        return None
    rows = np.flatnonzero(bonded_cables(section, sources))
    return ScreenCurrents(sources.circuit_index[rows], sources.conductor_index[rows], sources.current_a[rows],
                          (t @ sources.current_a)[rows])


def with_screen_currents(section: CrossSection, sources: Sources, frequency_hz: float) -> Sources:
    """``sources`` with each bonded cable's screen current added to its conductor current (B outside the cable).

    Unchanged (the same object) when no screen is bonded at both ends.
    """
    t = section_screen_transfer(section, sources, frequency_hz)
    if t is None:
        return sources
    return dataclasses.replace(sources, current_a=sources.current_a + t @ sources.current_a)


FORMATIONS = ("flat", "trefoil")


def formation_positions(formation: str, spacing_m: float, depth_m: float, offset_m: float = 0.0) -> np.ndarray:
    """Centres (offset_m, height_m) of three single-core cables laid ``flat`` or in ``trefoil`` [m], shape (3, 2).

    ``spacing_m`` is the centre-to-centre distance of adjacent cables (touching cables:
    the cable's outer diameter); ``depth_m`` the depth of the group's centroid below
    ground (of the cable axes for flat); ``offset_m`` the centroid's offset.  Flat:
    left, middle, right.  Trefoil: apex up, bottom left, bottom right, top.  Use the
    rows for the conductors of a :class:`models.geometry.Circuit` (phases in that order).

    >>> formation_positions("flat", 0.25, 1.2).round(3).tolist()
    [[-0.25, -1.2], [0.0, -1.2], [0.25, -1.2]]
    >>> p = formation_positions("trefoil", 0.1, 1.0)
    >>> np.round(np.hypot(*(p - np.roll(p, 1, axis=0)).T), 12).tolist(), round(float(p[:, 1].mean()), 12)
    ([0.1, 0.1, 0.1], -1.0)
    """
    if formation == "flat":
        dx, dy = np.array([-spacing_m, 0.0, spacing_m]), np.zeros(3)
    elif formation == "trefoil":
        h = spacing_m * math.sqrt(3.0) / 2.0
        dx, dy = np.array([-spacing_m / 2.0, spacing_m / 2.0, 0.0]), np.array([-h / 3.0, -h / 3.0, 2.0 * h / 3.0])
    else:
        raise ValueError(f"formation must be one of {', '.join(FORMATIONS)}; instead received {formation!r}.")
    return np.column_stack([offset_m + dx, -depth_m + dy])
