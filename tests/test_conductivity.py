"""Tests of soilwave.conductivity: attenuation, penetration depth, Archie's law.

References: references.md "Wave physics" (low-loss alpha = sigma Z0 / (2 sqrt(eps)),
1.636 sigma / sqrt(eps) dB/m, derived; exact check eps 25, 10 mS/m, 100 MHz ->
3.2701 dB/m, derived); Archie (1942): bulk resistivity = a rho_w phi^-m S^-n, a 0.6-1.5,
m 1.3-3, n about 2 (references.md, checked via a geophysics dictionary). The
penetration depth is checked against its defining equation solved independently with
scipy.optimize.brentq, its lossless closed form and the skin depth of soilwave.wave.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import xarray as xr
from scipy import constants
from scipy.optimize import brentq

import soilwave as sw
from soilwave.conductivity import (
    ARCHIE_CAUTION,
    archie_bulk_conductivity,
    archie_pore_water_conductivity,
    attenuation_db_per_m,
    penetration_depth,
)
from soilwave.errors import InputError, RangeWarning, ValidRangeError

Z0 = np.sqrt(constants.mu_0 / constants.epsilon_0)
DB = 20 / np.log(10)


# --- attenuation ------------------------------------------------------------------------------


def test_attenuation_matches_low_loss_formula():
    # references.md: low-loss alpha = sigma Z0 / (2 sqrt(eps)) Np/m = 1.636 sigma/sqrt(eps) dB/m
    eps = np.array([4.0, 9.0, 16.0, 25.0])
    sigma = np.array([1.0, 5.0, 20.0, 50.0])
    got = attenuation_db_per_m(eps, sigma, frequency_mhz=250.0, low_loss=True)
    np.testing.assert_allclose(got, sigma * 1e-3 * Z0 / (2 * np.sqrt(eps)) * DB, rtol=1e-13)
    np.testing.assert_allclose(got, 1.636 * sigma / np.sqrt(eps), rtol=5e-4)
    # exact expression: equal to the low-loss limit where the loss tangent is small
    # (eps 16, 1 mS/m, 500 MHz: p = 0.0022), above it where it is not (the low-loss limit
    # overestimates; references.md)
    small = attenuation_db_per_m(16.0, 1.0, frequency_mhz=500.0)
    assert small == pytest.approx(1e-3 * Z0 / 8 * DB, rel=1e-5)
    big = attenuation_db_per_m(9.0, 100.0, frequency_mhz=50.0)  # p = 4
    assert big < 0.7 * 0.1 * Z0 / 6 * DB


def test_attenuation_derived_value():
    # references.md "Wave physics", derived: eps 25, sigma 10 mS/m, 100 MHz -> 3.2701 dB/m
    assert attenuation_db_per_m(25.0, 10.0, frequency_mhz=100.0) == pytest.approx(3.2701, abs=5e-5)


def test_attenuation_from_posterior_draws_with_quantiles():
    rng = np.random.default_rng(3)
    eps = xr.DataArray(
        rng.uniform(8, 10, (400, 2)), dims=("sample", "layer"), coords={"layer": [1, 2]}
    )
    sig = xr.DataArray(
        np.exp(rng.normal(np.log([10.0, 40.0]), 0.2, (400, 2))),
        dims=("sample", "layer"),
        coords={"layer": [1, 2]},
    )
    per_draw = attenuation_db_per_m(eps, sig, frequency_mhz=200.0)
    assert per_draw.dims == ("sample", "layer") and per_draw.attrs["units"] == "dB/m"
    np.testing.assert_allclose(
        per_draw.values,
        sw.attenuation(eps.values, sig.values, 200.0, unit="dB/m"),
        rtol=1e-14,
    )
    q = attenuation_db_per_m(eps, sig, frequency_mhz=200.0, quantiles=[0.05, 0.5, 0.95])
    assert q.dims == ("quantile", "layer")
    np.testing.assert_allclose(
        q.sel(quantile=0.5).values, np.quantile(per_draw.values, 0.5, axis=0), rtol=1e-12
    )
    assert np.all(q.sel(quantile=0.05) < q.sel(quantile=0.95))
    with pytest.raises(InputError, match="quantiles need"):
        attenuation_db_per_m(eps.values, sig.values, frequency_mhz=200.0, quantiles=[0.5])


# --- penetration depth --------------------------------------------------------------------------


def scalar_penetration(eps, sigma, h, f, noise, src, r_ref):
    """Independent solution of S R T(z) exp(-2 int alpha) / (2 z) = noise by brentq."""
    alpha = [sw.attenuation(e, s, f) for e, s in zip(eps, sigma, strict=True)]
    tops = np.concatenate([[0.0], np.cumsum(h)])
    n = np.sqrt(eps)

    def g(z):
        loss, trans = 0.0, 1.0
        for i, a in enumerate(alpha):
            bottom = tops[i + 1] if i < len(h) else np.inf
            loss += a * max(0.0, min(z, bottom) - tops[i])
            if i < len(h) and tops[i + 1] < z:
                r = (n[i] - n[i + 1]) / (n[i] + n[i + 1])
                trans *= 1 - r * r
        return np.log(src * r_ref * trans / (2 * z)) - 2 * loss - np.log(noise)

    return brentq(g, 1e-9, src * r_ref / (2 * noise), xtol=1e-14, rtol=1e-13)


def test_penetration_lossless_closed_form():
    # no losses: S |R| / (2 z) = N  ->  z = S |R| / (2 N)
    z = penetration_depth(
        [9.0],
        [0.0],
        frequency_mhz=200.0,
        noise_level=1e-3,
        source_amplitude=2.0,
        reflection_coefficient=0.2,
    )
    assert z == pytest.approx(2.0 * 0.2 / 2e-3, rel=1e-12)


def test_penetration_matches_independent_root_finder():
    eps = [6.0, 15.0, 25.0]
    sigma = [5.0, 20.0, 60.0]
    h = [0.6, 1.2]
    for noise in (1e-2, 1e-3, 1e-4, 1e-6):
        got = penetration_depth(eps, sigma, h, frequency_mhz=250.0, noise_level=noise)
        ref = scalar_penetration(eps, sigma, h, 250.0, noise, 1.0, 0.1)
        assert got == pytest.approx(ref, rel=1e-9)


def test_penetration_monotonic_in_conductivity():
    sig = np.geomspace(0.1, 1000.0, 40)
    z = penetration_depth(
        np.full((40, 1), 12.0), sig[:, None], frequency_mhz=200.0, noise_level=1e-5
    )
    assert np.all(np.diff(z) < 0)
    # and in the noise level: a quieter record sees deeper
    zn = [
        penetration_depth([12.0], [20.0], frequency_mhz=200.0, noise_level=n)
        for n in (1e-3, 1e-4, 1e-5)
    ]
    assert zn[0] < zn[1] < zn[2]


def test_penetration_consistent_with_skin_depth_limit():
    # homogeneous lossy half-space, delta = 1/alpha (soilwave.wave.skin_depth):
    # 2 z / delta + ln(2 z) = ln(S R / N) exactly; each factor e^2 of dynamic range adds
    # delta / (1 + delta / (2 z)) to first order, which tends to one skin depth as the loss
    # grows (the spreading term then changes slowly)
    eps, f = 16.0, 200.0
    gains = []
    for sigma in (10.0, 50.0, 200.0):
        delta = float(sw.skin_depth(eps, sigma, f))
        for noise in (1e-4, 1e-6):
            z = float(penetration_depth([eps], [sigma], frequency_mhz=f, noise_level=noise))
            assert 2 * z / delta + np.log(2 * z) == pytest.approx(np.log(0.1 / noise), abs=1e-9)
            z2 = float(
                penetration_depth([eps], [sigma], frequency_mhz=f, noise_level=noise / np.e**2)
            )
            zm = 0.5 * (z + z2)
            assert (z2 - z) / delta == pytest.approx(1 / (1 + delta / (2 * zm)), rel=0.01)
        gains.append((z2 - z) / delta)
    assert gains[0] < gains[1] < gains[2]
    assert 0.9 < gains[2] < 1.0
    # the depth is bounded by (delta / 2) ln(S R / (2 z N)), i.e. a few skin depths
    z = float(penetration_depth([eps], [200.0], frequency_mhz=f, noise_level=1e-6))
    delta = float(sw.skin_depth(eps, 200.0, f))
    assert z / delta == pytest.approx(0.5 * np.log(0.1 / (2 * z * 1e-6)), rel=1e-9)
    assert z < 10 * delta


def test_penetration_from_posterior_draws():
    rng = np.random.default_rng(5)
    n = 200
    eps = xr.DataArray(
        np.column_stack([rng.uniform(5, 7, n), rng.uniform(15, 20, n)]),
        dims=("sample", "layer"),
        coords={"layer": [1, 2]},
    )
    sig = xr.DataArray(
        np.column_stack([rng.uniform(5, 20, n), rng.uniform(20, 60, n)]),
        dims=("sample", "layer"),
        coords={"layer": [1, 2]},
    )
    # result samples keep thickness over layer with NaN for the half-space
    h = xr.DataArray(
        np.column_stack([rng.uniform(0.5, 0.7, n), np.full(n, np.nan)]),
        dims=("sample", "layer"),
        coords={"layer": [1, 2]},
    )
    z = penetration_depth(eps, sig, h, frequency_mhz=250.0, noise_level=1e-4)
    assert z.dims == ("sample",) and z.attrs["units"] == "m"
    i = 17
    ref = scalar_penetration(eps.values[i], sig.values[i], h.values[i, :1], 250.0, 1e-4, 1.0, 0.1)
    assert float(z[i]) == pytest.approx(ref, rel=1e-9)
    q = penetration_depth(
        eps, sig, h, frequency_mhz=250.0, noise_level=1e-4, quantiles=[0.16, 0.5, 0.84]
    )
    assert q.dims == ("quantile",)
    assert float(q[0]) < float(q[1]) < float(q[2])
    assert "reference reflector" in q.attrs["assumptions"]


def test_penetration_bad_inputs():
    with pytest.raises(InputError, match="noise_level must be finite and > 0"):
        penetration_depth([9.0], [1.0], frequency_mhz=100.0, noise_level=0.0)
    with pytest.raises(InputError, match=r"reflection_coefficient .* \(0, 1\]"):
        penetration_depth(
            [9.0], [1.0], frequency_mhz=100.0, noise_level=1e-3, reflection_coefficient=1.5
        )
    with pytest.raises(InputError, match="thickness is needed for 2 layers"):
        penetration_depth([9.0, 16.0], [1.0, 1.0], frequency_mhz=100.0, noise_level=1e-3)
    with pytest.raises(InputError, match=r"thickness must be finite and >= 0 m; got -0\.5"):
        penetration_depth([9.0, 16.0], [1.0, 1.0], [-0.5], frequency_mhz=100.0, noise_level=1e-3)
    with pytest.raises(InputError, match="conductivity must be >= 0"):
        penetration_depth([9.0], [-1.0], frequency_mhz=100.0, noise_level=1e-3)


# --- Archie (1942) ------------------------------------------------------------------------------


def test_archie_published_resistivity_form():
    # Archie (1942): rho_b = a rho_w phi^-m S^-n (resistivities, ohm m = 1000 / sigma[mS/m])
    rho_w = np.array([2.0, 10.0, 50.0])  # ohm m
    phi, sat = 0.35, np.array([0.3, 0.6, 1.0])
    a, m, n = 0.8, 1.8, 2.2
    rho_b = a * rho_w * phi**-m * sat**-n
    with warnings.catch_warnings():
        warnings.simplefilter("error", RangeWarning)  # parameters inside the published ranges
        sigma_b = archie_bulk_conductivity(1000.0 / rho_w, sat * phi, phi, a=a, m=m, n=n)
    np.testing.assert_allclose(sigma_b, 1000.0 / rho_b, rtol=1e-13)
    sigma_w = archie_pore_water_conductivity(1000.0 / rho_b, sat * phi, phi, a=a, m=m, n=n)
    np.testing.assert_allclose(sigma_w, 1000.0 / rho_w, rtol=1e-13)


def test_archie_derived_value_and_round_trip():
    # derived: sigma_w 50 mS/m, phi 0.4, S 0.5, a 1, m 2, n 2 -> sigma_b = 50 * 0.4^2 * 0.5^2 = 2
    assert archie_bulk_conductivity(50.0, 0.2, 0.4) == pytest.approx(2.0, rel=1e-14)
    assert archie_pore_water_conductivity(2.0, 0.2, 0.4) == pytest.approx(50.0, rel=1e-14)
    # m == n: porosity cancels
    assert archie_pore_water_conductivity(2.0, 0.2) == pytest.approx(50.0, rel=1e-14)
    rng = np.random.default_rng(0)
    sb = rng.uniform(0.5, 200.0, 50)
    phi = rng.uniform(0.25, 0.5, 50)
    theta = phi * rng.uniform(0.1, 1.0, 50)
    sw_ = archie_pore_water_conductivity(sb, theta, phi, a=0.62, m=2.15, n=2.0)
    np.testing.assert_allclose(
        archie_bulk_conductivity(sw_, theta, phi, a=0.62, m=2.15, n=2.0), sb, rtol=1e-12
    )


def test_archie_on_dataarrays_carries_caution():
    theta = xr.DataArray([0.1, 0.2, 0.3], dims=("layer",), coords={"layer": [1, 2, 3]})
    sb = xr.DataArray([[2.0, 8.0, 20.0]] * 4, dims=("sample", "layer"), coords={"layer": [1, 2, 3]})
    out = archie_pore_water_conductivity(sb, theta)
    assert out.dims == ("sample", "layer")
    assert out.attrs["units"] == "mS/m" and out.attrs["caution"] == ARCHIE_CAUTION
    assert "site calibration" in out.attrs["caution"]
    np.testing.assert_allclose(out.values[0], [200.0, 200.0, 20.0 / 0.09], rtol=1e-13)


def test_archie_errors_and_range_warnings():
    with pytest.raises(InputError, match=r"porosity is needed when m \(1.8\) differs"):
        archie_pore_water_conductivity(10.0, 0.2, m=1.8)
    with pytest.raises(ValidRangeError, match="exceeds the porosity"):
        archie_pore_water_conductivity(10.0, 0.45, 0.4)
    with pytest.raises(ValidRangeError, match=r"water_content must lie in \(0, 1\]"):
        archie_pore_water_conductivity(10.0, 0.0)
    with pytest.raises(InputError, match="bulk_conductivity must be finite and >= 0"):
        archie_pore_water_conductivity(-1.0, 0.2)
    with pytest.warns(RangeWarning, match="a=2 lies outside the published range 0.6-1.5"):
        archie_pore_water_conductivity(10.0, 0.2, a=2.0)
    with pytest.warns(RangeWarning, match="m=3.5"):
        archie_pore_water_conductivity(10.0, 0.2, 0.4, m=3.5)
