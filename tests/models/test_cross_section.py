"""The cross-section orchestrator (models.cross_section.evaluate_cross_section).

Checks:
* result contract (shapes, dtypes, broadcasting, flat C order, assumptions);
* chunking does not change the numbers (chunk of 7 points vs one block);
* symmetry: a flat balanced line's resultant profile is symmetric about the centreline
  (the mirrored phase set is a rotated complex conjugate of the original, so component
  magnitudes mirror; consistency law, magpylib-style);
* underground cables: B from Ampère's closed form (mu0 I / (2 pi r)), no E;
* typed errors (GeometryError / LoadingError naming the input), table-driven with ids.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from models import evaluate_cross_section
from models.errors import EngineInputError, GeometryError, LoadingError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, EarthWire
from models.results import FieldResult


def flat_line(labels=("L1", "L2", "L3"), height=14.0, bundle=Bundle(0.0286, 2, 0.4), earth_wires=True):
    cond = tuple(Conductor(lab, x, height) for lab, x in zip(labels, (-7.0, 0.0, 7.0)))
    ews = (EarthWire(-4.0, height + 8.0, 0.016), EarthWire(4.0, height + 8.0, 0.016)) if earth_wires else ()
    return CrossSection((Circuit("c", "overhead", 275.0, 900.0, cond, bundle),), ews)


def test_result_contract():
    x = np.linspace(-30, 30, 7)
    res = evaluate_cross_section(flat_line(), x, 1.0, 50.0)
    assert isinstance(res, FieldResult)
    assert res.points_m.shape == (7, 2) and res.points_m.dtype == float
    np.testing.assert_array_equal(res.points_m[:, 0], x)
    np.testing.assert_array_equal(res.points_m[:, 1], 1.0)
    for arr in (res.e_phasor_v_per_m, res.b_phasor_t):
        assert arr.shape == (7, 2) and arr.dtype == complex and np.isfinite(arr).all()
    assert res.frequency_hz == 50.0
    text = " ".join(res.assumptions)
    for phrase in ("two-dimensional", "perfectly conducting ground", "subconductor", "earth-return currents are neglected",
                   "Earth wires", "Unperturbed"):
        assert phrase in text


def test_grid_broadcasts_and_flattens_in_c_order():
    x = np.linspace(-20, 20, 5)
    y = np.array([0.0, 1.0, 2.0])
    grid = evaluate_cross_section(flat_line(), x[None, :], y[:, None], 60.0)
    assert grid.points_m.shape == (15, 2)
    row = evaluate_cross_section(flat_line(), x, 2.0, 60.0)
    np.testing.assert_array_equal(grid.b_phasor_t[10:], row.b_phasor_t)
    np.testing.assert_array_equal(grid.e_phasor_v_per_m[10:], row.e_phasor_v_per_m)
    single = evaluate_cross_section(flat_line(), 3.0, 1.0, 50.0)
    assert single.points_m.shape == (1, 2)


def test_chunking_gives_the_same_numbers():
    x = np.linspace(-50, 50, 101)
    whole = evaluate_cross_section(flat_line(), x, 1.0, 50.0, soil_resistivity_ohm_m=100.0)
    parts = evaluate_cross_section(flat_line(), x, 1.0, 50.0, soil_resistivity_ohm_m=100.0, chunk_size=7)
    np.testing.assert_array_equal(parts.b_phasor_t, whole.b_phasor_t)
    np.testing.assert_array_equal(parts.e_phasor_v_per_m, whole.e_phasor_v_per_m)


@pytest.mark.parametrize("labels", [("L1", "L2", "L3"), ("L3", "L2", "L1"), ("R", "Y", "B")], ids=["L123", "L321", "RYB"])
def test_flat_balanced_line_profile_is_symmetric(labels):
    x = np.linspace(0.0, 60.0, 61)
    res = evaluate_cross_section(flat_line(labels), np.concatenate([x, -x]), 1.0, 50.0)
    for values in (res.e_rms_v_per_m, res.b_rms_t, res.e_max_v_per_m, res.b_max_t):
        np.testing.assert_allclose(values[:61], values[61:], rtol=1e-10)
    # and the field is not trivially flat: it falls off away from the line
    assert res.b_rms_t[60] < 0.2 * res.b_rms_t[0]


def test_unbalanced_asymmetric_loading_breaks_symmetry():
    # guard against a symmetry test that cannot fail: a single energised outer phase is asymmetric
    x = np.linspace(5.0, 40.0, 8)
    res = evaluate_cross_section(flat_line(("L1", "N", "N")), np.concatenate([x, -x]), 1.0, 50.0)
    assert np.abs(res.b_rms_t[:8] - res.b_rms_t[8:]).max() > 0.05 * res.b_rms_t.max()


def test_underground_cable_closed_form():
    # Ampère: each cable contributes mu0 I / (2 pi r); E is zero (screened cable)
    depth = 1.1
    c = Circuit("cable", "underground", 132.0, 700.0,
                tuple(Conductor(p, x, -depth) for p, x in zip(("L1", "L2", "L3"), (-0.25, 0.0, 0.25))), Bundle(0.05))
    x = np.linspace(-5, 5, 11)
    res = evaluate_cross_section(CrossSection((c,)), x, 0.0, 50.0)
    seq = 700.0 * np.exp(1j * np.radians([0.0, -120.0, 120.0]))
    bx = np.zeros(11, complex)
    by = np.zeros(11, complex)
    for xc, i in zip((-0.25, 0.0, 0.25), seq):
        r2 = (x - xc) ** 2 + depth**2
        bx += -sc.mu_0 * i / (2 * math.pi) * depth / r2
        by += sc.mu_0 * i / (2 * math.pi) * (x - xc) / r2
    np.testing.assert_allclose(res.b_phasor_t[:, 0], bx, rtol=1e-12)
    np.testing.assert_allclose(res.b_phasor_t[:, 1], by, rtol=1e-12, atol=1e-12 * np.abs(bx).max())
    np.testing.assert_array_equal(res.e_phasor_v_per_m, 0.0)
    assert any("Underground" in a for a in res.assumptions)


def test_earth_wire_reduces_the_field_beneath_the_line():
    # a grounded wire above the phases carries induced charge of opposite sign and screens
    # the ground-level E somewhat (common practice); it must not increase it
    x = np.linspace(-10, 10, 21)
    with_ew = evaluate_cross_section(flat_line(), x, 1.0, 50.0).e_rms_v_per_m
    without = evaluate_cross_section(flat_line(earth_wires=False), x, 1.0, 50.0).e_rms_v_per_m
    assert np.all(with_ew < without)


# ----------------------------------------------------------------------------- typed errors

def one_conductor(**kw):
    return Conductor(kw.pop("phase", "L1"), kw.pop("offset_m", 0.0), kw.pop("height_m", 12.0))


@pytest.mark.parametrize(
    "section, x, y, f_hz, kwargs, error, field, match",
    [
        pytest.param(CrossSection((Circuit("c", "overhead", 132.0, 500.0, (one_conductor(), one_conductor()), Bundle(0.03)),)),
                     0.0, 1.0, 50.0, {}, GeometryError, "cross_section.circuits[0].conductors[1]", "coincident",
                     id="coincident-conductors"),
        pytest.param(CrossSection((Circuit("c", "overhead", 132.0, 500.0, (one_conductor(),), Bundle(0.0)),)),
                     0.0, 1.0, 50.0, {}, GeometryError, "cross_section.circuits[0].bundle.subconductor_diameter_m", "> 0",
                     id="zero-diameter"),
        pytest.param(CrossSection((Circuit("c", "overhead", 132.0, 500.0, (one_conductor(height_m=-3.0),), Bundle(0.03)),)),
                     0.0, 1.0, 50.0, {}, GeometryError, "cross_section.circuits[0].conductors[0].height_m", "overhead",
                     id="overhead-below-ground"),
        pytest.param(flat_line(), [0.0, 5.0, -3.0, 7.205], [1.0, 1.0, 1.0, 14.0], 50.0, {}, GeometryError, "points[3]",
                     r"inside cross_section\.circuits\[0\]\.conductors\[2\]", id="point-inside-subconductor"),
        pytest.param(flat_line(), [0.0, 4.0], [1.0, 22.005], 50.0, {}, GeometryError, "points[1]",
                     r"inside cross_section\.earth_wires\[1\]", id="point-inside-earth-wire"),
        pytest.param(flat_line(), [0.0, 1.0, 2.0], [1.0, -0.5, 1.0], 50.0, {}, GeometryError, "points[1]",
                     "at or above ground", id="point-below-ground"),
        pytest.param(flat_line(), [0.0, np.nan], 1.0, 50.0, {}, GeometryError, "points[1]", "finite",
                     id="point-nan"),
        pytest.param(flat_line(), [[0.0, 1.0]], [0.0, 1.0, 2.0], 50.0, {}, GeometryError, "points", "broadcastable",
                     id="points-shape-mismatch"),
        pytest.param(flat_line(("L1", "L2", "Z")), 0.0, 1.0, 50.0, {}, LoadingError,
                     "cross_section.circuits[0].conductors[2].phase", "one of", id="unknown-phase"),
        pytest.param(flat_line(), 0.0, 1.0, 0.0, {}, LoadingError, "frequency_hz", "between 1 and 3000",
                     id="frequency-zero"),
        pytest.param(flat_line(), 0.0, 1.0, 1e4, {}, LoadingError, "frequency_hz", "between 1 and 3000",
                     id="frequency-10kHz"),
        pytest.param(flat_line(), 0.0, 1.0, 50.0, {"soil_resistivity_ohm_m": -5.0}, LoadingError,
                     "soil_resistivity_ohm_m", "> 0", id="negative-resistivity"),
        pytest.param(flat_line(), 0.0, 1.0, 50.0, {"chunk_size": 0}, GeometryError, "chunk_size", ">= 1",
                     id="zero-chunk"),
    ],
)
def test_typed_errors(section, x, y, f_hz, kwargs, error, field, match):
    with pytest.raises(error, match=match) as info:
        evaluate_cross_section(section, x, y, f_hz, **kwargs)
    assert info.value.field == field
    assert isinstance(info.value, EngineInputError) and isinstance(info.value, ValueError)


def test_point_on_a_wire_surface_is_accepted():
    # the surface itself is outside the conductor: the surface field is a legitimate result
    res = evaluate_cross_section(flat_line(), 7.2 + 0.0143, 14.0, 50.0)
    assert np.isfinite(res.e_phasor_v_per_m).all() and np.isfinite(res.b_phasor_t).all()


def test_fused_path_matches_the_separate_kernels():
    # The orchestrator evaluates E, B and the inside check in one fused loop; it must agree
    # with the per-quantity kernels (each checked against closed forms, Gauss, Ampère and
    # magpylib in test_electric.py / test_magnetic.py).  Mixed section: overhead line, earth
    # wires, and an underground cable (B only, no E, excluded from the charge system).
    from models.electric import electric_field_phasors, line_charges
    from models.magnetic import complex_depth_m, flux_density_phasors
    from models.sources import build_sources

    line = flat_line()
    cable = Circuit("cable", "underground", 132.0, 650.0,
                    tuple(Conductor(p, 20.0 + x, -1.0) for p, x in zip(("L1", "L2", "L3"), (-0.2, 0.0, 0.2))),
                    Bundle(0.05))
    section = CrossSection(line.circuits + (cable,), line.earth_wires)
    x, y = np.meshgrid(np.linspace(-40, 40, 17), [0.0, 1.0, 5.0, 30.0])
    res = evaluate_cross_section(section, x, y, 50.0, soil_resistivity_ohm_m=300.0, chunk_size=13)
    src = build_sources(section)
    oh = src.overhead
    assert (~oh).sum() == 3
    q = line_charges(src.x_m[oh], src.y_m[oh], src.radius_m[oh], src.voltage_v[oh])
    e = electric_field_phasors(x, y, src.x_m[oh], src.y_m[oh], q)
    b = (flux_density_phasors(x, y, src.x_m[oh], src.y_m[oh], src.current_a[oh],
                              complex_depth_m=complex_depth_m(300.0, 50.0))
         + flux_density_phasors(x, y, src.x_m[~oh], src.y_m[~oh], src.current_a[~oh]))
    np.testing.assert_allclose(res.e_phasor_v_per_m, e, rtol=1e-12, atol=1e-12 * np.abs(e).max())
    np.testing.assert_allclose(res.b_phasor_t, b, rtol=1e-12, atol=1e-12 * np.abs(b).max())


def test_concurrent_calls_from_threads_agree_with_a_serial_call():
    # The compiled loops are serial and release the GIL (nogil): a threaded web worker may
    # call the engine from several threads at once and must get identical numbers.
    from concurrent.futures import ThreadPoolExecutor

    x = np.linspace(-60, 60, 5001)
    serial = evaluate_cross_section(flat_line(), x, 1.0, 50.0)
    with ThreadPoolExecutor(max_workers=4) as pool:
        results = list(pool.map(lambda _: evaluate_cross_section(flat_line(), x, 1.0, 50.0), range(8)))
    for res in results:
        np.testing.assert_array_equal(res.e_phasor_v_per_m, serial.e_phasor_v_per_m)
        np.testing.assert_array_equal(res.b_phasor_t, serial.b_phasor_t)


# ----------------------------------------------------------------------------- integral laws, random lines

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@st.composite
def random_line(draw):
    """Three single conductors at random, well separated positions, with random loading."""
    xs = draw(st.lists(st.floats(-15.0, 15.0), min_size=3, max_size=3))
    ys = draw(st.lists(st.floats(6.0, 30.0), min_size=3, max_size=3))
    pts = np.column_stack([xs, ys])
    sep = min(np.hypot(*(pts[i] - pts[j])) for i in range(3) for j in range(i + 1, 3))
    if sep < 1.0:
        xs = [-8.0, 0.0, 8.0]                       # replace a crowded draw by a flat line
        sep = 8.0
    current = draw(st.floats(10.0, 3000.0))
    kv = draw(st.floats(10.0, 500.0))
    offset = draw(st.floats(-180.0, 180.0))
    cond = tuple(Conductor(lab, x, y) for lab, x, y in zip(("L1", "L2", "L3"), xs, ys))
    return CrossSection((Circuit("c", "overhead", kv, current, cond, Bundle(0.03), angle_offset_deg=offset),)), sep


@settings(max_examples=25, deadline=None)
@given(random_line())
def test_ampere_and_gauss_hold_on_random_lines(case):
    # Ampère: closed integral of B . dl around each conductor = mu0 I_k (end-to-end fused path);
    # Gauss: outward flux of eps0 E around each conductor = its line charge q_k.
    from models.electric import line_charges
    from models.sources import build_sources

    section, sep = case
    src = build_sources(section)
    q = line_charges(src.x_m, src.y_m, src.radius_m, src.voltage_v)
    t = np.linspace(0, 2 * np.pi, 512, endpoint=False)
    a = min(0.3 * sep, 0.5 * src.y_m.min())                    # circles clear of other wires and ground
    for k in range(3):
        px, py = src.x_m[k] + a * np.cos(t), src.y_m[k] + a * np.sin(t)
        res = evaluate_cross_section(section, px, py, 50.0)
        dlx, dly = -a * np.sin(t), a * np.cos(t)                 # dl / dt, counter-clockwise
        circ = np.sum(res.b_phasor_t[:, 0] * dlx + res.b_phasor_t[:, 1] * dly) * (2 * np.pi / t.size)
        assert abs(circ - sc.mu_0 * src.current_a[k]) <= 1e-9 * sc.mu_0 * np.abs(src.current_a).max()
        flux = sc.epsilon_0 * np.sum(res.e_phasor_v_per_m[:, 0] * dly - res.e_phasor_v_per_m[:, 1] * dlx) * (2 * np.pi / t.size)
        assert abs(flux - q[k]) <= 1e-9 * np.abs(q).max()
