"""Tests of soilwave.amplitude: the amplitude forward model of multi-offset picks.

Layers of tests: analytic limits (normal incidence |R| / 2h; transmission product
1 - r^2; total reflection |r| = 1; 1/x^2 spreading; low-loss attenuation
sigma Z0 / (2 sqrt(eps)) = 1.636 sigma / sqrt(eps) dB/m, references.md "Wave
physics", derived), an independent scalar implementation written here
(scipy.optimize.brentq on Snell's law, textbook TE Fresnel formulas, exact
plane-wave attenuation from scipy.constants), and batch/argument behaviour.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from scipy import constants
from scipy.optimize import brentq

import soilwave as sw
from soilwave.amplitude import (
    AmplitudeOperator,
    air_wave_log_amplitude,
    ground_wave_log_amplitude,
    reflection_log_amplitude,
)
from soilwave.errors import InputError

C = constants.c * 1e-9  # m/ns
Z0 = np.sqrt(constants.mu_0 / constants.epsilon_0)  # ohm, CODATA via scipy


# --- independent scalar reference ----------------------------------------------------------


def alpha_exact(eps, sigma_ms, f_mhz):
    """Exact plane-wave attenuation, Np/m (standard EM theory, references.md "Wave physics")."""
    w = 2 * np.pi * f_mhz * 1e6
    p = sigma_ms * 1e-3 / (w * constants.epsilon_0 * eps)
    return (
        w
        * np.sqrt(constants.mu_0 * constants.epsilon_0 * eps / 2)
        * np.sqrt(np.sqrt(1 + p * p) - 1)
    )


def te_r_t(n1, n2, sin1):
    """Textbook TE Fresnel coefficients (E field parallel to the interface), complex."""
    cos1 = np.sqrt(1 - sin1**2 + 0j)
    cos2 = np.sqrt(1 - (n1 / n2 * sin1) ** 2 + 0j)
    den = n1 * cos1 + n2 * cos2
    return (n1 * cos1 - n2 * cos2) / den, 2 * n1 * cos1 / den


def scalar_log_amp_reflection(x, h, eps, sigma, k, f_mhz):
    """log|A| of the reflection from interface k for one offset and model (no gain)."""
    h = np.asarray(h, float)[:k]
    eps = np.asarray(eps, float)
    v = C / np.sqrt(eps)
    n = np.sqrt(eps)
    vk = v[:k]
    if x == 0:
        p = 0.0
    else:
        p_hi = (1 - 1e-15) / vk.max()
        p = brentq(
            lambda q: np.sum(2 * h * q * vk / np.sqrt(1 - (q * vk) ** 2)) - x,
            0.0,
            p_hi,
            xtol=1e-300,
            rtol=1e-15,
        )
    sin = p * v  # Snell's law, every layer
    cos = np.sqrt(1 - sin[:k] ** 2)
    lengths = 2 * h / cos
    r, _ = te_r_t(n[k - 1], n[k], sin[k - 1])
    amp = abs(r) / lengths.sum()
    for j in range(k - 1):
        _, t_dn = te_r_t(n[j], n[j + 1], sin[j])
        _, t_up = te_r_t(n[j + 1], n[j], sin[j + 1])
        amp *= abs(t_dn * t_up)
    att = sum(alpha_exact(eps[i], sigma[i], f_mhz) * lengths[i] for i in range(k))
    return np.log(amp) - att


# --- analytic limits -----------------------------------------------------------------------


def test_normal_incidence_reflection_is_r_over_two_way_path():
    # references.md: R(9 -> 25) = -0.25; lossless, zero offset: |A| = |R| / (2 h)
    a = reflection_log_amplitude(
        [0.0], [0.8], [9.0, 25.0], [0.0, 0.0], interface=1, frequency_mhz=250.0
    )
    assert np.exp(a[0]) == pytest.approx(0.25 / 1.6, rel=1e-12)
    # references.md: R(1 -> 9) = -0.5
    a = reflection_log_amplitude(
        [0.0], [2.0], [1.0, 9.0], [0.0, 0.0], interface=1, frequency_mhz=100.0
    )
    assert np.exp(a[0]) == pytest.approx(0.5 / 4.0, rel=1e-12)


def test_second_interface_carries_two_way_transmission_one_minus_r_squared():
    # normal incidence: t_down t_up = (1 + r)(1 - r) = 1 - r^2 (TE, E-field amplitudes)
    eps = [9.0, 25.0, 4.0]
    r1 = (3 - 5) / (3 + 5)
    r2 = (5 - 2) / (5 + 2)
    a = reflection_log_amplitude(
        [0.0], [0.5, 0.7], eps, [0.0, 0.0, 0.0], interface=2, frequency_mhz=200.0
    )
    expected = abs(r2) * (1 - r1**2) / (2 * 1.2)
    assert np.exp(a[0]) == pytest.approx(expected, rel=1e-12)


def test_total_reflection_beyond_critical_angle():
    # slow (eps 16) over fast (eps 4): critical angle arcsin(1/2) = 30 deg (Snell); beyond it
    # |r_TE| = 1, so |A| = 1 / L with L = 2 h / cos(theta)
    h = 0.5
    x = np.array([2 * h * np.tan(np.deg2rad(40.0)), 2 * h * np.tan(np.deg2rad(60.0))])
    a = reflection_log_amplitude(x, [h], [16.0, 4.0], [0.0, 0.0], interface=1, frequency_mhz=200.0)
    L = np.hypot(x, 2 * h)
    np.testing.assert_allclose(np.exp(a), 1 / L, rtol=1e-9)


def test_surface_waves_decay_as_inverse_square_of_offset():
    x = np.array([0.5, 1.0, 2.0, 4.0])
    np.testing.assert_allclose(air_wave_log_amplitude(x), -2 * np.log(x), rtol=0, atol=1e-15)
    g = ground_wave_log_amplitude(x, [9.0], [0.0], frequency_mhz=200.0)
    np.testing.assert_allclose(np.exp(g) * x**2, 1.0, rtol=1e-14)


def test_ground_wave_attenuation_matches_low_loss_formula():
    # references.md "Wave physics": low-loss alpha = sigma Z0 / (2 sqrt(eps)),
    # 1.636 sigma[mS/m] / sqrt(eps) dB/m (derived)
    x = np.linspace(0.5, 4.0, 8)
    eps, sigma = 9.0, 20.0
    g = ground_wave_log_amplitude(x, [eps], [sigma], frequency_mhz=200.0, low_loss=True)
    slope = np.polyfit(x, g + 2 * np.log(x), 1)[0]
    alpha = sigma * 1e-3 * Z0 / (2 * np.sqrt(eps))
    assert -slope == pytest.approx(alpha, rel=1e-12)
    db_per_m = -slope * 20 / np.log(10)
    assert db_per_m == pytest.approx(1.636 * sigma / np.sqrt(eps), rel=5e-4)  # 4 digits given
    # exact attenuation: same where the loss tangent is small (here p ~ 0.0016)
    ge = ground_wave_log_amplitude(x, [eps], [1.0], frequency_mhz=250.0)
    slope_e = np.polyfit(x, ge + 2 * np.log(x), 1)[0]
    assert -slope_e == pytest.approx(1e-3 * Z0 / 6, rel=1e-5)


def test_exact_attenuation_derived_value():
    # references.md derived check: eps 25, 10 mS/m, 100 MHz -> alpha 0.37649 Np/m
    g = ground_wave_log_amplitude([1.0, 2.0], [25.0], [10.0], frequency_mhz=100.0)
    drop = -(g[1] - g[0]) - 2 * np.log(2.0)
    assert drop == pytest.approx(0.37649, abs=5e-6)


# --- independent implementation ------------------------------------------------------------


@pytest.mark.parametrize("k", [1, 2, 3])
def test_operator_matches_scalar_reference(k):
    h = [0.4, 0.6, 0.3]
    eps = [5.0, 14.0, 8.0, 20.0]
    sigma = [8.0, 30.0, 2.0, 50.0]
    f = 250.0
    x = np.array([0.0, 0.3, 1.0, 2.2, 3.5])
    op = AmplitudeOperator(x, ["reflection"] * x.size, [k] * x.size, frequency_mhz=f)
    got = op(h, eps, sigma, [0.0])
    ref = [scalar_log_amp_reflection(xi, h, eps, sigma, k, f) for xi in x]
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-9)


def test_operator_mixed_picks_against_scalar_reference_and_gains():
    rng = np.random.default_rng(11)
    f = 200.0
    x = np.array([0.6, 1.4, 2.5, 0.6, 1.4, 2.5, 0.2, 1.0, 2.0, 0.0, 1.5])
    ph = ["air"] * 3 + ["ground"] * 3 + ["reflection"] * 5
    itf = [0] * 6 + [1] * 3 + [2] * 2
    op = AmplitudeOperator(x, ph, itf, frequency_mhz=f)
    assert op.families == ("air", "ground", "reflection")
    assert op.n_layers == 3
    h = rng.uniform(0.3, 1.0, size=(6, 2))
    eps = rng.uniform(3.0, 30.0, size=(6, 3))
    sig = rng.uniform(0.5, 40.0, size=(6, 3))
    gain = rng.normal(size=(6, 3))
    got = op(h, eps, sig, gain)
    assert got.shape == (6, 11)
    for b in range(6):
        for i in range(11):
            if ph[i] == "air":
                ref = gain[b, 0] - 2 * np.log(x[i])
            elif ph[i] == "ground":
                ref = gain[b, 1] - 2 * np.log(x[i]) - alpha_exact(eps[b, 0], sig[b, 0], f) * x[i]
            else:
                ref = gain[b, 2] + scalar_log_amp_reflection(x[i], h[b], eps[b], sig[b], itf[i], f)
            assert got[b, i] == pytest.approx(ref, rel=1e-9, abs=1e-9)


# --- batch behaviour -----------------------------------------------------------------------


def test_batch_broadcasting_and_inputs_not_mutated():
    x = np.array([0.5, 1.0, 2.0, 1.0])
    op = AmplitudeOperator(
        x, ["ground", "ground", "reflection", "reflection"], [0, 0, 1, 1], frequency_mhz=300.0
    )
    h = np.full((4, 1, 1), 0.7)
    eps = np.stack([np.linspace(4, 10, 3), np.full(3, 20.0)], axis=-1)  # (3, 2)
    sig = np.array([5.0, 10.0])
    gain = np.zeros(2)
    copies = [a.copy() for a in (h, eps, sig, gain)]
    out = op(h, eps, sig, gain)
    assert out.shape == (4, 3, 4)
    for j in range(3):
        np.testing.assert_allclose(out[1, j], op([0.7], eps[j], sig, gain), rtol=1e-13)
    for a, c in zip((h, eps, sig, gain), copies, strict=True):
        np.testing.assert_array_equal(a, c)


def test_amplitude_decreases_with_conductivity_and_gain_is_additive():
    x = np.array([1.0, 2.0, 1.0, 2.0])
    op = AmplitudeOperator(
        x, ["ground", "ground", "reflection", "reflection"], [0, 0, 1, 1], frequency_mhz=250.0
    )
    sig = np.array([[1.0, 5.0], [10.0, 5.0], [50.0, 5.0]])
    out = op([0.5], [6.0, 15.0], sig, [0.0, 0.0])
    assert np.all(np.diff(out, axis=0) < 0)
    shifted = op([0.5], [6.0, 15.0], sig, [1.5, -0.5])
    np.testing.assert_allclose(shifted - out, np.tile([1.5, 1.5, -0.5, -0.5], (3, 1)), atol=1e-12)
    # scalar log_gain applies to every family
    np.testing.assert_allclose(op([0.5], [6.0, 15.0], sig, 2.0) - out, 2.0, atol=1e-12)


def test_unphysical_models_give_nan_rows_and_zero_contrast_minus_inf():
    op = AmplitudeOperator(
        [1.0, 1.0, 2.0], ["air", "ground", "reflection"], [0, 0, 1], frequency_mhz=200.0
    )
    eps = np.array([[9.0, 16.0], [0.5, 16.0], [9.0, 16.0], [9.0, 16.0], [9.0, 9.0]])
    sig = np.array([[5.0, 1.0], [5.0, 1.0], [-1.0, 1.0], [5.0, np.nan], [5.0, 1.0]])
    h = np.array([[0.5], [0.5], [0.5], [0.5], [0.5]])
    out = op(h, eps, sig, [0.0, 0.0, 0.0])
    assert np.all(np.isfinite(out[0]))
    assert np.all(np.isnan(out[1:4]))
    assert out[4, 2] == -np.inf and np.all(np.isfinite(out[4, :2]))
    out = op(np.array([[-0.1]]), [9.0, 16.0], [1.0, 1.0], [0.0, 0.0, 0.0])
    assert np.all(np.isnan(out))


def test_from_picks_uses_table_frequency():
    picks = sw.make_picks(
        [1.0, 2.0, 1.0],
        [10.0, 20.0, 25.0],
        ["ground", "ground", "reflection"],
        interface=[0, 0, 1],
        sigma=0.3,
        frequency_mhz=250.0,
        amplitude=[1.0, 0.2, 0.1],
        amplitude_sigma=[0.01] * 3,
    )
    op = AmplitudeOperator.from_picks(picks)
    assert op.frequency_mhz == 250.0
    direct = AmplitudeOperator(
        [1.0, 2.0, 1.0], ["ground", "ground", "reflection"], [0, 0, 1], frequency_mhz=250.0
    )
    np.testing.assert_array_equal(
        op([0.5], [6.0, 12.0], [3.0, 3.0], [0.1, 0.2]),
        direct([0.5], [6.0, 12.0], [3.0, 3.0], [0.1, 0.2]),
    )
    assert "reflection[1]: 1" in repr(op)
    bare = xr.Dataset(
        {"offset": ("pick", [1.0]), "phase": ("pick", ["air"]), "interface": ("pick", [0])}
    )
    with pytest.raises(InputError, match="frequency_mhz"):
        AmplitudeOperator.from_picks(bare)


# --- errors --------------------------------------------------------------------------------


def test_bad_arguments_raise_input_errors():
    with pytest.raises(InputError, match="no amplitude model"):
        AmplitudeOperator([1.0], ["refraction"], [1], frequency_mhz=200.0)
    with pytest.raises(InputError, match=r"pick 1: ground wave at offset 0.0 m"):
        AmplitudeOperator([1.0, 0.0], ["ground", "ground"], [0, 0], frequency_mhz=200.0)
    with pytest.raises(InputError, match="frequency_mhz must be finite and > 0"):
        AmplitudeOperator([1.0], ["air"], [0], frequency_mhz=-5)
    with pytest.raises(InputError, match="one entry per pick"):
        AmplitudeOperator([1.0, 2.0], ["air"], [0], frequency_mhz=200.0)
    with pytest.raises(InputError, match="needs an interface >= 1"):
        AmplitudeOperator([1.0], ["reflection"], [0], frequency_mhz=200.0)
    op = AmplitudeOperator([1.0, 1.0], ["ground", "reflection"], [0, 1], frequency_mhz=200.0)
    with pytest.raises(InputError, match="log_gain has 3 entries"):
        op([0.5], [9.0, 16.0], [1.0, 1.0], [0.0, 0.0, 0.0])
    with pytest.raises(InputError, match="permittivity has 1 layer"):
        op([0.5], [9.0], [1.0, 1.0], [0.0, 0.0])
    with pytest.raises(InputError, match="do not broadcast"):
        op(np.ones((3, 1)), np.full((4, 2), 9.0), [1.0, 1.0], [0.0, 0.0])
    with pytest.raises(InputError, match="interface=2 is outside"):
        reflection_log_amplitude(
            [1.0], [0.5], [9.0, 16.0, 4.0], [1.0] * 3, interface=2, frequency_mhz=200.0
        )
    with pytest.raises(InputError, match="offset"):
        air_wave_log_amplitude([0.0])


def test_precomputed_rays_give_identical_results():
    # rays traced once (as a joint travel-time model does) are reused exactly
    x = np.array([0.5, 1.0, 2.0, 0.7, 1.8])
    op = AmplitudeOperator(x, ["reflection"] * 5, [1, 1, 1, 2, 2], frequency_mhz=200.0)
    rng = np.random.default_rng(6)
    h = rng.uniform(0.3, 0.9, (7, 2))
    eps = rng.uniform(4.0, 25.0, (7, 3))
    sig = rng.uniform(1.0, 30.0, (7, 3))
    v = C / np.sqrt(eps)
    groups = op.reflection_groups()
    rays = {k: sw.reflection_rays(x[idx], h, v, interface=k)[1] for k, idx in groups.items()}
    np.testing.assert_array_equal(op(h, eps, sig, 0.0, rays=rays), op(h, eps, sig, 0.0))
