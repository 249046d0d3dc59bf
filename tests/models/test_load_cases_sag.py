"""Load cases that change a route's sag (conductor temperature): models/load_cases.py on routes.

The route as given is the hot case (maximum design temperature, largest sag); a case
gives the cooler sag.  References:

- level-span catenary: the lowest point of a level span lies at mid-span, one sag
  below the attachments (catenary of a uniform flexible cable, D = C (cosh(L/2C) - 1);
  engineering handbook relation, common practice, any statics text); the parabolic
  relation D = w L^2 / (8 H) for the sag from tension and weight (same source);
- Ampère's law for a long straight conductor, B = mu0 I / (2 pi r) (mu0 from
  scipy.constants, CODATA 2018), the Biot-Savart limit of a long flat span at mid-span;
- superposition/consistency: a case equals the route built with that sag directly.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from models.cross_section import evaluate_cross_section
from models.errors import EngineInputError, GeometryError, LoadingError
from models.geometry import Bundle, Circuit, Conductor, CrossSection, EarthWire
from models.load_cases import LoadCase, apply_loading, evaluate_load_cases
from models.route import lowest_point, parabolic_sag_m
from models.route.evaluate import evaluate_route
from models.route.sets import EvaluationSets, LateralProfileSet, Receptor
from models.route.types import Route, RouteCircuit, RouteConductor, RouteEarthWire, Support

F_HZ = 50.0
SPAN_M = 2000.0
ATTACH_M = 20.0
HOT_SAG_M = 8.0
COOL_SAG_M = 2.0
PHASES = (("L1", -8.0), ("L2", 0.0), ("L3", 8.0))
BUNDLE = Bundle(0.03, 2, 0.4)
MID = EvaluationSets(lateral_profile=LateralProfileSet(SPAN_M / 2, -40.0, 40.0, 5.0, 1.0))


def one_span(sag_m: float = HOT_SAG_M, *, tension_n: float | None = None, weight_n_per_m: float | None = None,
             earth_wire_sag_m: float = 3.0) -> Route:
    """An invented 220 kV single circuit on one long level span (hot sag unless told)."""
    kw = {} if tension_n is None else {"horizontal_tension_n": tension_n, "weight_n_per_m": weight_n_per_m}
    conductors = tuple(RouteConductor(p, o, ATTACH_M, 0.0 if tension_n else sag_m, **kw) for p, o in PHASES)
    circuit = RouteCircuit("c1", "overhead", 220.0, 600.0, conductors, BUNDLE)
    return Route((Support("A", 0.0, 0.0), Support("B", 0.0, SPAN_M)), (circuit,),
                 (RouteEarthWire(0.0, 28.0, 0.012, earth_wire_sag_m),))


def section(sag_m: float, earth_wire_sag_m: float = 3.0) -> CrossSection:
    """The 2-D section at mid-span: attachment heights less the sags."""
    circuit = Circuit("c1", "overhead", 220.0, 600.0, tuple(Conductor(p, o, ATTACH_M - sag_m) for p, o in PHASES),
                      BUNDLE)
    return CrossSection((circuit,), (EarthWire(0.0, 28.0 - earth_wire_sag_m, 0.012),))


def cases(route: Route, *load_cases: LoadCase, sets: EvaluationSets = MID):
    return evaluate_load_cases(route, list(load_cases), lambda r: evaluate_route(r, F_HZ, sets))


def test_lowest_point_of_the_cool_case_is_attachment_height_less_the_sag():
    # level span: the catenary's low point is at mid-span, one sag below the attachments
    hot = one_span()
    cool = apply_loading(hot, sag_m={"c1": COOL_SAG_M}, earth_wire_sag_m=[1.0])
    assert lowest_point(hot).height_m == pytest.approx(ATTACH_M - HOT_SAG_M, abs=1e-9)
    low = lowest_point(cool)
    assert low.height_m == pytest.approx(ATTACH_M - COOL_SAG_M, abs=1e-9)
    assert low.span == 0 and low.wire.startswith("route.circuits[0].conductors[")
    assert [k.sag_m for k in cool.circuits[0].conductors] == [COOL_SAG_M] * 3
    assert cool.earth_wires[0].sag_m == 1.0 and hot.circuits[0].conductors[0].sag_m == HOT_SAG_M  # base unchanged


def test_a_case_sag_replaces_a_tension_and_weight_definition():
    # hot case from tension and weight; the parabolic relation D = w L^2 / (8 H) gives its sag
    # to within the parabola's error (~ (D/L)^2 relative, here < 1e-4)
    w, h_hot = 15.0, 15.0 * SPAN_M**2 / (8.0 * HOT_SAG_M)
    hot = one_span(tension_n=h_hot, weight_n_per_m=w)
    d_hot = ATTACH_M - lowest_point(hot).height_m
    assert d_hot == pytest.approx(parabolic_sag_m(SPAN_M, w, h_hot), rel=1e-4)
    cool = apply_loading(hot, sag_m={"c1": COOL_SAG_M})
    k = cool.circuits[0].conductors[0]
    assert (k.sag_m, k.horizontal_tension_n, k.weight_n_per_m) == (COOL_SAG_M, None, None)
    assert lowest_point(cool).height_m == pytest.approx(ATTACH_M - COOL_SAG_M, abs=1e-9)


def test_case_equals_the_route_built_with_the_cool_sag():
    (_, _, ev), = cases(one_span(), LoadCase("cool", sag_m={"c1": COOL_SAG_M}, earth_wire_sag_m=(1.0,)))
    direct = evaluate_route(one_span(COOL_SAG_M, earth_wire_sag_m=1.0), F_HZ, MID)
    np.testing.assert_array_equal(ev.combined.b_phasor_t, direct.combined.b_phasor_t)
    np.testing.assert_array_equal(ev.combined.e_phasor_v_per_m, direct.combined.e_phasor_v_per_m)


def test_b_under_mid_span_falls_when_the_sag_falls_and_approaches_the_2d_section():
    hot = evaluate_route(one_span(), F_HZ, MID).sets["lateral_profile"]
    (_, _, ev), = cases(one_span(), LoadCase("cool", sag_m={"c1": COOL_SAG_M}))
    cool = ev.sets["lateral_profile"]
    # the conductors are 6 m farther from every point under mid-span: B lower at each
    assert np.all(cool.field.b_rms_t < hot.field.b_rms_t)
    # Biot-Savart limit: a long, nearly flat span at mid-span is the infinite line of the 2-D
    # section at the mid-span height; residual from the span's curvature and finite length
    # (measured at most 1.4e-3 for B, 1.6e-3 for E at 8 m and 2 m sag): within 2.5e-3 / 3e-3
    for sag, prof in ((HOT_SAG_M, hot), (COOL_SAG_M, cool)):
        ref = evaluate_cross_section(section(sag), prof.offset_m, 1.0, F_HZ)
        np.testing.assert_allclose(prof.field.b_rms_t, ref.b_rms_t, rtol=2.5e-3)
        np.testing.assert_allclose(prof.field.e_rms_v_per_m, ref.e_rms_v_per_m, rtol=3e-3)


def test_single_conductor_under_mid_span_follows_amperes_law_in_both_cases():
    circuit = RouteCircuit("c1", "overhead", 0.0, 1000.0, (RouteConductor("L1", 0.0, ATTACH_M, HOT_SAG_M),),
                           Bundle(0.03))
    route = Route((Support("A", 0.0, 0.0), Support("B", 0.0, SPAN_M)), (circuit,))
    sets = EvaluationSets(receptors=(Receptor("m", "under mid-span", 0.0, SPAN_M / 2, 1.0),))
    base = evaluate_route(route, F_HZ, sets).sets["receptors"].field.b_rms_t[0]
    (_, _, ev), = cases(route, LoadCase("cool", sag_m={"c1": COOL_SAG_M}), sets=sets)
    cool = ev.sets["receptors"].field.b_rms_t[0]
    for b, sag in ((base, HOT_SAG_M), (cool, COOL_SAG_M)):
        # B = mu0 I / (2 pi r), r = attachment - sag - receptor height; finite curved span: within 2e-3
        assert b == pytest.approx(sc.mu_0 * 1000.0 / (2 * math.pi * (ATTACH_M - sag - 1.0)), rel=2e-3)
    assert cool < base


def test_a_sag_the_span_cannot_take_names_the_case_member():
    with pytest.raises(GeometryError) as err:
        cases(one_span(), LoadCase("cool", current_scale=0.5), LoadCase("x", sag_m={"c1": 21.0}))
    assert err.value.field == "load_cases[1].sag_m.c1" and "clear of the ground" in err.value.message
    with pytest.raises(GeometryError) as err:
        cases(one_span(), LoadCase("x", earth_wire_sag_m=(29.0,)))
    assert err.value.field == "load_cases[0].earth_wire_sag_m[0]"


@pytest.mark.parametrize("kwargs, error, field", [
    ({"sag_m": {"zz": 1.0}}, LoadingError, "load_case.sag_m.zz"),
    ({"sag_m": {"c1": -1.0}}, LoadingError, "load_case.sag_m.c1"),
    ({"sag_m": {"c1": math.nan}}, LoadingError, "load_case.sag_m.c1"),
    ({"earth_wire_sag_m": [1.0, 2.0]}, GeometryError, "load_case.earth_wire_sag_m"),
    ({"earth_wire_sag_m": [-0.5]}, LoadingError, "load_case.earth_wire_sag_m[0]"),
])
def test_bad_case_sags_name_the_field(kwargs, error, field):
    with pytest.raises(error) as err:
        apply_loading(one_span(), **kwargs)
    assert err.value.field == field


def test_cross_section_and_underground_circuits_have_no_sag_to_change():
    with pytest.raises(GeometryError) as err:
        apply_loading(section(0.0), sag_m={"c1": 1.0})
    assert err.value.field == "load_case.sag_m" and "no spans" in err.value.message
    cable = RouteCircuit("u1", "underground", 132.0, 500.0,
                         tuple(RouteConductor(p, o, -1.2) for p, o in (("L1", -0.3), ("L2", 0.0), ("L3", 0.3))),
                         Bundle(0.05))
    route = Route((Support("A", 0.0, 0.0), Support("B", 0.0, 300.0)), (cable,))
    with pytest.raises(EngineInputError) as err:
        apply_loading(route, sag_m={"u1": 0.5})
    assert err.value.field == "load_case.sag_m.u1" and "underground" in err.value.message
    assert lowest_point(route) is None  # no overhead phase conductor
