"""soilwave.sampling: the generic emcee driver run_emcee, the snooker move, prior recovery.

Truths are known densities written out here (a correlated Gaussian, a standard normal,
a uniform prior); tolerances are statistical, from the effective sample size (ESS) of
each run, with fixed seeds. A tolerance of 4 standard errors fails a correct sampler
with probability about 6e-5 per check.
"""

import math
import warnings

import emcee
import numpy as np
import pytest
import xarray as xr
from scipy import stats

import soilwave as sw
from soilwave.errors import ConvergenceWarning, InputError
from soilwave.posterior import LogPosterior
from soilwave.sampling import BURN_IN_FACTOR, run_emcee, run_inversion_sampler, snooker_move

# --- a correlated Gaussian -------------------------------------------------------------

MEAN = np.array([1.0, -2.0, 0.5, 10.0])
SD = np.array([1.0, 0.1, 3.0, 0.5])
CORR = np.array(
    [
        [1.0, 0.9, 0.0, -0.3],
        [0.9, 1.0, 0.2, -0.2],
        [0.0, 0.2, 1.0, 0.5],
        [-0.3, -0.2, 0.5, 1.0],
    ]
)
COV = CORR * np.outer(SD, SD)
PREC = np.linalg.inv(COV)
NAMES = ["a", "b", "c", "d"]


def gauss_log_prob(x):
    d = np.asarray(x) - MEAN
    return -0.5 * np.einsum("ni,ij,nj->n", d, PREC, d)


@pytest.fixture(scope="module")
def gauss_run():
    # start far from the truth (3 sd off in every coordinate) with a narrow ensemble
    # (a tenth of each sd, no correlation): burn-in must forget the start
    x0 = MEAN + 3.0 * SD
    return run_emcee(gauss_log_prob, x0, np.diag((0.1 * SD) ** 2), names=NAMES, seed=7)


def test_recovers_mean_and_covariance_of_a_correlated_gaussian(gauss_run):
    run = gauss_run
    d = run.diagnostics
    assert d["converged"], d["reason"]
    ess = d["ess"]
    s = run.samples
    # mean: standard error sd / sqrt(ESS)
    se_mean = SD / np.sqrt(ess)
    assert np.all(np.abs(s.mean(axis=0) - MEAN) < 4 * se_mean)
    # variance of a Gaussian: relative standard error sqrt(2 / ESS)
    var_ratio = s.var(axis=0, ddof=1) / SD**2
    assert np.all(np.abs(var_ratio - 1.0) < 4 * np.sqrt(2.0 / ess))
    # correlation: standard error (1 - r^2) / sqrt(ESS) (Fisher 1921, large-sample form)
    r = np.corrcoef(s.T)
    ess_pair = np.minimum.outer(ess, ess)
    tol = 4 * (1 - CORR**2) / np.sqrt(ess_pair) + 1e-12
    assert np.all(np.abs(r - CORR) <= tol)


def test_run_layout_and_diagnostics(gauss_run):
    run = gauss_run
    d = run.diagnostics
    n_w = d["n_walkers"]
    assert n_w >= 2 * 4 + 2 and n_w % 2 == 0
    assert run.samples.shape == (run.log_prob.size, 4)
    assert run.walker.shape == run.step.shape == run.log_prob.shape
    # step-major order: all walkers of a kept step, then the next kept step
    assert np.array_equal(run.walker[:n_w], np.arange(n_w))
    assert np.all(np.diff(run.step[::n_w]) == d["thin"])
    assert run.step[0] == d["burn_in"]
    # burn-in BURN_IN_FACTOR tau (at most half the chain); thinning tau_min / 2
    tau = d["tau"]
    assert d["burn_in"] == min(math.ceil(BURN_IN_FACTOR * tau.max()), d["n_steps"] // 2)
    assert d["thin"] == max(1, int(0.5 * tau.min()))
    # emcee's documentation: trust tau only for chains longer than 50 tau
    assert d["n_steps"] >= 50 * tau.max()
    assert np.all(d["rhat"] < 1.01) and 0.1 < d["acceptance"] < 0.9
    assert d["parameter"] == NAMES
    # the log densities belong to the samples
    np.testing.assert_allclose(run.log_prob, gauss_log_prob(run.samples), rtol=1e-12)
    np.testing.assert_array_equal(run.x_start, MEAN + 3.0 * SD)


def test_seed_reproducibility():
    kw = {"names": NAMES, "max_steps": 300, "min_steps": 300, "tau_factor": 1.0}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        a = run_emcee(gauss_log_prob, MEAN, COV, seed=3, **kw)
        b = run_emcee(gauss_log_prob, MEAN, COV, seed=3, **kw)
        c = run_emcee(gauss_log_prob, MEAN, COV, seed=4, **kw)
    np.testing.assert_array_equal(a.samples, b.samples)
    np.testing.assert_array_equal(a.log_prob, b.log_prob)
    assert not np.array_equal(a.samples, c.samples)


def test_too_few_steps_warns_and_records_the_reason():
    with pytest.warns(ConvergenceWarning, match="shorter than 50 autocorrelation times"):
        run = run_emcee(
            gauss_log_prob, MEAN, COV, names=NAMES, seed=1, max_steps=20, check_every=10
        )
    d = run.diagnostics
    assert d["converged"] is False
    assert "raise max_steps" in d["reason"]
    assert d["n_steps"] == 20
    # burn-in is capped at half the chain, so some samples are still returned
    assert d["burn_in"] <= 10 and run.samples.shape[0] > 0


def test_bad_arguments():
    with pytest.raises(InputError, match=r"cov has shape \(3, 3\); expected a finite \(4, 4\)"):
        run_emcee(gauss_log_prob, MEAN, np.eye(3), names=NAMES, seed=0)
    with pytest.raises(InputError, match="not positive semi-definite"):
        run_emcee(gauss_log_prob, MEAN, -np.eye(4), names=NAMES, seed=0)
    with pytest.raises(InputError, match="names has 3 labels; expected 4"):
        run_emcee(gauss_log_prob, MEAN, COV, names=NAMES[:3], seed=0)
    with pytest.raises(InputError, match=r"log_prob\(x0\) is -inf"):
        run_emcee(lambda x: np.full(len(x), -np.inf), MEAN, COV, names=NAMES, seed=0)
    with pytest.raises(InputError, match=r"returned shape \(\); expected \(1,\)"):
        run_emcee(lambda x: 0.0, MEAN, COV, names=NAMES, seed=0)
    with pytest.raises(InputError, match="max_steps=5 must be an integer >= 10"):
        run_emcee(gauss_log_prob, MEAN, COV, names=NAMES, seed=0, max_steps=5)
    with pytest.raises(InputError, match="seed=-1 must be a non-negative integer"):
        run_emcee(gauss_log_prob, MEAN, COV, names=NAMES, seed=-1)
    with pytest.raises(InputError, match="burn_in_factor=-1"):
        run_emcee(gauss_log_prob, MEAN, COV, names=NAMES, seed=0, burn_in_factor=-1)
    with pytest.raises(InputError, match="x0 must be a finite 1-D vector"):
        run_emcee(gauss_log_prob, [np.nan] * 4, COV, names=NAMES, seed=0)
    with pytest.raises(InputError, match="gamma=0"):
        snooker_move(0)


# --- the snooker move ------------------------------------------------------------------


def test_snooker_move_leaves_a_standard_normal_invariant():
    # Ter Braak & Vrugt (2008) snooker update alone, started from exact draws of a 5-D
    # standard normal: any bias in the kept draws comes from the move. Check the mass
    # below the 5 % and above the 95 % quantile (scipy.stats.norm) pooled over the
    # coordinates, with the standard error sqrt(p (1 - p) / ESS), ESS = draws / tau.
    ndim, n_w, n_steps = 5, 32, 3000
    rng = np.random.default_rng(2008)
    sampler = emcee.EnsembleSampler(
        n_w,
        ndim,
        lambda x: -0.5 * np.sum(x * x, axis=1),
        vectorize=True,
        moves=snooker_move(),
    )
    sampler._random = np.random.RandomState(np.random.MT19937(2008))
    sampler.run_mcmc(rng.standard_normal((n_w, ndim)), n_steps)
    chain = sampler.get_chain()
    tau = sampler.get_autocorr_time(tol=0)
    ess = chain.shape[0] * n_w * ndim / float(np.max(tau))
    z = stats.norm.ppf(0.95)
    for frac in (np.mean(chain < -z), np.mean(chain > z)):
        assert abs(frac - 0.05) < 4 * math.sqrt(0.05 * 0.95 / ess)
    # the variance too: relative standard error sqrt(2 / ESS)
    assert abs(chain.var() - 1.0) < 4 * math.sqrt(2.0 / ess)


# --- a parameter the data do not inform: its posterior is its prior ---------------------


def test_uninformed_half_space_permittivity_follows_its_prior():
    # Air, ground and reflection picks of one layer over a half-space do not depend on
    # the half-space, so its permittivity posterior equals its prior: log-uniform on
    # [2, 90], i.e. ln(eps) uniform (soilwave.priors). Kolmogorov-Smirnov test of the
    # draws thinned to about the ESS (nearly independent), and the prior mass between
    # the posterior 5 % and 95 % quantiles (0.9, standard error about 0.3 / sqrt(ESS)).
    priors = sw.Priors(
        permittivity_min=2.0,
        max_thickness=2.0,
        time_zero_mean=3.0,
        time_zero_sd=1.0,
        noise_scale_sd=0.3,
    )
    x = np.linspace(0.3, 3.0, 8)
    ph = ["air"] * 8 + ["ground"] * 8 + ["reflection"] * 8
    itf = [0] * 16 + [1] * 8
    offs = np.tile(x, 3)
    t = sw.TravelTimeOperator(offs, ph, itf)([0.7], sw.wave_velocity(np.array([6.0, 20.0])), 3.0)
    t = t + np.random.default_rng(5).normal(0.0, 0.3, t.shape)
    picks = sw.make_picks(offs, t, ph, interface=itf, sigma=0.3)
    post = LogPosterior(picks, priors=priors)
    run = run_inversion_sampler(post, seed=11)
    assert run.diagnostics["converged"], run.diagnostics["reason"]
    j = post.names.index("log_permittivity[2]")
    lo, hi = math.log(2.0), math.log(90.0)
    u = (run.samples[:, j] - lo) / (hi - lo)
    ess = float(run.diagnostics["ess"][j])
    step = max(1, int(np.ceil(u.size / ess)))
    assert stats.kstest(u[::step], "uniform").pvalue > 1e-3
    q05, q95 = np.quantile(u, [0.05, 0.95])
    assert abs((q95 - q05) - 0.9) < 4 * 0.3 / math.sqrt(ess)


def test_samples_keep_the_dataset_shape_of_invert():
    # run_inversion_sampler is what sw.invert calls; its diagnostics name every coordinate
    x = np.tile(np.linspace(0.5, 3.0, 6), 2)
    ph = ["ground"] * 6 + ["reflection"] * 6
    t = sw.TravelTimeOperator(x, ph, [0] * 6 + [1] * 6)([0.6], [0.1, 0.08], 0.0)
    picks = sw.make_picks(x, t, ph, interface=[0] * 6 + [1] * 6, sigma=0.3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        res = sw.invert(picks, seed=2, max_steps=200, tau_factor=2.0)
    d = res.diagnostics
    assert isinstance(d["ess"], xr.DataArray)
    assert list(d["ess"]["parameter"].values) == d["parameter"]
    assert "snooker" in d["moves"] and d["burn_in_factor"] == BURN_IN_FACTOR
