"""Tests of soilwave.initial_model: starting values from NMO regression and Dix."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import constants

import soilwave as sw
from soilwave.errors import InputError

C = constants.c * 1e-9  # m/ns


def _synthetic(h, v, tz, *, phases=("air", "ground", "reflection"), x=None, noise=0.0, seed=0):
    """Exact forward-modelled picks (plus optional Gaussian noise) for a layered model."""
    x = np.linspace(0.2, 2.0, 10) if x is None else np.asarray(x)
    offset, phase, itf = [], [], []
    for ph in phases:
        if ph in ("air", "ground"):
            offset += list(x)
            phase += [ph] * x.size
            itf += [0] * x.size
        else:
            kind, k = ph.split(":") if ":" in ph else (ph, None)
            ks = [int(k)] if k else range(1, len(h) + 1)
            for kk in ks:
                offset += list(x)
                phase += [kind] * x.size
                itf += [kk] * x.size
    op = sw.TravelTimeOperator(offset, phase, itf)
    t = op(np.asarray(h), np.asarray(v), tz)
    keep = np.isfinite(t)
    t = t + np.random.default_rng(seed).normal(0, noise, t.shape) if noise else t
    return sw.make_picks(
        np.asarray(offset)[keep],
        t[keep],
        np.asarray(phase)[keep],
        interface=np.asarray(itf)[keep],
        sigma=max(noise, 0.05),
    )


def test_one_interface_exact_recovery():
    # one layer: the reflection is an exact hyperbola, so NMO gives t0 and v1 exactly
    picks = _synthetic([0.8], [0.1, 0.07], 2.5)
    m = sw.initial_model(picks)
    assert m["thickness"].shape == (1,) and m["velocity"].shape == (2,)
    assert m["time_zero"] == pytest.approx(2.5, abs=1e-9)
    assert m["velocity"][0] == pytest.approx(0.1, rel=1e-9)
    assert m["thickness"][0] == pytest.approx(0.8, rel=1e-9)
    # half-space velocity is not constrained by reflections: falls back to the layer above
    assert m["velocity"][1] == pytest.approx(m["velocity"][0])
    np.testing.assert_allclose(m["permittivity"], (C / m["velocity"]) ** 2)


def test_dix_on_hyperbolic_picks_is_exact():
    # picks on exact NMO hyperbolas t^2 = t0^2 + x^2/V^2 -> the regression returns (t0, V)
    # and the interval velocities follow Dix (1955, eq. for V_int) written out here
    t0 = np.array([12.0, 30.0])
    vrms = np.array([0.12, 0.09])
    x = np.linspace(0.3, 3.0, 12)
    t = np.concatenate([np.sqrt(t0[k] ** 2 + x**2 / vrms[k] ** 2) for k in range(2)])
    picks = sw.make_picks(
        np.tile(x, 2), t, "reflection", interface=np.repeat([1, 2], 12), sigma=0.2
    )
    m = sw.initial_model(picks)
    v2 = np.sqrt((vrms[1] ** 2 * t0[1] - vrms[0] ** 2 * t0[0]) / (t0[1] - t0[0]))
    np.testing.assert_allclose(m["velocity"][:2], [vrms[0], v2], rtol=1e-9)
    np.testing.assert_allclose(
        m["thickness"], [vrms[0] * t0[0] / 2, v2 * (t0[1] - t0[0]) / 2], rtol=1e-9
    )
    assert m["time_zero"] == 0.0


def test_two_interfaces_close_to_truth():
    # exact ray-traced picks: the NMO hyperbola is an approximation for the deeper
    # reflector, so Dix recovers it to a few percent at offsets up to about the depth
    h, v = [0.6, 0.9], [0.11, 0.07, 0.08]
    picks = _synthetic(h, v, -1.0, x=np.linspace(0.2, 1.5, 14))
    m = sw.initial_model(picks)
    assert m["time_zero"] == pytest.approx(-1.0, abs=1e-9)
    np.testing.assert_allclose(m["velocity"][:2], v[:2], rtol=0.03)
    np.testing.assert_allclose(m["thickness"], h, rtol=0.03)


def test_noisy_picks_statistical_recovery():
    # 0.2 ns noise (fixed seed): starting values within 10 % of the truth
    h, v = [0.5, 0.7], [0.1, 0.065, 0.08]
    picks = _synthetic(h, v, 1.0, x=np.linspace(0.2, 2.0, 20), noise=0.2, seed=42)
    m = sw.initial_model(picks)
    np.testing.assert_allclose(m["velocity"][:2], v[:2], rtol=0.1)
    np.testing.assert_allclose(m["thickness"], h, rtol=0.1)
    assert abs(m["time_zero"] - 1.0) < 0.3


def test_missing_air_uses_ground_intercept():
    picks = _synthetic([0.8], [0.1, 0.07], 3.0, phases=("ground", "reflection"))
    m = sw.initial_model(picks)
    assert m["time_zero"] == pytest.approx(3.0, abs=1e-9)
    assert m["velocity"][0] == pytest.approx(0.1, rel=1e-9)


def test_missing_ground_uses_reflection_rms_velocity():
    picks = _synthetic([0.8], [0.1, 0.07], 0.0, phases=("air", "reflection"))
    m = sw.initial_model(picks)
    assert m["velocity"][0] == pytest.approx(0.1, rel=1e-9)
    assert m["thickness"][0] == pytest.approx(0.8, rel=1e-9)


def test_air_only_and_extra_interfaces_fall_back():
    picks = _synthetic([0.8], [0.1, 0.07], 1.0, phases=("air",))
    m = sw.initial_model(picks)
    assert m["thickness"].shape == (0,) and m["velocity"].shape == (1,)
    assert m["velocity"][0] == pytest.approx(C / 3)  # eps 9 fallback
    m3 = sw.initial_model(_synthetic([0.8], [0.1, 0.07], 0.0), n_interfaces=3)
    assert m3["thickness"].shape == (3,) and m3["velocity"].shape == (4,)
    assert np.all(np.isfinite(m3["thickness"])) and np.all(m3["thickness"] > 0)
    with pytest.raises(InputError, match="n_interfaces=0 is less than the highest interface"):
        sw.initial_model(_synthetic([0.8], [0.1, 0.07], 0.0), n_interfaces=0)


def test_gap_in_reflected_interfaces_is_shared():
    # picks on interface 2 only: the two layers above share its zero-offset time
    h, v = [0.5, 0.5], [0.1, 0.1, 0.08]
    picks = _synthetic(h, v, 0.0, phases=("ground", "reflection:2"))
    m = sw.initial_model(picks)
    np.testing.assert_allclose(m["thickness"], [0.5, 0.5], rtol=1e-6)
    np.testing.assert_allclose(m["velocity"][:2], [0.1, 0.1], rtol=1e-6)


def test_refraction_gives_lower_velocity_and_depth():
    # head wave (references.md): t = x/v2 + 2 h sqrt(1/v1^2 - 1/v2^2)
    h, v = [0.4], [0.06, 0.12]
    x = np.linspace(0.5, 4.0, 15)
    picks = _synthetic(h, v, 0.0, phases=("air", "ground", "refraction"), x=x)
    m = sw.initial_model(picks)
    assert m["velocity"][1] == pytest.approx(0.12, rel=1e-9)
    assert m["thickness"][0] == pytest.approx(0.4, rel=1e-9)


def test_results_are_clipped_to_bounds():
    # ground wave implying eps of about 150 -> clipped just inside eps 90
    x = np.array([0.5, 1.0, 1.5])
    picks = sw.make_picks(x, x * np.sqrt(150.0) / C, "ground", sigma=0.1)
    m = sw.initial_model(picks)
    assert 89.0 < m["permittivity"][0] < 90.0
    # a very deep reflector -> thickness clipped below the maximum
    picks = sw.make_picks([1.0, 2.0], [400.0, 400.1], "reflection", interface=1, sigma=0.1)
    m = sw.initial_model(picks, thickness_bounds=(0.02, 5.0))
    assert 4.9 < m["thickness"][0] < 5.0
    with pytest.raises(InputError, match="increasing pairs"):
        sw.initial_model(picks, permittivity_bounds=(90.0, 1.0))
