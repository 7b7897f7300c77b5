"""Green-Ampt and Philip fits to wetting-front depths (soilwave.infiltration_fit).

The synthetic fronts are made here from the Green & Ampt (1911) equation solved
with scipy.optimize.brentq (independent of soilwave's solver), with Rawls,
Brakensiek & Miller (1983) texture-class parameters (sandy loam: psi 11.01 cm,
K 1.09 cm/h; checked values in references.md).
"""

import math

import numpy as np
import pytest
import xarray as xr
from scipy.optimize import brentq

import soilwave as sw
from soilwave.errors import InputError
from soilwave.infiltration_fit import InfiltrationFit

TIMES = np.array([2.0, 4.0, 8.0, 12.0])


def ga_depth_m(t, K, psi, dtheta):
    """Front depth (m) from the implicit Green-Ampt equation, scalar brentq."""
    a = psi * dtheta
    out = []
    for ti in np.atleast_1d(t):
        F = brentq(lambda F, ti=ti: F - a * math.log1p(F / a) - K * ti, 1e-12, K * ti + 10 * a + 10)
        out.append(F / dtheta / 100.0)
    return np.array(out)


def synthetic_front(rng, *, K=1.09, psi=11.01, dtheta=0.30, sd=0.01, dtheta_sd=0.015, n=500):
    """Front posterior draws: centred on a noisy observation of the true depth."""
    L = ga_depth_m(TIMES, K, psi, dtheta)
    centre = L + sd * rng.standard_normal(L.size)
    d = centre + sd * rng.standard_normal((n, L.size))
    dth = (
        dtheta + dtheta_sd * rng.standard_normal((n, 1)) + 0.005 * rng.standard_normal((n, L.size))
    )
    return xr.Dataset(
        {
            "front_depth_samples": (("sample", "time"), d, {"units": "m"}),
            "delta_theta_samples": (("sample", "time"), dth),
        },
        coords={"time": TIMES},
    ), L


@pytest.mark.slow
def test_green_ampt_recovers_sandy_loam_with_coverage():
    # Six replicate sandy-loam series (Rawls et al. 1983: K 1.09 cm/h, psi 11.01 cm).
    # A calibrated 90 % interval contains the truth in each with probability 0.9;
    # requiring >= 5 of 6 fails for a calibrated interval with probability 11 %,
    # requiring >= 4 of 6 with 1.6 %: we require 4 (fixed seeds).
    hits = 0
    for rep in range(6):
        front, _ = synthetic_front(np.random.default_rng(100 + rep))
        fit = sw.fit_green_ampt(front, seed=rep)
        k = fit.samples["saturated_conductivity"].values
        lo, med, hi = np.quantile(k, [0.05, 0.5, 0.95])
        hits += lo <= 1.09 <= hi
        assert 1.09 / 2 < med < 1.09 * 2
        assert fit.diagnostics["converged"]
    assert hits >= 4


def test_delta_theta_is_sampled_from_the_front_posterior():
    front, _ = synthetic_front(np.random.default_rng(7), dtheta_sd=0.03)
    fit = sw.fit_green_ampt(front, seed=3)
    d = fit.samples["delta_theta"].values
    # prior: per-draw mean over surveys, sd about 0.03 (the shared part)
    prior_sd = fit.data.attrs["delta_theta_prior_sd"]
    assert 0.025 < prior_sd < 0.035
    assert d.std() > 0.3 * prior_sd
    assert abs(d.mean() - 0.30) < 3 * prior_sd
    assert "front posterior" in fit.data.attrs["delta_theta_prior_source"]
    fixed = sw.fit_green_ampt(front, seed=3, delta_theta=0.3)
    assert np.all(fixed.samples["delta_theta"].values == 0.3)
    assert "given" in fixed.samples.attrs["priors"]


def test_summary_predict_and_rawls_comparison():
    front, L = synthetic_front(np.random.default_rng(21), sd=0.005)
    fit = sw.fit_green_ampt(front, seed=5)
    s = fit.summary()
    assert list(s.index) == ["saturated_conductivity", "suction_head", "delta_theta"]
    assert s.loc["saturated_conductivity", "units"] == "cm/h"
    assert s.loc["suction_head", "units"] == "cm"
    assert s.loc["saturated_conductivity", "q05"] < s.loc["saturated_conductivity", "q95"]
    pred = fit.predict(TIMES)
    assert pred["front_depth"].dims == ("time", "quantile")
    med = pred["front_depth"].sel(quantile=0.5).values
    np.testing.assert_allclose(med, L, rtol=0.05)
    assert pred["cumulative_infiltration"].attrs["units"] == "mm"
    cmp_ = fit.compare_rawls()
    # the truth is the sandy-loam class: its K lies inside the 90 % interval, and the
    # classes a factor >= 3 away (sand 11.78, loam 0.34, clay 0.03 cm/h) do not
    assert cmp_.loc["sandy loam", "conductivity_in_90"]
    for far in ("sand", "loam", "clay"):
        assert not cmp_.loc[far, "conductivity_in_90"]
    assert fit.samples.attrs["model"] == "green-ampt"
    assert "fit_green_ampt" in fit.samples.attrs["history"]


def test_philip_recovers_sorptivity_on_philip_data():
    # front from Philip's two-term equation (Philip 1957): L = (S sqrt t + A t)/dtheta
    rng = np.random.default_rng(4)
    S, A, dth = 3.0, 0.5, 0.3
    L = (S * np.sqrt(TIMES) + A * TIMES) / dth / 100
    d = L + 0.004 * rng.standard_normal((400, 4))
    front = xr.Dataset({"front_depth_samples": (("sample", "time"), d)}, coords={"time": TIMES})
    fit = sw.fit_philip(front, seed=8, delta_theta=(0.3, 0.01))
    s = fit.samples
    assert np.quantile(s["sorptivity"], 0.05) < S < np.quantile(s["sorptivity"], 0.95)
    assert np.quantile(s["transmissivity"], 0.05) < A < np.quantile(s["transmissivity"], 0.95)
    assert s["sorptivity"].attrs["units"] == "cm h-1/2"
    with pytest.raises(InputError, match="compare_rawls needs a Green-Ampt fit"):
        fit.compare_rawls()


def test_green_ampt_sorptivity_relation():
    # Early-time Green-Ampt is Philip's first term with S = sqrt(2 K psi dtheta)
    # (derived from the series of x - ln(1 + x)); a Philip fit to an early
    # Green-Ampt front finds that sorptivity.
    K, psi, dth = 1.09, 11.01, 0.3
    t = np.array([0.01, 0.02, 0.04, 0.08])
    L = ga_depth_m(t, K, psi, dth)
    d = L + 1e-4 * np.random.default_rng(0).standard_normal((400, 4))
    front = xr.Dataset({"front_depth_samples": (("sample", "time"), d)}, coords={"time": t})
    fit = sw.fit_philip(front, seed=1, delta_theta=dth)
    assert float(fit.samples["sorptivity"].median()) == pytest.approx(
        math.sqrt(2 * K * psi * dth), rel=0.05
    )


def test_quantile_input_and_pre_wetting_rows_skipped():
    front, _ = synthetic_front(np.random.default_rng(9))
    q = np.array([0.05, 0.16, 0.5, 0.84, 0.95])
    fd = front["front_depth_samples"].quantile(q, dim="sample").rename(quantile="quantile")
    dt = front["delta_theta_samples"].quantile(q, dim="sample")
    qs = xr.Dataset({"front_depth": fd.T, "delta_theta": dt.T})
    pre = xr.Dataset(
        {"front_depth": (("time", "quantile"), np.zeros((1, 5))), "delta_theta": dt.T[:1] * np.nan},
        coords={"time": [-1.0], "quantile": q},
    )
    both = xr.concat([pre, qs], dim="time")
    both["pre_wetting"] = ("time", [True, False, False, False, False])
    fit = sw.fit_green_ampt(both, seed=2)
    assert fit.data.sizes["time"] == 4
    assert fit.data["time"].values.tolist() == TIMES.tolist()
    assert fit.data.attrs["delta_theta_prior_source"] == "front posterior quantiles"


def test_seed_reproducible():
    front, _ = synthetic_front(np.random.default_rng(1))
    with pytest.warns(sw.ConvergenceWarning):
        a = sw.fit_green_ampt(front, seed=11, max_steps=200)
    with pytest.warns(sw.ConvergenceWarning):
        b = sw.fit_green_ampt(front, seed=11, max_steps=200)
    np.testing.assert_array_equal(
        a.samples["saturated_conductivity"].values, b.samples["saturated_conductivity"].values
    )
    assert isinstance(a, InfiltrationFit)


def test_errors():
    front, _ = synthetic_front(np.random.default_rng(1))
    with pytest.raises(InputError, match="need at least 2 surveys after wetting"):
        sw.fit_green_ampt(front.isel(time=[0]), seed=0)
    with pytest.raises(InputError, match="front dataset needs 'front_depth_samples'"):
        sw.fit_green_ampt(front.drop_vars("front_depth_samples"), seed=0)
    with pytest.raises(InputError, match="no water-content jump"):
        sw.fit_green_ampt(front.drop_vars("delta_theta_samples"), seed=0)
    with pytest.raises(InputError, match=r"delta_theta prior mean 0\.9"):
        sw.fit_green_ampt(front, seed=0, delta_theta=(0.9, 0.1))
    with pytest.raises(InputError, match=r"front must be an xarray\.Dataset"):
        sw.fit_philip({"time": TIMES}, seed=0)
