"""Sampling the layered-earth posterior with emcee, and judging convergence.

Steps (:func:`run_inversion_sampler` runs them all):

1. **Least-squares start** (:func:`least_squares_start`): weighted least
   squares (``scipy.optimize.least_squares``, trust-region reflective with
   the prior bounds) from the NMO/Dix starting model of
   :func:`soilwave.initial_model.initial_model` and from a few prior draws;
   the best fit wins. Its Gauss-Newton covariance ``(J^T J + P)^-1`` (``P`` a
   weak prior precision so unconstrained directions, such as the half-space
   permittivity without refraction picks, stay finite) gives the scale of
   the initial ensemble.
2. **Initial ensemble** (:func:`initial_ensemble`): walkers drawn from a
   Gaussian around the fit with that covariance, redrawn until every walker
   has a finite posterior density.
3. **Affine-invariant ensemble MCMC** (Goodman & Weare 2010, emcee:
   Foreman-Mackey et al. 2013) with the vectorised log-posterior
   (``vectorize=True``) and a mixture of differential-evolution moves (80 %
   DE, 20 % DE-snooker; the mixture emcee's documentation suggests for
   moderately correlated targets), run in chunks until the chain is at least
   ``tau_factor`` (default 50) integrated autocorrelation times long, the
   length over which emcee's documentation trusts the estimate of tau, or
   ``max_steps`` is reached.
4. **Burn-in and thinning from tau**: discard ``burn_in_factor`` (default 3)
   times the largest tau, keep every ``tau_min / 2``-th step.
5. **Diagnostics**: tau per parameter (emcee, ``tol=0``), acceptance
   fraction, bulk effective sample size (arviz-stats, each walker treated as a
   chain) and rank-normalised split R-hat (Vehtari et al. 2021) across
   ``n_groups`` groups of walkers (each group's walkers concatenated into one
   chain). ``converged`` is true when the chain length reached
   ``tau_factor * max(tau)`` and every R-hat is below ``rhat_max`` (default
   1.01, Vehtari et al. 2021); otherwise a
   :class:`soilwave.errors.ConvergenceWarning` is issued and the reason kept.

Reproducibility: emcee 3.1.6 has no seed argument; it keeps a private
``numpy.random.RandomState`` in ``sampler._random`` that it passes to every
move. We replace it with one seeded from the run's seed, and draw the starts
and the initial ensemble from ``numpy.random.default_rng`` on the same seed,
so a seed fixes every random number of the run.
"""

from __future__ import annotations

import dataclasses
import time
import warnings

import numpy as np

from soilwave.errors import ConvergenceWarning, InputError, SoilwaveError

__all__ = [
    "SamplerRun",
    "initial_ensemble",
    "least_squares_start",
    "run_inversion_sampler",
]


@dataclasses.dataclass
class SamplerRun:
    """Output of :func:`run_inversion_sampler`.

    Attributes
    ----------
    samples : numpy.ndarray
        Thinned post-burn-in sampling vectors, shape ``(n_sample, ndim)``,
        ordered step-major (all walkers of a kept step, then the next step).
    log_prob : numpy.ndarray
        Log posterior of each kept sample, ``(n_sample,)``.
    walker, step : numpy.ndarray
        Walker index and chain step of each kept sample.
    x_start : numpy.ndarray
        Least-squares start, ``(ndim,)``.
    diagnostics : dict
        ``tau``, ``ess``, ``rhat`` (arrays over parameters), ``parameter``
        (names), ``acceptance`` (mean), ``acceptance_min``, ``converged``,
        ``reason``, ``n_steps``, ``n_walkers``, ``burn_in``, ``thin``,
        ``tau_factor``, ``wall_time_s``, ``ess_per_second``, ``moves``.
    """

    samples: np.ndarray
    log_prob: np.ndarray
    walker: np.ndarray
    step: np.ndarray
    x_start: np.ndarray
    diagnostics: dict


def _seed_streams(seed):
    """Return (numpy Generator, emcee RandomState) both derived from ``seed``."""
    ss = np.random.SeedSequence(seed)
    child_rng, child_emcee = ss.spawn(2)
    rng = np.random.default_rng(child_rng)
    rs = np.random.RandomState(np.random.MT19937(child_emcee))
    return rng, rs


def least_squares_start(posterior, starts, *, rng=None, n_random=2):
    """Best weighted-least-squares fit from several starting models.

    Parameters
    ----------
    posterior : soilwave.posterior.LogPosterior
        The posterior (its residuals, bounds and prior scales are used).
    starts : list of numpy.ndarray
        Starting sampling vectors (e.g. from the NMO/Dix model).
    rng : numpy.random.Generator, optional
        Draws ``n_random`` further starts from the priors when given.
    n_random : int
        Number of prior-drawn starts.

    Returns
    -------
    x : numpy.ndarray
        Best fit, ``(ndim,)`` (noise scale at the value matching the misfit).
    cov : numpy.ndarray
        Regularised Gauss-Newton covariance ``(ndim, ndim)``.
    """
    from scipy.optimize import least_squares

    lo, hi = posterior.bounds()
    ns = posterior.slices.get("log_noise_scale")
    free = np.ones(posterior.ndim, bool)
    if ns is not None:
        free[ns] = False
    lo_f, hi_f = lo[free], hi[free]
    span = np.where(np.isfinite(hi_f - lo_f), hi_f - lo_f, 1.0)
    lo_in, hi_in = lo_f + 1e-6 * span, hi_f - 1e-6 * span

    candidates = [np.asarray(s, dtype=float) for s in starts]
    if rng is not None and n_random > 0:
        draws = posterior.priors.sample(
            n_random,
            n_interfaces=posterior.n_interfaces,
            rng=rng,
            time_zero_mean=posterior.time_zero_mean,
        )
        draws["noise_scale"] = np.ones(n_random)
        candidates.extend(posterior.from_physical(draws))

    def full(z):
        x = np.zeros(posterior.ndim)
        x[free] = z
        return x

    def fun(z):
        return posterior.residuals(full(z)[None, :])[0]

    idx = np.flatnonzero(free)

    def jac(z):
        # forward differences, all perturbed models in one batched call
        step = 1e-6 * np.maximum(1.0, np.abs(z))
        x = np.tile(full(z), (idx.size + 1, 1))
        x[1 + np.arange(idx.size), idx] += step
        r = posterior.residuals(x)
        return ((r[1:] - r[0]) / step[:, None]).T

    fits = []
    for x0 in candidates:
        z0 = np.clip(np.nan_to_num(x0[free], nan=0.0), lo_in, hi_in)
        try:
            fit = least_squares(
                fun, z0, jac=jac, bounds=(lo_f, hi_f), x_scale="jac", method="trf", max_nfev=300
            )
        except (ValueError, np.linalg.LinAlgError):  # pragma: no cover - defensive
            continue
        fits.append(fit)
    scales = posterior.prior_scales()
    for fit in sorted(fits, key=lambda f: f.cost):
        x = _inside_support(posterior, full(fit.x))
        if ns is not None:
            r = posterior.terms[0].normalised_residuals(posterior.to_physical(x[None, :]))[0]
            rms = np.sqrt(np.nanmean(r * r)) if np.any(np.isfinite(r)) else 1.0
            x[ns] = np.clip(np.log(max(rms, 1e-3)), lo[ns] * 0.5, hi[ns] * 0.5)
        if not np.isfinite(posterior(x[None, :])[0]):
            continue
        prec = fit.jac.T @ fit.jac + np.diag(1.0 / scales[free] ** 2)
        cov = np.diag(scales**2 * 1e-4)
        cov[np.ix_(free, free)] = np.linalg.pinv(prec)
        if ns is not None:
            cov[ns, ns] = 0.5 / max(posterior.terms[0].n, 1)
        return x, cov
    msg = (
        "least-squares start failed: no fitted starting model has a positive posterior "
        "density (every one predicts a picked phase that cannot exist, or lies outside the "
        "priors); check the phases, interfaces and priors"
    )
    raise SoilwaveError(msg)


def _inside_support(posterior, x):
    """Move ``x`` strictly inside the prior bounds of permittivity and thickness."""
    p = posterior.priors
    phys = posterior.to_physical(x[None, :])
    span_e = p.permittivity_max - p.permittivity_min
    span_h = p.max_thickness - p.min_thickness
    eps = np.clip(
        phys["permittivity"], p.permittivity_min + 1e-6 * span_e, p.permittivity_max - 1e-6 * span_e
    )
    h = np.clip(phys["thickness"], p.min_thickness + 1e-6 * span_h, p.max_thickness - 1e-6 * span_h)
    out = posterior.from_physical(
        {
            "permittivity": eps,
            "thickness": h,
            "time_zero": phys["time_zero"],
            "noise_scale": phys["noise_scale"],
        }
    )[0]
    # blocks added by extensions keep their values
    known = ("log_permittivity", "log_vertical_time", "time_zero", "log_noise_scale")
    for name, sl in posterior.slices.items():
        if name not in known:
            out[sl] = x[sl]
    return out


def initial_ensemble(posterior, x, cov, n_walkers, *, rng, max_tries=80):
    """Walkers drawn around ``x`` with covariance ``cov``, all with finite density.

    Parameters
    ----------
    posterior : callable
        Vectorised log posterior.
    x : numpy.ndarray
        Centre, ``(ndim,)``.
    cov : numpy.ndarray
        Covariance, ``(ndim, ndim)``.
    n_walkers : int
        Number of walkers.
    rng : numpy.random.Generator
        Random generator.
    max_tries : int
        Redraws before giving up; the spread halves after every 4.

    Returns
    -------
    numpy.ndarray
        ``(n_walkers, ndim)``.
    """
    ndim = x.size
    cov = 0.5 * (cov + cov.T)
    w, v = np.linalg.eigh(cov)
    root = v * np.sqrt(np.clip(w, 1e-12 * max(w.max(), 1e-300), None))
    out = x + rng.standard_normal((n_walkers, ndim)) @ root.T
    lp = posterior(out)
    scale = 1.0
    for attempt in range(max_tries):
        bad = ~np.isfinite(lp)
        if not np.any(bad):
            return out
        if attempt and attempt % 4 == 0:
            scale *= 0.5
        out[bad] = x + scale * rng.standard_normal((int(bad.sum()), ndim)) @ root.T
        lp[bad] = posterior(out[bad])
    msg = (
        f"could not place {int((~np.isfinite(lp)).sum())} of {n_walkers} walkers where the "
        "posterior is positive around the least-squares start; check the picks and priors"
    )
    raise SoilwaveError(msg)


def _diagnose(chain, burn_in, n_groups):
    """ESS (walkers as chains) and R-hat (walker groups) of ``chain`` (steps, walkers, ndim)."""
    import arviz_stats

    post = np.transpose(chain[burn_in:], (1, 0, 2))  # (walkers, draws, ndim)
    n_w, n_d, ndim = post.shape
    ess = np.asarray(arviz_stats.ess(post, chain_axis=0, draw_axis=1, method="bulk"), float)
    g = max(2, min(n_groups, n_w // 2))
    usable = (n_w // g) * g
    groups = post[:usable].reshape(g, usable // g, n_d, ndim).reshape(g, -1, ndim)
    rhat = np.asarray(arviz_stats.rhat(groups, chain_axis=0, draw_axis=1, method="rank"), float)
    return ess.reshape(ndim), rhat.reshape(ndim)


def run_inversion_sampler(
    posterior,
    *,
    starts=(),
    seed=None,
    n_walkers: int = 32,
    max_steps: int = 20000,
    min_steps: int = 500,
    tau_factor: float = 50.0,
    burn_in_factor: float = 3.0,
    check_every: int = 100,
    n_groups: int = 4,
    rhat_max: float = 1.01,
    progress: bool = False,
) -> SamplerRun:
    """Least-squares start, emcee sampling to ``tau_factor`` tau, burn-in, thinning, diagnostics.

    Parameters
    ----------
    posterior : soilwave.posterior.LogPosterior
        Vectorised log posterior.
    starts : sequence of numpy.ndarray
        Starting sampling vectors for least squares (prior draws are added).
    seed : int or None
        Seed of every random number of the run (see the module docstring).
    n_walkers : int
        Walkers (even, at least ``2 * ndim + 2``; raised automatically).
    max_steps : int
        Step cap.
    min_steps : int
        Never stop before this many steps.
    tau_factor : float
        Stop when the chain is at least ``tau_factor * max(tau)`` steps long.
    burn_in_factor : float
        Burn-in in units of ``max(tau)``.
    check_every : int
        Steps between autocorrelation checks.
    n_groups : int
        Walker groups for R-hat.
    rhat_max : float
        Largest R-hat counted as converged.
    progress : bool
        Show a tqdm progress bar.

    Returns
    -------
    SamplerRun
    """
    import emcee

    for name, value, minimum in (
        ("n_walkers", n_walkers, 2),
        ("max_steps", max_steps, 10),
        ("check_every", check_every, 10),
    ):
        if not isinstance(value, int | np.integer) or value < minimum:
            msg = f"{name}={value!r} must be an integer >= {minimum}"
            raise InputError(msg)
    if not tau_factor > 0 or not burn_in_factor >= 0:
        msg = f"tau_factor={tau_factor!r} must be > 0 and burn_in_factor={burn_in_factor!r} >= 0"
        raise InputError(msg)
    t_start = time.perf_counter()
    ndim = posterior.ndim
    n_walkers = max(int(n_walkers), 2 * ndim + 2)
    n_walkers += n_walkers % 2
    rng, emcee_random = _seed_streams(seed)

    x_ls, cov = least_squares_start(posterior, list(starts), rng=rng)
    p0 = initial_ensemble(posterior, x_ls, cov, n_walkers, rng=rng)

    moves = [(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)]
    sampler = emcee.EnsembleSampler(n_walkers, ndim, posterior, vectorize=True, moves=moves)
    sampler._random = emcee_random

    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=min_steps, desc="sampling", unit="step", leave=False)
    state = p0
    n_steps = 0
    tau = np.full(ndim, np.inf)
    reached = False
    try:
        while n_steps < max_steps:
            target = min(max_steps, max(n_steps + check_every, min_steps))
            for new_state in sampler.sample(state, iterations=target - n_steps):
                state = new_state
                if bar is not None:
                    bar.update(1)
            n_steps = target
            tau = sampler.get_autocorr_time(tol=0)
            if bar is not None and np.all(np.isfinite(tau)):
                need = int(np.ceil(tau_factor * np.max(tau)))
                bar.total = int(min(max_steps, max(need, n_steps)))
                bar.set_postfix(tau=f"{np.max(tau):.0f}")
                bar.refresh()
            if np.all(np.isfinite(tau)) and n_steps >= tau_factor * np.max(tau):
                reached = True
                break
    finally:
        if bar is not None:
            bar.close()

    chain = sampler.get_chain()
    lp_chain = sampler.get_log_prob()
    tau_max = float(np.nanmax(tau)) if np.any(np.isfinite(tau)) else float(n_steps)
    tau_min = float(np.nanmin(tau)) if np.any(np.isfinite(tau)) else 1.0
    burn_in = min(int(np.ceil(burn_in_factor * tau_max)), n_steps // 2)
    thin = max(1, int(0.5 * tau_min))
    ess, rhat = _diagnose(chain, burn_in, n_groups)
    kept = np.arange(burn_in, n_steps, thin)
    samples = chain[kept].reshape(-1, ndim)
    log_prob = lp_chain[kept].reshape(-1)
    step = np.repeat(kept, n_walkers)
    walker = np.tile(np.arange(n_walkers), kept.size)
    acc = np.asarray(sampler.acceptance_fraction, float)
    wall = time.perf_counter() - t_start

    reasons = []
    if not reached:
        reasons.append(
            f"chain of {n_steps} steps is shorter than {tau_factor:g} autocorrelation times "
            f"(max tau {tau_max:.1f} steps); raise max_steps"
        )
    if not np.all(rhat < rhat_max):
        worst = int(np.nanargmax(rhat)) if np.any(np.isfinite(rhat)) else 0
        reasons.append(
            f"R-hat across walker groups {rhat[worst]:.3f} for {posterior.names[worst]} "
            f"exceeds {rhat_max}"
        )
    converged = not reasons
    if not converged:
        msg = "sampler did not converge: " + "; ".join(reasons)
        warnings.warn(msg, ConvergenceWarning, stacklevel=2)

    diagnostics = {
        "parameter": list(posterior.names),
        "tau": np.asarray(tau, float),
        "ess": ess,
        "rhat": rhat,
        "acceptance": float(acc.mean()),
        "acceptance_min": float(acc.min()),
        "converged": bool(converged),
        "reason": "; ".join(reasons)
        if reasons
        else "chain longer than tau_factor * tau and R-hat ok",
        "n_steps": int(n_steps),
        "n_walkers": int(n_walkers),
        "burn_in": int(burn_in),
        "thin": int(thin),
        "tau_factor": float(tau_factor),
        "rhat_max": float(rhat_max),
        "wall_time_s": float(wall),
        "ess_per_second": float(np.nanmin(ess) / wall) if wall > 0 else float("nan"),
        "moves": "0.8 DEMove + 0.2 DESnookerMove (emcee)",
    }
    return SamplerRun(
        samples=samples,
        log_prob=log_prob,
        walker=walker,
        step=step,
        x_start=x_ls,
        diagnostics=diagnostics,
    )
