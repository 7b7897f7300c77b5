"""Tests of soilwave.diffraction: point-scatterer hyperbola fits on fixed-offset profiles.

Profiles are built here with their own formula (Ricker wavelets at the
straight-ray two-way time of a point scatterer seen by antennas a apart,
t = (|T - P| + |R - P|) / v), not with soilwave's synthetic module.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import constants

import soilwave as sw
from soilwave.errors import InputError
from soilwave.gather import gather_from_array

C = constants.c * 1e-9  # m/ns, CODATA


def ricker(t, f_mhz):
    """Ricker wavelet (peak frequency f) centred at t = 0; t in ns."""
    u = (np.pi * f_mhz * 1e-3 * t) ** 2
    return (1.0 - 2.0 * u) * np.exp(-u)


# --- diffraction hyperbolas -------------------------------------------------------------


def diffraction_profile(*, v, z, x0, a, noise, seed, f=250.0, dt=0.1, n=600):
    """Profile with a point-scatterer response (finite antenna separation a)."""
    x = np.arange(0.0, 4.001, 0.04)
    t = np.arange(n) * dt
    tt = (np.hypot(x - a / 2 - x0, z) + np.hypot(x + a / 2 - x0, z)) / v
    amp = 1.0 / (1.0 + ((x - x0) / z) ** 2)
    data = amp[:, None] * ricker(t[None, :] - tt[:, None], f)
    data += noise * np.random.default_rng(seed).standard_normal(data.shape)
    return gather_from_array(data, positions=x, dt_ns=dt, frequency_mhz=f, antenna_separation_m=a)


@pytest.mark.parametrize(
    ("v", "z", "x0", "a", "seed"),
    [(0.1, 0.8, 2.0, 0.3, 0), (0.075, 0.5, 1.7, 0.5, 1), (0.13, 1.2, 2.3, 0.0, 2)],
)
def test_fit_diffraction_recovers_velocity_and_depth(v, z, x0, a, seed):
    # Tolerances: 3 % in v and z, 2 cm in x0, and each error inside 4 standard
    # errors of the Jacobian covariance.
    prof = diffraction_profile(v=v, z=z, x0=x0, a=a, noise=0.05, seed=seed)
    fit = sw.fit_diffraction(prof)
    assert float(fit.velocity) == pytest.approx(v, rel=0.03)
    assert float(fit.depth) == pytest.approx(z, rel=0.03)
    assert float(fit.x0) == pytest.approx(x0, abs=0.02)
    for name, truth in (("velocity", v), ("depth", z), ("x0", x0)):
        sd = float(fit[f"{name}_sigma"])
        assert 0 < sd
        assert abs(float(fit[name]) - truth) < 4 * sd + 1e-9
    assert fit.sizes["pick"] >= 20
    assert float(fit.permittivity) == pytest.approx((C / float(fit.velocity)) ** 2)


def test_fit_diffraction_standard_errors_are_calibrated():
    # Over 30 seeded noise draws the z-scores (fit - truth) / sd of the velocity
    # and depth have a standard deviation near 1: accepted range 0.7-1.45 (the
    # sampling error of a standard deviation from 30 draws is about 13 %).
    zv, zz = [], []
    for seed in range(30):
        fit = sw.fit_diffraction(
            diffraction_profile(v=0.1, z=0.8, x0=2.0, a=0.3, noise=0.15, seed=100 + seed)
        )
        zv.append((float(fit.velocity) - 0.1) / float(fit.velocity_sigma))
        zz.append((float(fit.depth) - 0.8) / float(fit.depth_sigma))
    assert 0.7 < np.std(zv, ddof=1) < 1.45
    assert 0.7 < np.std(zz, ddof=1) < 1.45
    assert abs(np.mean(zv)) < 0.6  # no bias beyond 3 standard errors of the mean


def test_fit_diffraction_windows_and_errors():
    prof = diffraction_profile(v=0.1, z=0.8, x0=2.0, a=0.3, noise=0.02, seed=4)
    fit = sw.fit_diffraction(prof, position_window=(1.2, 2.8), time_window=(10.0, 40.0))
    assert float(fit.position.min()) >= 1.2
    assert float(fit.position.max()) <= 2.8
    assert float(fit.velocity) == pytest.approx(0.1, rel=0.03)
    with pytest.raises(InputError, match="position_window"):
        sw.fit_diffraction(prof, position_window=(2.0, 1.0))
    with pytest.raises(InputError, match="at least 5 positions"):
        sw.fit_diffraction(prof, position_window=(2.0, 2.1))
    x = np.linspace(0.4, 2.0, 8)
    cmp_gather = gather_from_array(
        np.zeros((x.size, 200)), offsets=x, dt_ns=0.2, frequency_mhz=200.0
    )
    with pytest.raises(InputError, match="fixed-offset profile"):
        sw.fit_diffraction(cmp_gather)
