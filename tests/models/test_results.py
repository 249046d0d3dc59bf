"""Per-point field quantities (models.results): resultant, ellipse axes, axial ratio.

Hand cases are worked out on paper from the definitions in polarisation-ellipse definitions, IEEE Std 644 terms (from memory)
(resultant = root-sum-square of component rms values; maximum = rms along the major axis
of the polarisation ellipse; B_R^2 = B_max^2 + B_min^2; circular field: B_R / B_max =
sqrt(2), DERIVED there as 1.41421).  A brute-force check samples the time signal
sqrt(2) Re(F exp(j wt)) over one cycle, independent of the closed formulas.
"""

from __future__ import annotations

import numpy as np
import pytest

from models.results import FieldResult, axial_ratio, ellipse_axes, resultant_rms

HAND_CASES = [
    # phasor components, resultant, major, minor
    pytest.param([3.0, 4.0], 5.0, 5.0, 0.0, id="linear-in-phase"),
    pytest.param([3.0 * np.exp(0.4j), 4.0 * np.exp(0.4j)], 5.0, 5.0, 0.0, id="linear-common-phase"),
    pytest.param([3.0, -4.0j * 1j], 5.0, 5.0, 0.0, id="linear-antiphase"),
    pytest.param([1.0, 1j], np.sqrt(2.0), 1.0, 1.0, id="circular"),
    pytest.param([2.0, 1j], np.sqrt(5.0), 2.0, 1.0, id="ellipse-2-to-1"),
    pytest.param([0.0, 0.0], 0.0, 0.0, 0.0, id="zero"),
]


@pytest.mark.parametrize("phasor, resultant, major, minor", HAND_CASES)
def test_hand_cases(phasor, resultant, major, minor):
    f = np.array([phasor], dtype=complex)
    got_major, got_minor = ellipse_axes(f)
    assert resultant_rms(f)[0] == pytest.approx(resultant, rel=1e-14, abs=1e-15)
    assert got_major[0] == pytest.approx(major, rel=1e-14, abs=1e-15)
    assert got_minor[0] == pytest.approx(minor, rel=1e-7, abs=1e-7)
    expected_ratio = minor / major if major else 0.0
    assert axial_ratio(f)[0] == pytest.approx(expected_ratio, abs=1e-7)


def test_rotation_of_the_axes_leaves_the_ellipse_unchanged():
    # a real rotation of the coordinate axes changes components but not the ellipse
    theta = 0.7
    rot = np.array([[np.cos(theta), -np.sin(theta)], [np.sin(theta), np.cos(theta)]])
    f = np.array([[2.0, 1j]])
    g = f @ rot.T
    np.testing.assert_allclose(ellipse_axes(g), ellipse_axes(f), rtol=1e-14)
    np.testing.assert_allclose(resultant_rms(g), resultant_rms(f), rtol=1e-14)


def test_circular_resultant_to_maximum_ratio():
    # polarisation-ellipse definitions, IEEE Std 644 terms (from memory): circular field, B_R / B_max = sqrt(2) (1.41421, DERIVED there)
    f = np.array([[5e-6, 5e-6j]])
    assert resultant_rms(f)[0] / ellipse_axes(f)[0][0] == pytest.approx(1.41421, abs=5e-6)


@pytest.mark.parametrize("k", [2, 3], ids=["2-D", "3-D"])
def test_against_time_sampled_signal(k):
    rng = np.random.default_rng(11)
    f = rng.normal(size=(20, k)) + 1j * rng.normal(size=(20, k))
    phi = np.linspace(0, 2 * np.pi, 20000, endpoint=False)
    # instantaneous field / sqrt(2): Re(F exp(j phi)), shape (20, n_phi, k)
    inst = np.real(f[:, None, :] * np.exp(1j * phi)[None, :, None])
    mag = np.linalg.norm(inst, axis=2)
    major, minor = ellipse_axes(f)
    np.testing.assert_allclose(major, mag.max(axis=1), rtol=1e-7)
    if k == 2:   # in 2-D the minimum of the rotating vector is the minor axis
        np.testing.assert_allclose(minor, mag.min(axis=1), rtol=1e-6, atol=2e-6)  # sampling step 3e-4 rad
    # resultant = rms over one cycle of the instantaneous magnitude sqrt(2) |Re(F e^{j phi})|
    np.testing.assert_allclose(resultant_rms(f), np.sqrt(np.mean(2 * mag**2, axis=1)), rtol=1e-12)
    np.testing.assert_allclose(resultant_rms(f) ** 2, major**2 + minor**2, rtol=1e-12)
    assert np.all(major <= resultant_rms(f) + 1e-15)
    assert np.all(resultant_rms(f) <= np.sqrt(2) * major + 1e-15)


def test_field_result_properties():
    e = np.array([[3.0, 4.0], [1.0, 1j]], dtype=complex)
    b = np.array([[2.0, 1j], [0.0, 0.0]], dtype=complex)
    res = FieldResult(np.zeros((2, 2)), 50.0, e, b)
    np.testing.assert_allclose(res.e_rms_v_per_m, [5.0, np.sqrt(2)])
    np.testing.assert_allclose(res.b_rms_t, [np.sqrt(5), 0.0])
    np.testing.assert_allclose(res.e_max_v_per_m, [5.0, 1.0])
    np.testing.assert_allclose(res.b_max_t, [2.0, 0.0])
    np.testing.assert_allclose(res.e_axial_ratio, [0.0, 1.0], atol=1e-7)
    np.testing.assert_allclose(res.b_axial_ratio, [0.5, 0.0])
