"""Benchmark: full sw.invert on a 2-interface gather (~100 picks) against plain emcee.

Prints (single process; pin to one core with ``taskset -c 0`` for the one-core figure):

* soilwave: wall time of ``sw.invert`` to 50 autocorrelation times (including the
  least-squares start and diagnostics), steps, max tau, min bulk ESS and ESS per second;
* a plain, unvectorised emcee set-up: default stretch move, physical parameters
  (permittivity, thickness, time zero), one Python log-probability call per walker with
  scalar ``scipy.optimize.brentq`` ray tracing per reflection pick, run for a fixed
  number of steps from the same least-squares neighbourhood; its ESS per second
  (arviz-stats bulk ESS, walkers as chains, after discarding the first half);
* the ratio of ESS per second (goal >= 50) and whether the full inversion is under 10 s.

Run::

    python benchmarks/bench_inversion.py [--plain-steps 300]
"""

from __future__ import annotations

import argparse
import time
import warnings

import arviz_stats
import emcee
import numpy as np
from scipy.optimize import brentq

import soilwave as sw

C = sw.SPEED_OF_LIGHT  # m/ns, CODATA via scipy.constants
EPS = np.array([6.0, 15.0, 25.0])
H = np.array([0.8, 1.2])
T0 = 1.5
SIGMA = 0.3


def gather(seed=1):
    x = np.linspace(0.3, 4.0, 25)
    offs, ph, itf = [], [], []
    for p, k in [("air", 0), ("ground", 0), ("reflection", 1), ("reflection", 2)]:
        offs += list(x)
        ph += [p] * x.size
        itf += [k] * x.size
    t = sw.TravelTimeOperator(offs, ph, itf)(H, sw.wave_velocity(EPS), T0)
    t = t + np.random.default_rng(seed).normal(0, SIGMA, t.shape)
    return sw.make_picks(offs, t, ph, interface=itf, sigma=SIGMA)


# --- the plain set-up: scalar, per walker ---------------------------------------------


def scalar_reflection_time(x, h, v):
    """Two-way time of a reflection through layers h, v at offset x by brentq on p."""
    if x == 0.0:
        return float(np.sum(2 * h / v))
    p_max = (1.0 - 1e-12) / np.max(v)

    def f(p):
        return np.sum(2 * h * p * v / np.sqrt(1 - (p * v) ** 2)) - x

    p = brentq(f, 0.0, p_max, xtol=1e-14)
    return float(np.sum(2 * h / (v * np.sqrt(1 - (p * v) ** 2))))


def make_plain_log_prob(picks, priors):
    x = picks["offset"].values
    t = picks["time"].values
    s = picks["sigma"].values
    ph = picks["phase"].values.astype(str)
    itf = picks["interface"].values
    n_l = 3

    def log_prob(theta):
        eps, h, t0 = theta[:n_l], theta[n_l : 2 * n_l - 1], theta[-1]
        if np.any(eps < priors.permittivity_min) or np.any(eps > priors.permittivity_max):
            return -np.inf
        if np.any(h < priors.min_thickness) or np.any(h > priors.max_thickness):
            return -np.inf
        v = C / np.sqrt(eps)
        lp = -np.sum(np.log(eps)) - 0.5 * ((t0 - T0) / priors.time_zero_sd) ** 2
        chi2 = 0.0
        for i in range(x.size):
            if ph[i] == "air":
                pred = x[i] / C
            elif ph[i] == "ground":
                pred = x[i] / v[0]
            else:
                k = int(itf[i])
                pred = scalar_reflection_time(x[i], h[:k], v[:k])
            chi2 += ((pred + t0 - t[i]) / s[i]) ** 2
        return lp - 0.5 * chi2

    return log_prob


def main(argv=None):
    ap = argparse.ArgumentParser(description="full inversion vs plain emcee")
    ap.add_argument("--plain-steps", type=int, default=200)
    ap.add_argument("--seed", type=int, default=0)
    a = ap.parse_args(argv)
    picks = gather()
    priors = sw.Priors(noise_scale_sd=None, time_zero_mean=T0)
    print(f"gather: {picks.sizes['pick']} picks, 2 interfaces, sigma {SIGMA} ns")

    t, c = time.perf_counter(), time.process_time()
    res = sw.invert(picks, seed=a.seed, priors=priors)
    wall, cpu = time.perf_counter() - t, time.process_time() - c
    d = res.diagnostics
    ess_sw = float(d["ess"].min())
    print(
        f"soilwave invert: {wall:.2f} s wall ({cpu:.2f} s CPU), "
        f"{d['n_steps']} steps x {d['n_walkers']} walkers, "
        f"max tau {float(d['tau'].max()):.1f} steps, min ESS {ess_sw:.0f}, "
        f"ESS/s {ess_sw / wall:.1f} (per CPU s {ess_sw / cpu:.1f}), converged {d['converged']}"
    )

    log_prob = make_plain_log_prob(picks, priors)
    rng = np.random.default_rng(a.seed)
    n_w, ndim = 32, 6
    centre = np.r_[EPS, H, T0]
    p0 = centre * (1 + 1e-3 * rng.standard_normal((n_w, ndim)))
    sampler = emcee.EnsembleSampler(n_w, ndim, log_prob)
    sampler._random = np.random.RandomState(a.seed)
    t, c = time.perf_counter(), time.process_time()
    sampler.run_mcmc(p0, a.plain_steps)
    wall_plain, cpu_plain = time.perf_counter() - t, time.process_time() - c
    chain = sampler.get_chain()[a.plain_steps // 2 :]
    ess_plain = float(
        np.min(arviz_stats.ess(np.transpose(chain, (1, 0, 2)), chain_axis=0, draw_axis=1))
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        tau_plain = sampler.get_autocorr_time(tol=0)
    print(
        f"plain emcee (per-walker, scalar brentq): {a.plain_steps} steps x {n_w} walkers in "
        f"{wall_plain:.2f} s wall ({cpu_plain:.2f} s CPU, "
        f"{1e3 * cpu_plain / (a.plain_steps * n_w):.2f} ms CPU per log-prob), "
        f"max tau (short chain, indicative) {np.max(tau_plain):.1f}, min ESS {ess_plain:.0f}, "
        f"ESS/s {ess_plain / wall_plain:.2f} (per CPU s {ess_plain / cpu_plain:.2f})"
    )
    ratio = (ess_sw / wall) / (ess_plain / wall_plain)
    ratio_cpu = (ess_sw / cpu) / (ess_plain / cpu_plain)
    print(f"ESS/s ratio soilwave / plain: {ratio:.0f}x wall, {ratio_cpu:.0f}x CPU (goal >= 50x)")
    print(f"full inversion under 10 s: {wall < 10.0} ({wall:.2f} s wall, {cpu:.2f} s CPU)")


if __name__ == "__main__":
    main()
