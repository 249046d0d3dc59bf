"""Cross-section field engine: phasor E and B of a line section at observation points.

Orchestrates :mod:`models.sources` (validation, phase angles, bundles),
:mod:`models.electric` (charge simulation) and :mod:`models.magnetic`
(Biot–Savart, optional Deri earth-return image), in chunks of points so memory
stays bounded for very many points.
"""

from __future__ import annotations

import functools

import numpy as np

from .electric import line_charges
from .cable_screens import with_screen_currents
from .errors import GeometryError, must_be
from .geometry import CrossSection
from .magnetic import complex_depth_m, earth_return_phasors
from .results import FieldResult
from .sources import Sources, build_sources, validate_cross_section, validate_soil_resistivity
from .units import EPS0_F_PER_M, MU0_H_PER_M


def _assumptions(section: CrossSection, sources: Sources, frequency_hz: float,
                 rho_ohm_m: float | None) -> tuple[str, ...]:
    items = [
        f"Fields are rms phasors at {frequency_hz:g} Hz of a two-dimensional model: conductors are "
        "infinitely long, straight and parallel at the stated heights (exact at mid-span of a long "
        "level span when the mid-span heights are given).",
        "Electric field: line charges from Maxwell potential coefficients over flat, perfectly "
        "conducting ground (image method); earth wires and neutrals are held at 0 V.",
        "Bundles: every subconductor is modelled explicitly, for the charges (all at the bundle's "
        "voltage) and for the currents (shared equally).",
    ]
    underground = [c for c in section.circuits if c.kind == "underground"]
    if underground and all(c.screen is None for c in underground):
        items.append(
            "Underground circuits are screened cables: no electric field outside the cable; their "
            "magnetic field comes from the conductor currents alone (screen and sheath currents "
            "neglected).")
    elif underground:
        items.extend(screen_assumptions(underground))
    if rho_ohm_m is None:
        items.append("Magnetic field: earth-return currents are neglected (no ground image); soil "
                     "and air are non-magnetic (mu0).")
    else:
        items.append(
            f"Magnetic field: earth-return currents of overhead conductors represented by a "
            f"complex-depth image (Deri et al. 1981) in homogeneous soil of {rho_ohm_m:g} ohm m; soil "
            "and air are non-magnetic (mu0).")
    if section.earth_wires:
        items.append("Earth wires carry no current unless an earth-wire current is given "
                     "(induced currents not computed).")
    items.append("Unperturbed fields: no person, vehicle, trees, fences or buildings; flat ground.")
    return tuple(items)


def screen_assumptions(underground) -> list[str]:
    """What the report says about the screens of underground circuits (some of which have screen data)."""
    def ids(bonding):
        return ", ".join(c.id for c in underground
                         if (c.screen.bonding if c.screen is not None else None) == bonding)

    items = ["Underground circuits are screened cables: no electric field outside the cable."]
    if ids("both_ends"):
        items.append(
            f"Screens bonded at both ends (circuits {ids('both_ends')}): the circulating screen currents are "
            "computed from the screens' resistance and the self and mutual inductances of the conductor and "
            "screen loops (each screen a thin tube at its mean diameter, concentric with its conductor; "
            "infinitely long parallel cables) and included in the magnetic field at the cable centres. The "
            "screens of a circuit are joined at both ends, so they share one voltage drop and their currents "
            "sum to zero: no screen current returns through the earth (the basis of IEC 60287-1-1's loss "
            "factors; for unbalanced currents this errs on the high side for B).")
    for bonding, why in (("single_point", "open at one end"),
                         ("cross_bonded", "ideal cross-bonding, equal minor sections, cancels the induced voltages")):
        if ids(bonding):
            items.append(f"Screens {bonding.replace('_', '-')} bonded (circuits {ids(bonding)}) carry no "
                         f"circulating current ({why}); their field comes from the conductor currents alone.")
    if ids(None):
        items.append(f"Circuits without screen data ({ids(None)}): screen and sheath currents neglected.")
    return items


def _observation_points(offset_m, height_m) -> tuple[np.ndarray, np.ndarray]:
    """Broadcast offsets and heights into two flat, contiguous float arrays."""
    try:
        ox, oy = np.broadcast_arrays(np.asarray(offset_m, dtype=float), np.asarray(height_m, dtype=float))
    except (TypeError, ValueError) as exc:
        raise GeometryError("points", f"Input points (offset_m, height_m) must be real numbers of "
                                      f"broadcastable shapes; instead received an error: {exc}.") from None
    return np.ascontiguousarray(ox).ravel(), np.ascontiguousarray(oy).ravel()


def _check_points(ox: np.ndarray, oy: np.ndarray) -> None:
    """Reject non-finite points and points below ground (inside-a-wire: in the fused kernel)."""
    finite_x, finite_y = np.isfinite(ox), np.isfinite(oy)
    if not (finite_x.all() and finite_y.all()):
        i = int(np.argmax(~(finite_x & finite_y)))
        raise must_be(f"points[{i}]", "finite (offset_m, height_m)", (float(ox[i]), float(oy[i])), GeometryError)
    below = oy < 0.0
    if below.any():
        i = int(np.argmax(below))
        raise must_be(f"points[{i}]", "at or above ground (height_m >= 0)", (float(ox[i]), float(oy[i])),
                      GeometryError)


_TILE = 256
"""Points per tile of the fused loop (accumulators stay in L1 cache)."""


@functools.cache
def _fused_kernel():
    """Compile (or load from numba's on-disk cache) the fused E + B + inside-check loop.

    One pass over (point, wire) pairs shares the distances between the electric and
    magnetic sums.  The formulas are those of
    :func:`models.electric.electric_field_phasors` (line charge plus ground image)
    and :func:`models.magnetic.flux_density_phasors` (2-D Biot–Savart); the tests
    check this path against those kernels and against external references.

    Points are taken in tiles of ``_TILE`` with the wire loop outside the point loop,
    so the inner loop is independent across points and compiles to SIMD code
    (``error_model="numpy"``: no zero-division checks; the inside check rejects any
    point on a wire before its values are used, and points below ground, the only
    ones that could meet an image, are rejected earlier).  fastmath is limited to
    re-association and fused multiply-add.  Serial (``nogil``, no ``parallel``):
    safe to call from several threads at once.

    The loop returns ``(point, wire)`` of the first point strictly inside a wire, or
    ``(-1, -1)``.  Wires ``[0, n_e)`` are overhead (E and B); ``[n_e, m)`` are
    screened cables (B only).
    """
    import numba

    tile = _TILE

    @numba.njit(cache=True, nogil=True, error_model="numpy", fastmath={"reassoc", "contract"})
    def fields(ox, oy, cx, cy, radius, q_re, q_im, i_re, i_im, n_e, e_out, b_out):
        ke = 1.0 / (2.0 * np.pi * EPS0_F_PER_M)
        kb = MU0_H_PER_M / (2.0 * np.pi)
        n = ox.size
        m_all = cx.size
        exr = np.empty(tile)
        exi = np.empty(tile)
        eyr = np.empty(tile)
        eyi = np.empty(tile)
        bxr = np.empty(tile)
        bxi = np.empty(tile)
        byr = np.empty(tile)
        byi = np.empty(tile)
        gap = np.empty(tile)          # min over wires of (r^2 - radius^2); < 0: inside
        for t0 in range(0, n, tile):
            m = min(tile, n - t0)
            for j in range(m):
                exr[j] = 0.0
                exi[j] = 0.0
                eyr[j] = 0.0
                eyi[j] = 0.0
                bxr[j] = 0.0
                bxi[j] = 0.0
                byr[j] = 0.0
                byi[j] = 0.0
                gap[j] = np.inf
            for k in range(m_all):
                xk = cx[k]
                yk = cy[k]
                rr = radius[k] * radius[k]
                ir = i_re[k]
                ii = i_im[k]
                if k < n_e:                   # overhead wire: E and B
                    qr = q_re[k]
                    qi = q_im[k]
                    for j in range(m):
                        dx = ox[t0 + j] - xk
                        dy = oy[t0 + j] - yk
                        dx2 = dx * dx
                        r2 = dx2 + dy * dy
                        gap[j] = min(gap[j], r2 - rr)
                        dyi = oy[t0 + j] + yk           # image of the wire at (x_k, -y_k)
                        r2i = dx2 + dyi * dyi
                        w = 1.0 / (r2 * r2i)            # one division for both reciprocals
                        inv = r2i * w
                        inv_i = r2 * w
                        gx = dy * inv                   # B: I (-dy, dx) / r^2
                        gy = dx * inv
                        bxr[j] -= ir * gx
                        bxi[j] -= ii * gx
                        byr[j] += ir * gy
                        byi[j] += ii * gy
                        fx = dx * (inv - inv_i)         # E: charge q at the wire, -q at its image
                        fy = gx - dyi * inv_i
                        exr[j] += qr * fx
                        exi[j] += qi * fx
                        eyr[j] += qr * fy
                        eyi[j] += qi * fy
                else:                             # screened cable: B only
                    for j in range(m):
                        dx = ox[t0 + j] - xk
                        dy = oy[t0 + j] - yk
                        r2 = dx * dx + dy * dy
                        gap[j] = min(gap[j], r2 - rr)
                        inv = 1.0 / r2
                        gx = dy * inv
                        gy = dx * inv
                        bxr[j] -= ir * gx
                        bxi[j] -= ii * gx
                        byr[j] += ir * gy
                        byi[j] += ii * gy
            for j in range(m):
                if gap[j] < 0.0:              # find the wire for the error message
                    p = t0 + j
                    for k in range(m_all):
                        dx = ox[p] - cx[k]
                        dy = oy[p] - cy[k]
                        if dx * dx + dy * dy < radius[k] * radius[k]:
                            return p, k
                e_out[t0 + j, 0] = complex(ke * exr[j], ke * exi[j])
                e_out[t0 + j, 1] = complex(ke * eyr[j], ke * eyi[j])
                b_out[t0 + j, 0] = complex(kb * bxr[j], kb * bxi[j])
                b_out[t0 + j, 1] = complex(kb * byr[j], kb * byi[j])
        return -1, -1

    return fields


def evaluate_cross_section(section: CrossSection, offset_m, height_m, frequency_hz: float, *,
                           soil_resistivity_ohm_m: float | None = None,
                           chunk_size: int = 65536) -> FieldResult:
    """Electric and magnetic field phasors of a line cross-section.

    Parameters
    ----------
    section : CrossSection
        Circuits and earth wires (checked with
        :func:`models.sources.validate_cross_section`).
    offset_m, height_m : float or array_like
        Observation offsets across the line and heights above ground [m];
        broadcast together and flattened in C order (e.g. a lateral profile:
        an offset array with ``height_m=1.0``).  Heights must be >= 0.
    frequency_hz : float
        Power frequency, 1 Hz .. 3 kHz [Hz].
    soil_resistivity_ohm_m : float, optional
        Homogeneous soil resistivity [ohm m].  When given, earth-return currents
        of overhead conductors are modelled with the Deri complex-depth image;
        when None (default) they are neglected.
    chunk_size : int, default 65536
        Points handed to the compiled loop per call.  The loop itself works in
        fixed tiles of 256 points; ``chunk_size`` bounds the temporaries of the
        earth-return term.  Beyond the output (E and B: 64 bytes per point, plus
        16 for ``points_m``) memory use does not grow with the number of points,
        apart from one flat float copy of broadcast inputs.

    Returns
    -------
    FieldResult
        ``points_m`` shape (n, 2) = (offset, height) [m]; ``e_phasor_v_per_m`` and
        ``b_phasor_t`` complex (n, 2) = (horizontal, vertical) rms phasors [V/m], [T];
        ``assumptions`` in plain language.

    Raises
    ------
    GeometryError
        Impossible geometry, or an observation point that is not finite, lies
        below ground or inside a conductor (field ``"points[i]"``, i = flat index).
    LoadingError
        Unknown phase label, bad loading, frequency or soil resistivity.

    Notes
    -----
    E: charge simulation with potential coefficients and images in flat, perfectly
    conducting ground (:mod:`models.electric`); every bundle subconductor is a
    separate line charge at the bundle voltage; earth wires and neutrals at 0 V;
    underground (screened) circuits produce no E outside and are left out of the
    E system.  B: 2-D Biot–Savart over every subconductor, earth wire and cable
    (:mod:`models.magnetic`).  Fields are unperturbed (no person or objects).

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection
    >>> line = CrossSection((Circuit("c1", "overhead", 132.0, 400.0,
    ...     (Conductor("L1", -5.0, 12.0), Conductor("L2", 0.0, 12.0), Conductor("L3", 5.0, 12.0)),
    ...     Bundle(0.025)),))
    >>> res = evaluate_cross_section(line, [0.0, 20.0], 1.0, 50.0)
    >>> res.b_phasor_t.shape, bool(res.b_rms_t[0] > res.b_rms_t[1])
    ((2, 2), True)
    """
    validate_cross_section(section, frequency_hz)
    rho = validate_soil_resistivity(soil_resistivity_ohm_m)
    if isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1:
        raise must_be("chunk_size", "an integer >= 1", chunk_size, GeometryError)
    frequency_hz = float(frequency_hz)
    sources = with_screen_currents(section, build_sources(section), frequency_hz)
    ox, oy = _observation_points(offset_m, height_m)
    _check_points(ox, oy)

    oh = sources.overhead          # E system: overhead wires only (screened cables give no E)
    order = np.concatenate([np.flatnonzero(oh), np.flatnonzero(~oh)])   # overhead wires first
    n_e = int(oh.sum())
    charges = np.zeros(sources.x_m.size, dtype=complex)
    charges[:n_e] = line_charges(sources.x_m[oh], sources.y_m[oh], sources.radius_m[oh], sources.voltage_v[oh])
    p = None if rho is None else complex_depth_m(rho, frequency_hz)
    current = sources.current_a[order]
    wires = (sources.x_m[order], sources.y_m[order], sources.radius_m[order],
             np.ascontiguousarray(charges.real), np.ascontiguousarray(charges.imag),
             np.ascontiguousarray(current.real), np.ascontiguousarray(current.imag), n_e)

    n = ox.size
    e_out = np.empty((n, 2), dtype=complex)
    b_out = np.empty((n, 2), dtype=complex)
    kernel = _fused_kernel()
    for start in range(0, n, int(chunk_size)):
        stop = min(start + int(chunk_size), n)
        i, k = kernel(ox[start:stop], oy[start:stop], *wires, e_out[start:stop], b_out[start:stop])
        if i >= 0:
            i += start
            raise must_be(f"points[{i}]",
                          f"outside the conductors (this point lies inside {sources.fields[order[k]]})",
                          (float(ox[i]), float(oy[i])), GeometryError)
        if p is not None:
            b_out[start:stop] += earth_return_phasors(ox[start:stop], oy[start:stop], sources.x_m[oh],
                                                      sources.y_m[oh], sources.current_a[oh], p)
    return FieldResult(
        points_m=np.column_stack([ox, oy]),
        frequency_hz=frequency_hz,
        e_phasor_v_per_m=e_out,
        b_phasor_t=b_out,
        assumptions=_assumptions(section, sources, frequency_hz, rho),
    )


def warm_up_section() -> float:
    """Compile (or load from numba's on-disk cache) every cross-section kernel now; returns the seconds spent.

    The first evaluation in a process otherwise pays the compilation (a few seconds
    without a cache).  :func:`models.kernels.warm_up` warms every kernel family.

    Examples
    --------
    >>> warm_up_section() >= 0.0
    True
    """
    import time

    t0 = time.perf_counter()
    from .geometry import Bundle, Circuit, Conductor
    from .magnetic import flux_density_phasors
    from .electric import electric_field_phasors

    section = CrossSection((Circuit("warm-up", "overhead", 1.0, 1.0, (Conductor("L1", 0.0, 10.0),), Bundle(0.02)),))
    evaluate_cross_section(section, [0.0], [1.0], 50.0, soil_resistivity_ohm_m=100.0)
    flux_density_phasors([0.0], [1.0], [0.0], [10.0], [1.0])
    electric_field_phasors([0.0], [1.0], [0.0], [10.0], [1e-9])
    return time.perf_counter() - t0
