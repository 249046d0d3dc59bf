"""Load cases (models/load_cases.py): other loading of the same cross-section.

References: Ampère's law for a long straight conductor, B = mu0 I / (2 pi r)
(mu0 from scipy.constants, CODATA); superposition, i.e. linearity of the quasi-static
fields in the sources (B in the currents, E in the voltages), checked against the
engine evaluated on sections built independently of apply_loading.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from models import evaluate_cross_section
from models.errors import LoadingError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, CurrentPhasor, EarthWire
from models.load_cases import apply_loading

X = np.linspace(-40.0, 40.0, 17)


def two_circuits(i1=900.0, i2=600.0, u1=275.0, u2=132.0) -> CrossSection:
    left = Circuit("west", "overhead", u1, i1, tuple(Conductor(p, x, 14.0) for p, x in
                                                     zip(("L1", "L2", "L3"), (-12.0, -8.0, -4.0))), Bundle(0.03))
    right = Circuit("east", "overhead", u2, i2, tuple(Conductor(p, x, 12.0) for p, x in
                                                      zip(("L1", "L2", "L3"), (4.0, 8.0, 12.0))), Bundle(0.03))
    return CrossSection((left, right), (EarthWire(0.0, 22.0, 0.012, CurrentPhasor(20.0, 30.0)),))


def field(section):
    return evaluate_cross_section(section, X, 1.0, 50.0)


def test_current_scale_scales_b_and_leaves_e():
    base, scaled = field(two_circuits()), field(apply_loading(two_circuits(), current_scale=1.7))
    np.testing.assert_allclose(scaled.b_phasor_t, 1.7 * base.b_phasor_t, rtol=1e-12, atol=1e-18)
    np.testing.assert_array_equal(scaled.e_phasor_v_per_m, base.e_phasor_v_per_m)


def test_replacing_one_circuit_current_is_superposition():
    # B(west at 0 A, east as given) = B(section with west's current set to 0 directly).
    changed = field(apply_loading(two_circuits(), currents_a={"west": 0.0}))
    reference = field(two_circuits(i1=0.0))
    np.testing.assert_allclose(changed.b_phasor_t, reference.b_phasor_t, rtol=1e-13, atol=1e-18)
    # and the difference to the base case is the west circuit's own field, scaled
    base = field(two_circuits())
    west_only = field(two_circuits(i1=900.0, i2=0.0)).b_phasor_t - field(two_circuits(i1=0.0, i2=0.0)).b_phasor_t
    np.testing.assert_allclose(base.b_phasor_t - changed.b_phasor_t, west_only, rtol=1e-9,
                               atol=1e-12 * np.abs(west_only).max())


def test_voltage_replacement_scales_e_of_a_single_circuit():
    one = CrossSection((two_circuits().circuits[0],))
    base = field(one)
    raised = field(apply_loading(one, voltages_kv={"west": 275.0 * 1.05}))
    np.testing.assert_allclose(raised.e_phasor_v_per_m, 1.05 * base.e_phasor_v_per_m, rtol=1e-12, atol=1e-12)
    np.testing.assert_array_equal(raised.b_phasor_t, base.b_phasor_t)


def test_single_conductor_against_amperes_law():
    c = Circuit("c", "underground", 0.0, 100.0, (Conductor("L1", 0.0, -1.2),), Bundle(0.05))
    res = evaluate_cross_section(apply_loading(CrossSection((c,)), currents_a={"c": 1234.0}), X, 1.0, 50.0)
    r = np.hypot(X, 2.2)
    np.testing.assert_allclose(res.b_rms_t, sc.mu_0 * 1234.0 / (2 * math.pi * r), rtol=1e-12)


def test_explicit_phasors_are_scaled_and_kept():
    c = Circuit("c", "overhead", 132.0, 500.0, (Conductor("L1", 0.0, 12.0, current=CurrentPhasor(300.0, 10.0)),
                                                 Conductor("L2", 4.0, 12.0)), Bundle(0.03))
    out = apply_loading(CrossSection((c,), (EarthWire(0, 20, 0.01, CurrentPhasor(5.0, 0.0)),)),
                        currents_a={"c": 800.0}, current_scale=2.0)
    k = out.circuits[0].conductors
    assert (k[0].current.magnitude_a, k[0].current.angle_deg) == (600.0, 10.0)
    assert k[1].current is None and out.circuits[0].current_a == 1600.0
    assert out.earth_wires[0].current.magnitude_a == 10.0


@pytest.mark.parametrize("kwargs, field_name", [
    ({"currents_a": {"north": 1.0}}, "load_cases[0].currents_a.north"),
    ({"voltages_kv": {"north": 1.0}}, "load_cases[0].voltages_kv.north"),
    ({"currents_a": {"west": -1.0}}, "load_cases[0].currents_a.west"),
    ({"voltages_kv": {"east": float("nan")}}, "load_cases[0].voltages_kv.east"),
    ({"current_scale": -0.5}, "load_cases[0].current_scale"),
    ({"current_scale": float("inf")}, "load_cases[0].current_scale"),
])
def test_bad_loading_names_the_field(kwargs, field_name):
    with pytest.raises(LoadingError) as info:
        apply_loading(two_circuits(), field="load_cases[0]", **kwargs)
    assert info.value.field == field_name


def test_route_loading_reaches_the_3d_sources():
    # The same function on a route: the discretised segments carry the new currents
    # (B is linear in them, Biot-Savart), the wires the new voltages.
    from models.route.discretise import discretise_route
    from models.route.types import Route, RouteCircuit, RouteConductor, Support

    route = Route((Support("a", 0.0, 0.0), Support("b", 300.0, 0.0)),
                  (RouteCircuit("c1", "overhead", 132.0, 500.0,
                                tuple(RouteConductor(p, x, 15.0, 3.0) for p, x in
                                      zip(("L1", "L2", "L3"), (-4.0, 0.0, 4.0))), Bundle(0.03)),))
    changed = apply_loading(route, currents_a={"c1": 800.0}, voltages_kv={"c1": 150.0}, current_scale=0.5)
    assert isinstance(changed, Route) and changed.supports == route.supports
    base, new = discretise_route(route, tolerance_m=0.05), discretise_route(changed, tolerance_m=0.05)
    np.testing.assert_array_equal(new.start_m, base.start_m)
    np.testing.assert_allclose(new.current_a, base.current_a * 400.0 / 500.0, rtol=1e-15)
    np.testing.assert_allclose(new.wire_voltage_v, base.wire_voltage_v * 150.0 / 132.0, rtol=1e-15)
    with pytest.raises(LoadingError) as info:
        apply_loading(route, currents_a={"c2": 1.0}, field="load_cases[3]")
    assert info.value.field == "load_cases[3].currents_a.c2"
