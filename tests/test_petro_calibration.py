"""Site calibration (soilwave.petro.calibrate): recovery, coverage, covariance, errors.

Synthetic pairs are generated from the published formulas with seeded noise. Coverage
checks count, over many seeds, how often the truth lies outside k standard errors and
require the count to lie in the central 99.9 % binomial interval of the expected rate.
"""

import json

import numpy as np
import pytest
from scipy import optimize, stats

import soilwave as sw
from soilwave.errors import CalibrationError, ConvergenceWarning

EPS = np.linspace(4.0, 30.0, 15)
TRUE_SLOPE, TRUE_INTERCEPT, NOISE = 0.12, -0.18, 0.015


def sqrt_pairs(seed, sigma=NOISE):
    rng = np.random.default_rng(seed)
    theta = TRUE_SLOPE * np.sqrt(EPS) + TRUE_INTERCEPT
    return theta + rng.normal(0.0, sigma, EPS.size)


def binomial_ok(misses, n, p):
    lo, hi = stats.binom.ppf([0.0005, 0.9995], n, p)
    return lo <= misses <= hi


def test_linear_fit_matches_ordinary_least_squares():
    # Independent implementation: ordinary least squares with numpy.linalg.lstsq on the
    # design [sqrt(eps), 1]; covariance s^2 (X^T X)^-1 (Gauss-Markov, standard result).
    theta = sqrt_pairs(0)
    cal = sw.calibrate(sw.SqrtLinear(0.1, -0.1), EPS, theta)
    X = np.column_stack([np.sqrt(EPS), np.ones_like(EPS)])
    beta, ssr, *_ = np.linalg.lstsq(X, theta, rcond=None)
    s2 = ssr[0] / (EPS.size - 2)
    np.testing.assert_allclose([cal.estimate["slope"], cal.estimate["intercept"]], beta, rtol=1e-7)
    np.testing.assert_allclose(cal.covariance, s2 * np.linalg.inv(X.T @ X), rtol=1e-5)
    assert cal.residual_sd == pytest.approx(np.sqrt(s2), rel=1e-7)
    assert cal.rmse == pytest.approx(np.sqrt(ssr[0] / EPS.size), rel=1e-7)
    assert cal.n_pairs == 15 and cal.free == ("slope", "intercept")
    # Covariance sane: symmetric positive definite; slope and intercept anticorrelated
    # because all sqrt(eps) > 0 (standard regression result).
    np.testing.assert_allclose(cal.covariance, cal.covariance.T)
    assert np.all(np.linalg.eigvalsh(cal.covariance) > 0)
    assert cal.correlation[0, 1] < -0.9


def test_nonlinear_fit_matches_curve_fit():
    # Independent implementation: scipy.optimize.curve_fit on the CRIM equation
    # (Birchak et al. 1974, a = 0.5) written out here.
    truth = sw.CRIM(porosity=0.38, eps_solid=4.7, eps_water=80.0)
    rng = np.random.default_rng(11)
    eps = np.linspace(4.0, 20.0, 12)
    theta = truth.water_content(eps) + rng.normal(0, 0.01, eps.size)

    def f(e, phi):
        return (np.sqrt(e) - (1 - phi) * np.sqrt(4.7) - phi) / (np.sqrt(80.0) - 1)

    popt, pcov = optimize.curve_fit(f, eps, theta, p0=[0.45])
    cal = sw.calibrate(truth.with_params(porosity=0.45), eps, theta)
    assert cal.estimate["porosity"] == pytest.approx(popt[0], rel=1e-6)
    assert cal.covariance[0, 0] == pytest.approx(pcov[0, 0], rel=1e-4)


@pytest.mark.parametrize("weighted", [False, True])
def test_coverage_sqrt_linear(weighted):
    # Statistical recovery over 400 seeds: with estimated variance the pivot is Student t
    # with n - p = 13 dof; with known theta_sigma it is standard normal (standard results).
    n_seeds = 400
    misses = {1: np.zeros(2, int), 3: np.zeros(2, int)}
    truth = np.array([TRUE_SLOPE, TRUE_INTERCEPT])
    for seed in range(n_seeds):
        theta = sqrt_pairs(1000 + seed)
        cal = sw.calibrate(
            sw.SqrtLinear(0.1, -0.1), EPS, theta, theta_sigma=NOISE if weighted else None
        )
        est = np.array([cal.estimate["slope"], cal.estimate["intercept"]])
        se = np.sqrt(np.diag(cal.covariance))
        for k in misses:
            misses[k] += np.abs(est - truth) > k * se
    dist = stats.norm if weighted else stats.t(EPS.size - 2)
    for k, m in misses.items():
        p = 2 * dist.sf(k)
        for j in range(2):
            assert binomial_ok(m[j], n_seeds, p), (k, j, m[j], p * n_seeds)


def test_coverage_crim_porosity():
    # Nonlinear model (CRIM, Birchak et al. 1974): linearised standard errors still cover;
    # 300 seeds, t with 9 dof, 3 standard errors and 1 standard error.
    truth = sw.CRIM(porosity=0.38, eps_solid=4.7, eps_water=80.0)
    eps = np.linspace(5.0, 20.0, 10)
    start = truth.with_params(porosity=0.45)
    n_seeds = 300
    miss1 = miss3 = 0
    for seed in range(n_seeds):
        rng = np.random.default_rng(5000 + seed)
        theta = truth.water_content(eps) + rng.normal(0, 0.01, eps.size)
        cal = sw.calibrate(start, eps, theta)
        z = abs(cal.estimate["porosity"] - 0.38) / cal.standard_error["porosity"]
        miss1 += z > 1
        miss3 += z > 3
    assert binomial_ok(miss1, n_seeds, 2 * stats.t(9).sf(1))
    assert binomial_ok(miss3, n_seeds, 2 * stats.t(9).sf(3))


def test_calibrated_model_draws_jointly():
    # The returned model draws parameters from the joint normal: sample covariance of
    # 40000 draws within 3 % of the fitted covariance (seed 7); predictive sd at eps 16
    # equals sqrt(g^T C g + s^2) with g = (sqrt 16, 1) (delta method, exact for linear).
    cal = sw.calibrate(sw.SqrtLinear(0.1, -0.1), EPS, sqrt_pairs(2))
    m = cal.model
    assert isinstance(m.params["slope"], sw.Uncertain)
    assert m.params["slope"].sd == pytest.approx(cal.standard_error["slope"])
    assert m.model_error == pytest.approx(cal.residual_sd)
    draws = m.draw_params(40000, rng=7)
    sample_cov = np.cov(np.vstack([draws["slope"], draws["intercept"]]))
    np.testing.assert_allclose(sample_cov, cal.covariance, rtol=0.03)
    th = m.water_content_draws(np.full((40000, 1), 16.0), rng=8)
    g = np.array([4.0, 1.0])
    expected_sd = np.sqrt(g @ cal.covariance @ g + cal.residual_sd**2)
    assert th.std() == pytest.approx(expected_sd, rel=0.03)
    point = m.water_content(16.0)
    assert abs(th.mean() - point) < 4 * expected_sd / np.sqrt(th.size)
    # Independent draws would ignore the strong negative correlation and be much wider.
    indep = np.sqrt(16 * cal.covariance[0, 0] + cal.covariance[1, 1] + cal.residual_sd**2)
    assert indep > 1.5 * expected_sd
    # Replacing a jointly drawn parameter drops the joint distribution.
    assert m.with_params(slope=0.12).covariance is None


def test_calibrated_topp_and_attrs():
    # A site refit of the Topp et al. (1980) offset and slope: the published inverse no
    # longer applies, so permittivity() inverts the fitted cubic exactly.
    eps = np.linspace(4.0, 30.0, 12)
    theta = sw.Topp().water_content(eps) + 0.02
    cal = sw.calibrate(sw.Topp(), eps, theta, free=("a0",))
    assert cal.estimate["a0"] == pytest.approx(-0.053 + 0.02, abs=1e-9)
    assert cal.model.water_content(cal.model.permittivity(0.25)) == pytest.approx(0.25, abs=1e-10)
    attrs = cal.to_attrs()
    cov = json.loads(attrs["petro_covariance"])
    assert cov["names"] == ["a0"]
    assert attrs["petro_calibration_n_pairs"] == 12.0
    assert all(isinstance(v, str | float) for v in attrs.values())


def test_bound_hit_warns():
    # Malicki et al. (1996) eq. 10 pairs shifted 0.05 m3/m3 drier than rho_b = 2.6 allows:
    # the fitted bulk density runs into its physical bound (2.65 g/cm3, quartz grain density).
    eps = np.linspace(10.0, 25.0, 8)
    theta = sw.Malicki(2.6).water_content(eps, on_range="ignore") - 0.05
    with pytest.warns(ConvergenceWarning, match="ended on a physical bound"):
        sw.calibrate(sw.Malicki(1.5), eps, theta)


def test_calibration_errors_name_the_pair():
    m = sw.SqrtLinear(0.1, -0.1)
    with pytest.raises(CalibrationError, match=r"2 calibration pair\(s\) for 2 free.*at least 3"):
        sw.calibrate(m, [4.0, 9.0], [0.05, 0.15])
    with pytest.raises(CalibrationError, match="different lengths"):
        sw.calibrate(m, [4.0, 9.0, 16.0], [0.05, 0.15])
    with pytest.raises(CalibrationError, match=r"pair 2 is not finite"):
        sw.calibrate(m, [4.0, 9.0, np.nan, 25.0], [0.05, 0.15, 0.2, 0.3])
    with pytest.raises(CalibrationError, match=r"pair 1 has eps=0.5 < 1"):
        sw.calibrate(m, [4.0, 0.5, 16.0, 25.0], [0.05, 0.15, 0.2, 0.3])
    with pytest.raises(CalibrationError, match=r"pair 3 has theta=1.2 outside 0-1"):
        sw.calibrate(m, [4.0, 9.0, 16.0, 25.0], [0.05, 0.15, 0.2, 1.2])
    with pytest.raises(CalibrationError, match=r"theta_sigma of calibration pair 0"):
        sw.calibrate(m, [4.0, 9.0, 16.0], [0.05, 0.15, 0.2], theta_sigma=[0.0, 0.01, 0.01])
    with pytest.raises(CalibrationError, match="not distinct parameters of SqrtLinear"):
        sw.calibrate(m, [4.0, 9.0, 16.0], [0.05, 0.15, 0.2], free=("porosity",))
    with pytest.raises(CalibrationError, match="must be a soilwave PetroModel"):
        sw.calibrate("Topp", [4.0, 9.0, 16.0], [0.05, 0.15, 0.2])
    # CRIM: porosity and eps_solid enter only as (1 - phi) sqrt(e_s) + phi, so they
    # cannot both be fitted (identity of the mixing equation).
    crim = sw.CRIM(porosity=0.4, eps_solid=4.7, eps_water=80.0)
    th = np.linspace(0.05, 0.35, 8)
    with pytest.raises(CalibrationError, match="cannot be identified"):
        sw.calibrate(crim, crim.permittivity(th), th, free=("porosity", "eps_solid"))
