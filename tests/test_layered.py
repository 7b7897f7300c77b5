"""Tests of soilwave.layered: two-way times, depth conversion, RMS velocity, NMO, Dix.

Sources: /work/shared/references.md "Travel times" (derived checks; Dix 1955,
Geophysics 20:68-86, checked) and identities of layered-earth kinematics.
"""

import itertools

import numpy as np
import pytest
from scipy.optimize import brentq

from soilwave.errors import InputError
from soilwave.layered import (
    depth_to_twt,
    dix_interval_velocity,
    interface_depths,
    nmo_time,
    rms_velocity,
    twt_to_depth,
    vertical_twt,
)
from soilwave.wave import wave_velocity

# references.md two-layer example: 0.5 m of e 9 over 0.5 m of e 25
H2 = np.array([0.5, 0.5])
V2 = np.asarray(wave_velocity([9.0, 25.0]))


def test_interface_depths():
    assert np.allclose(interface_depths([0.2, 0.3, 0.5]), [0.2, 0.5, 1.0], rtol=1e-15)
    d = interface_depths(np.array([[1.0, 2.0], [0.5, 0.25]]))
    assert np.allclose(d, [[1.0, 3.0], [0.5, 0.75]], rtol=1e-15)


def test_vertical_twt_two_layer_example():
    # derived from t = 2 h sqrt(e) / c for the references.md two-layer model:
    # 2*0.5*3/0.299792458 = 10.0069 ns; + 2*0.5*5/0.299792458 = 26.6851 ns
    t = vertical_twt(H2, V2)
    assert t == pytest.approx([10.0069, 26.6851], abs=5e-5)


def test_one_layer_reflection_matches_reference_and_nmo_is_exact():
    # references.md derived: reflector at 1 m in e 9, x = 0.5, 1, 2, 4 m ->
    # 20.6298, 22.3762, 28.3039, 44.7523 ns; for one layer the hyperbola is exact
    v = float(wave_velocity(9.0))
    x = np.array([0.5, 1.0, 2.0, 4.0])
    t0 = vertical_twt([1.0], [v])[-1]
    t = nmo_time(x, t0, rms_velocity([1.0], [v])[-1])
    assert t == pytest.approx([20.6298, 22.3762, 28.3039, 44.7523], abs=5e-5)
    # geometry of the straight reflected ray: 2 sqrt(h^2 + (x/2)^2) / v
    assert np.allclose(t, 2 * np.sqrt(1.0 + (x / 2) ** 2) / v, rtol=1e-13)


def test_two_layer_hyperbola_matches_reference():
    # references.md derived: hyperbolic (t0, V_rms) times 29.6478 ns at 1 m, 37.1441 ns at 2 m
    t0 = vertical_twt(H2, V2)[-1]
    vrms = rms_velocity(H2, V2)[-1]
    assert nmo_time([1.0, 2.0], t0, vrms) == pytest.approx([29.6478, 37.1441], abs=5e-5)


def _exact_reflection(x, h, v):
    """Independent exact ray trace with scipy brentq (references.md parametric x(p), t(p))."""
    pmax = 1 / v.max()

    def offset(p):
        return np.sum(2 * h * p * v / np.sqrt(1 - (p * v) ** 2)) - x

    p = brentq(offset, 0.0, pmax * (1 - 1e-12), xtol=1e-16, rtol=1e-15)
    return np.sum(2 * h / (v * np.sqrt(1 - (p * v) ** 2)))


def _exact_reflection_angles(x, h, v):
    """Second independent form: Snell's law sin(a_i)/v_i = const, x = sum 2 h_i tan(a_i)."""

    def legs(a1):
        a = np.arcsin(np.sin(a1) * v / v[0])
        return np.sum(2 * h * np.tan(a)), np.sum(2 * h / (v * np.cos(a)))

    a_max = np.arcsin(min(1.0, v[0] / v.max())) * (1 - 1e-12)
    a1 = brentq(lambda a: legs(a)[0] - x, 0.0, a_max, xtol=1e-15, rtol=1e-15)
    return legs(a1)[1]


def test_hyperbola_is_small_spread_limit_of_exact_time():
    # references.md derived exact two-layer time 29.6052 ns at 1 m (the truncated 29.60528,
    # hence one unit of the last decimal as tolerance). At 2 m references.md lists 36.6584 ns,
    # but both the ray-parameter form and the angle form (_exact_reflection_angles) give
    # 36.65892 ns; the test pins the recomputed value (discrepancy reported to the lead)
    assert _exact_reflection(1.0, H2, V2) == pytest.approx(29.6052, abs=1e-4)
    assert _exact_reflection(2.0, H2, V2) == pytest.approx(36.6589, abs=5e-5)
    assert _exact_reflection_angles(2.0, H2, V2) == pytest.approx(36.6589, abs=5e-5)
    # Dix (1955) / Taner & Koehler (1969): t^2 = t0^2 + x^2/V_rms^2 + O(x^4), so the
    # squared-time misfit divided by x^2 vanishes as x -> 0
    t0 = vertical_twt(H2, V2)[-1]
    vrms = rms_velocity(H2, V2)[-1]
    ratios = []
    for x in (0.4, 0.2, 0.1, 0.05):
        misfit = (nmo_time(x, t0, vrms) ** 2 - _exact_reflection(x, H2, V2) ** 2) / x**2
        ratios.append(abs(misfit))
    assert ratios[-1] < 1e-3 * (1 / vrms**2)
    assert all(b < a for a, b in itertools.pairwise(ratios))


def test_rms_velocity_identities():
    # a homogeneous stack has V_rms = v; one layer V_rms = v; V_rms lies between the extremes
    assert np.allclose(rms_velocity([0.3, 0.4, 0.5], [0.1, 0.1, 0.1]), 0.1, rtol=1e-14)
    v = np.array([0.12, 0.07, 0.09])
    vr = rms_velocity([0.4, 0.3, 0.6], v)
    assert vr[0] == pytest.approx(0.12, rel=1e-14)
    assert np.all((vr >= v.min()) & (vr <= v.max()))
    # derived for the two-layer model: (v1^2 t1 + v2^2 t2) / (t1 + t2) with t = 2h/v
    t = 2 * H2 / V2
    assert rms_velocity(H2, V2)[-1] == pytest.approx(
        np.sqrt(np.sum(V2**2 * t) / np.sum(t)), rel=1e-14
    )


def test_dix_inverts_rms_velocity():
    # Dix (1955): interval velocities from (t0, V_rms) are exactly the layer velocities
    rng = np.random.default_rng(20240601)
    h = rng.uniform(0.1, 1.5, size=(50, 5))
    v = rng.uniform(0.04, 0.2, size=(50, 5))
    t0 = vertical_twt(h, v)
    vrms = rms_velocity(h, v)
    v_int = dix_interval_velocity(t0, vrms)
    assert v_int.shape == (50, 5)
    assert np.allclose(v_int, v, rtol=1e-10)


def test_dix_reference_formula_two_layers():
    # Dix (1955) eq. for V_int,2 with the references.md two-layer model (e 25 below -> v2)
    t0 = vertical_twt(H2, V2)
    vrms = rms_velocity(H2, V2)
    v2 = np.sqrt((vrms[1] ** 2 * t0[1] - vrms[0] ** 2 * t0[0]) / (t0[1] - t0[0]))
    assert dix_interval_velocity(t0, vrms)[1] == pytest.approx(v2, rel=1e-14)
    assert v2 == pytest.approx(0.299792458 / 5, rel=1e-12)


def test_dix_uncertainty_matches_finite_difference_jacobian():
    # first-order propagation vs an independent central-difference Jacobian
    t0 = np.array([10.0, 25.0, 45.0])
    vrms = np.array([0.11, 0.085, 0.09])
    s_t = np.array([0.2, 0.3, 0.25])
    s_v = np.array([0.002, 0.003, 0.002])
    v_int, sigma = dix_interval_velocity(t0, vrms, t0_sigma=s_t, v_rms_sigma=s_v)
    x0 = np.concatenate([t0, vrms])
    s = np.concatenate([s_t, s_v])
    jac = np.empty((3, 6))
    for j in range(6):
        step = np.zeros(6)
        step[j] = 1e-6 * max(abs(x0[j]), 1e-3)
        plus = dix_interval_velocity((x0 + step)[:3], (x0 + step)[3:])
        minus = dix_interval_velocity((x0 - step)[:3], (x0 - step)[3:])
        jac[:, j] = (plus - minus) / (2 * step[j])
    ref = np.sqrt((jac**2) @ (s**2))
    assert np.allclose(v_int, dix_interval_velocity(t0, vrms), rtol=1e-15)
    assert np.allclose(sigma, ref, rtol=1e-6)


def test_dix_uncertainty_monte_carlo():
    # statistical check (seed fixed): with small independent Gaussian errors the sample
    # standard deviation of Dix velocities matches the linear propagation within 5 %
    # (20000 draws: sampling error of a SD is about 1/sqrt(2N) = 0.5 %, nonlinearity < 2 %)
    rng = np.random.default_rng(7)
    t0 = np.array([10.0, 25.0, 45.0])
    vrms = np.array([0.11, 0.085, 0.09])
    s_t, s_v = 0.1, 0.0005
    _, sigma = dix_interval_velocity(t0, vrms, t0_sigma=s_t, v_rms_sigma=s_v)
    n = 20000
    draws_t = t0 + s_t * rng.standard_normal((n, 3))
    draws_v = vrms + s_v * rng.standard_normal((n, 3))
    v_draws = dix_interval_velocity(draws_t, draws_v)
    assert np.allclose(v_draws.std(axis=0, ddof=1), sigma, rtol=0.05)


def test_dix_sigma_only_one_given_and_first_layer():
    t0 = np.array([10.0, 25.0])
    vrms = np.array([0.1, 0.08])
    _, s1 = dix_interval_velocity(t0, vrms, v_rms_sigma=0.001)
    # first interval velocity equals V_rms,1: its SD is that of V_rms,1 (t0 error has no effect)
    assert s1[0] == pytest.approx(0.001, rel=1e-12)
    _, s2 = dix_interval_velocity(t0, vrms, t0_sigma=0.5)
    assert s2[0] == pytest.approx(0.0, abs=1e-15)
    assert s2[1] > 0


def test_nmo_broadcasting():
    x = np.linspace(0.0, 3.0, 7)[:, None]
    t = nmo_time(x, np.array([10.0, 20.0]), 0.1)
    assert t.shape == (7, 2)
    assert np.allclose(t[0], [10.0, 20.0], rtol=1e-15)
    assert np.allclose(nmo_time(-x, [10.0, 20.0], 0.1), t, rtol=1e-15)  # symmetric in offset


def test_twt_depth_round_trip_and_interfaces():
    h = np.array([0.3, 0.5, 0.4])
    v = np.array([0.12, 0.07, 0.09])
    # interfaces map to the vertical two-way times and back
    assert np.allclose(depth_to_twt(interface_depths(h), h, v), vertical_twt(h, v), rtol=1e-14)
    assert np.allclose(twt_to_depth(vertical_twt(h, v), h, v), interface_depths(h), rtol=1e-14)
    # round trip, including depths below the last interface (last layer continues)
    z = np.linspace(0.0, 3.0, 301)
    t = depth_to_twt(z, h, v)
    assert np.all(np.diff(t) > 0)
    assert np.allclose(twt_to_depth(t, h, v), z, rtol=1e-12, atol=1e-14)
    # inside layer 2 at 0.5 m: 2*0.3/0.12 + 2*0.2/0.07 = 5 + 5.714286 ns (derived)
    assert float(depth_to_twt(0.5, h, v)) == pytest.approx(5 + 0.4 / 0.07, rel=1e-14)
    # below the stack: 2 * (sum of layer times) + 2*(3.0 - 1.2)/0.09
    assert t[-1] == pytest.approx(vertical_twt(h, v)[-1] + 2 * 1.8 / 0.09, rel=1e-14)


def test_half_space_velocity():
    # velocity with n + 1 entries: the last is the half-space below the last interface
    h = np.array([0.5, 0.5])
    v = np.array([0.1, 0.06, 0.15])
    t_bottom = 10.0 + 1.0 / 0.06
    assert float(depth_to_twt(2.0, h, v)) == pytest.approx(t_bottom + 2 * 1.0 / 0.15, rel=1e-14)
    assert float(twt_to_depth(t_bottom + 2 * 1.0 / 0.15, h, v)) == pytest.approx(2.0, rel=1e-14)


def test_twt_depth_broadcast_over_models():
    # two-layer reference model in a batch of three models that scale the velocity
    h = np.broadcast_to(H2, (3, 2))
    v = V2[None, :] * np.array([[1.0], [1.1], [0.9]])
    t = np.array([0.0, 5.0, 12.0, 40.0])[:, None]
    z = twt_to_depth(t, h, v)
    assert z.shape == (4, 3)
    assert np.allclose(depth_to_twt(z, h, v), np.broadcast_to(t, (4, 3)), rtol=1e-13)
    # model 0 at 12 ns: layer 1 holds 10.0069 ns; the remaining 1.9931 ns at V2[1]
    assert z[2, 0] == pytest.approx(0.5 + (12.0 - 2 * 0.5 / V2[0]) * V2[1] / 2, rel=1e-13)


def test_inputs_not_mutated():
    h = np.array([0.5, 0.5])
    v = np.array([0.1, 0.06])
    t = np.array([5.0, 20.0])
    copies = (h.copy(), v.copy(), t.copy())
    twt_to_depth(t, h, v)
    dix_interval_velocity(vertical_twt(h, v), rms_velocity(h, v), t0_sigma=0.1)
    for a, b in zip((h, v, t), copies, strict=True):
        assert np.array_equal(a, b)


# --- bad input ----------------------------------------------------------------------


def test_negative_thickness_names_index():
    with pytest.raises(InputError, match=r"thickness must be > 0 .*got -0\.2 at index \(1,\)"):
        vertical_twt([0.5, -0.2], [0.1, 0.1])


def test_zero_velocity_rejected():
    with pytest.raises(InputError, match=r"velocity must be > 0 .*m/ns.*got 0\.0 at index \(0,\)"):
        rms_velocity([0.5, 0.5], [0.0, 0.1])


def test_mismatched_layers():
    with pytest.raises(InputError, match=r"velocity must have 2 layers .*got shape \(3,\)"):
        vertical_twt([0.5, 0.5], [0.1, 0.1, 0.1])
    with pytest.raises(InputError, match=r"velocity must have 2 or 3 \(with a half-space\)"):
        twt_to_depth(1.0, [0.5, 0.5], [0.1])


def test_scalar_model_rejected():
    with pytest.raises(InputError, match=r"at least one layer along its last axis"):
        interface_depths(0.5)


def test_dix_non_increasing_t0_names_index():
    with pytest.raises(InputError, match=r"t0 must increase strictly.*index \(2,\) is 15\.0"):
        dix_interval_velocity([10.0, 20.0, 15.0], [0.1, 0.09, 0.08])


def test_dix_inconsistent_rms_velocity():
    # V_rms falling so fast that V_int^2 < 0
    t0 = [10.0, 12.0]
    vrms = [0.1, 0.05]
    with pytest.raises(InputError, match=r"interval velocity squared is negative.*index \(1,\)"):
        dix_interval_velocity(t0, vrms)
    v = dix_interval_velocity(t0, vrms, invalid="nan")
    assert v[0] == pytest.approx(0.1) and np.isnan(v[1])
    with pytest.raises(InputError, match=r"invalid must be 'raise' or 'nan'"):
        dix_interval_velocity(t0, vrms, invalid="skip")


def test_negative_sigma_and_twt_rejected():
    with pytest.raises(InputError, match=r"t0_sigma must be >= 0 \(ns\); got -0\.1"):
        dix_interval_velocity([10.0, 20.0], [0.1, 0.09], t0_sigma=-0.1)
    with pytest.raises(InputError, match=r"twt must be >= 0 .*got -1\.0"):
        twt_to_depth(-1.0, [0.5], [0.1])


def test_nmo_bad_input():
    with pytest.raises(InputError, match=r"v_rms must be > 0 .*got 0\.0"):
        nmo_time(1.0, 10.0, 0.0)
    with pytest.raises(InputError, match=r"offset must be finite .*got nan"):
        nmo_time(np.nan, 10.0, 0.1)
