"""Simulation-based calibration of the inversion (Talts et al. 2018, arXiv:1804.06788).

Layered earths are drawn from the prior, picks simulated from the forward model with
Gaussian noise (sigma x the drawn noise scale), and each set inverted with the same
priors. For a calibrated posterior the truth falls inside the central 90 % credible
interval with probability 0.9, so over N independent draws the count is
Binomial(N, 0.9). The test accepts counts inside the two-sided 99.9 % binomial interval
per parameter (five parameters: family-wise false-alarm rate below 0.5 %). A larger run
is benchmarks/sbc_coverage.py.

The picks (air, ground, reflection) carry no information on the half-space, so its
permittivity posterior is its prior (log-uniform on [2, 90]). The prior mass between the
posterior 5 % and 95 % quantiles is then 0.9 in every run, whatever the truth: a far
more sensitive check of the sampler than the coverage count. Averaged over the runs it
must lie within 4 standard errors of 0.9, plus 1 / ESS for the finite number of draws
(an empirical 90 % interval from n independent draws holds 0.9 n / (n + 1) in
expectation; order statistics of a uniform sample, derived).
"""

import warnings

import numpy as np
import pytest
from scipy import stats

import soilwave as sw
from soilwave.errors import ConvergenceWarning

N_DRAWS = 24
SIGMA = 0.3
# priors of the study: defaults except where simulated picks would fail the pick-table
# consistency checks (see benchmarks/sbc_coverage.py)
PRIORS = sw.Priors(
    permittivity_min=2.0,
    max_thickness=2.0,
    time_zero_mean=3.0,
    time_zero_sd=1.0,
    noise_scale_sd=0.3,
)


def _simulate(truth, rng):
    x = np.linspace(0.3, 3.0, 8)
    ph = ["air"] * 8 + ["ground"] * 8 + ["reflection"] * 8
    itf = [0] * 16 + [1] * 8
    offs = np.tile(x, 3)
    t = sw.TravelTimeOperator(offs, ph, itf)(
        truth["thickness"], truth["velocity"], truth["time_zero"]
    )
    t = t + rng.normal(0.0, SIGMA * truth["noise_scale"], t.shape)
    return sw.make_picks(offs, t, ph, interface=itf, sigma=SIGMA)


@pytest.mark.slow
def test_central_90_percent_intervals_cover_the_truth():
    rng = np.random.default_rng(20180406)
    draws = PRIORS.sample(N_DRAWS, n_interfaces=1, rng=rng, time_zero_mean=3.0)
    inside = np.zeros((N_DRAWS, 5), bool)
    mass = np.zeros(N_DRAWS)
    ess_half_space = np.zeros(N_DRAWS)
    log_lo, log_hi = np.log(PRIORS.permittivity_min), np.log(PRIORS.permittivity_max)
    for i in range(N_DRAWS):
        truth = {k: v[i] for k, v in draws.items()}
        picks = _simulate(truth, rng)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            res = sw.invert(picks, seed=i, priors=PRIORS, max_steps=6000)
        s = res.samples
        post = [
            s["permittivity"].values[:, 0],
            s["permittivity"].values[:, 1],
            s["thickness"].values[:, 0],
            s["time_zero"].values,
            s["noise_scale"].values,
        ]
        true = [
            truth["permittivity"][0],
            truth["permittivity"][1],
            truth["thickness"][0],
            truth["time_zero"],
            truth["noise_scale"],
        ]
        for j, (d, v) in enumerate(zip(post, true, strict=True)):
            lo, hi = np.quantile(d, [0.05, 0.95])
            inside[i, j] = lo <= v <= hi
        q = np.log(np.quantile(post[1], [0.05, 0.95]))
        mass[i] = (q[1] - q[0]) / (log_hi - log_lo)
        ess_half_space[i] = float(res.diagnostics["ess"].sel(parameter="log_permittivity[2]"))
    lo_count, hi_count = stats.binom.ppf([0.0005, 0.9995], N_DRAWS, 0.9)
    counts = inside.sum(axis=0)
    names = ["permittivity[1]", "permittivity[2]", "thickness[1]", "time_zero", "noise_scale"]
    for name, c in zip(names, counts, strict=True):
        assert lo_count <= c <= hi_count, f"{name}: {c}/{N_DRAWS} inside the 90 % interval"
    # pooled over parameters the coverage is close to 0.9 as well (same binomial band on
    # the mean count; the parameters of one draw are not independent, so this is loose)
    assert lo_count / N_DRAWS <= inside.mean() <= 1.0
    # half-space permittivity: posterior = prior, so 0.9 of the prior mass lies inside the
    # posterior 90 % interval (see the module docstring)
    se = mass.std(ddof=1) / np.sqrt(N_DRAWS)
    tol = 4 * se + 1.0 / ess_half_space.min()
    assert abs(mass.mean() - 0.9) < tol, f"prior mass {mass.mean():.4f} +- {se:.4f}"
