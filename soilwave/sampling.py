"""Sampling posteriors with emcee, and judging convergence.

:func:`run_emcee` is the one emcee driver of soilwave: the layered-earth
inversion (:func:`run_inversion_sampler`), the wetting-front model
(:func:`soilwave.track_front`) and the infiltration fits
(:func:`soilwave.fit_green_ampt`) all call it. Steps
(:func:`run_inversion_sampler` adds step 1; :func:`run_emcee` runs 2-5):

1. **Least-squares start** (:func:`least_squares_start`): weighted least
   squares (``scipy.optimize.least_squares``, trust-region reflective with
   the prior bounds) from the NMO/Dix starting model of
   :func:`soilwave.initial_model.initial_model` and from a few prior draws;
   the best fit wins. Its Gauss-Newton covariance ``(J^T J + P)^-1`` (``P`` a
   weak prior precision so unconstrained directions, such as the half-space
   permittivity without refraction picks, stay finite) gives the scale of
   the initial ensemble.
2. **Initial ensemble** (:func:`initial_ensemble`): walkers drawn from a
   Gaussian around the start with that covariance, redrawn until every
   walker has a finite posterior density.
3. **Affine-invariant ensemble MCMC** (Goodman & Weare 2010, emcee:
   Foreman-Mackey et al. 2013) with the vectorised log density
   (``vectorize=True``) and a mixture of differential-evolution moves: 80 %
   emcee's ``DEMove`` (Ter Braak 2006; Nelson et al. 2014, as cited by emcee) and 20 % the
   DE-snooker update of Ter Braak & Vrugt (2008) (:func:`snooker_move`; the
   mixture emcee's documentation suggests for moderately correlated
   targets). The snooker update is our own: emcee 3.1.6's ``DESnookerMove``
   does not leave the target distribution invariant (see
   :func:`snooker_move`); with it, every central 90 % credible interval came
   out too narrow. The chain runs in chunks of ``check_every`` steps until
   it is at least ``tau_factor`` (default 50) integrated autocorrelation
   times long, the length over which emcee's documentation trusts the
   estimate of tau, or ``max_steps`` is reached.
4. **Burn-in and thinning from tau**: discard ``burn_in_factor``
   (:data:`BURN_IN_FACTOR`, 3) times the largest tau (at most half the
   chain), keep every ``tau_min / 2``-th step.
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
import functools
import time
import warnings

import numpy as np

from soilwave.errors import ConvergenceWarning, InputError, SoilwaveError

__all__ = [
    "BURN_IN_FACTOR",
    "SamplerRun",
    "initial_ensemble",
    "least_squares_start",
    "run_emcee",
    "run_inversion_sampler",
    "snooker_move",
]

#: Default burn-in, in units of the largest integrated autocorrelation time. Enough
#: with chains of 50 tau: started 3 sd off with an ensemble a tenth of the posterior
#: width, or centred with one a hundredth of it, the kept draws of a 5-D target (four
#: correlated Gaussian coordinates and one uniform with hard bounds) held 0.896-0.903
#: of the mass in their central 90 % intervals (20 seeded runs each, standard error
#: 0.0015); a burn-in of 5 tau changed nothing.
BURN_IN_FACTOR = 3.0


@dataclasses.dataclass
class SamplerRun:
    """Output of :func:`run_emcee` and :func:`run_inversion_sampler`.

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
        Centre of the initial ensemble (the least-squares fit in
        :func:`run_inversion_sampler`), ``(ndim,)``.
    diagnostics : dict
        ``tau``, ``ess``, ``rhat`` (arrays over parameters), ``parameter``
        (names), ``acceptance`` (mean), ``acceptance_min``, ``converged``,
        ``reason``, ``n_steps``, ``n_walkers``, ``burn_in``, ``burn_in_factor``,
        ``thin``, ``tau_factor``, ``rhat_max``, ``wall_time_s``, ``ess_per_second``,
        ``moves``.
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
    # noise scales are not fitted: each is set from the misfit of the term it scales
    scale_terms = getattr(posterior, "noise_scale_terms", None)
    if scale_terms is None:  # pragma: no cover - posteriors without the registry
        scale_terms = {"log_noise_scale": posterior.terms[0]}
    scale_slices = [
        (posterior.slices[name], term)
        for name, term in scale_terms.items()
        if name in posterior.slices
    ]
    free = np.ones(posterior.ndim, bool)
    for sl, _ in scale_slices:
        free[sl] = False
    lo_f, hi_f = lo[free], hi[free]
    span = np.where(np.isfinite(hi_f - lo_f), hi_f - lo_f, 1.0)
    lo_in, hi_in = lo_f + 1e-6 * span, hi_f - 1e-6 * span

    candidates = [np.asarray(s, dtype=float) for s in starts]
    if rng is not None and n_random > 0:
        with_amp = getattr(posterior, "n_conductivity", 0) > 0
        draws = posterior.priors.sample(
            n_random,
            n_interfaces=posterior.n_interfaces,
            rng=rng,
            time_zero_mean=posterior.time_zero_mean,
            amplitudes=with_amp,
        )
        draws["noise_scale"] = np.ones(n_random)
        if with_amp:
            draws["amplitude_noise_scale"] = np.ones(n_random)
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
        phys = posterior.to_physical(x[None, :])
        for sl, term in scale_slices:
            r = term.normalised_residuals(phys)[0]
            rms = np.sqrt(np.nanmean(r * r)) if np.any(np.isfinite(r)) else 1.0
            x[sl] = np.clip(np.log(max(rms, 1e-3)), lo[sl] * 0.5, hi[sl] * 0.5)
        if not np.isfinite(posterior(x[None, :])[0]):
            continue
        prec = fit.jac.T @ fit.jac + np.diag(1.0 / scales[free] ** 2)
        cov = np.diag(scales**2 * 1e-4)
        cov[np.ix_(free, free)] = np.linalg.pinv(prec)
        for sl, term in scale_slices:
            cov[sl, sl] = 0.5 / max(term.n, 1)
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
        "density is positive around the start; check the start, the data and the priors"
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


# --- moves ---------------------------------------------------------------------------


@functools.cache
def _snooker_class():
    # emcee (and, through it, scipy.stats) is imported on first use only
    from emcee.moves.red_blue import RedBlueMove

    class SnookerMove(RedBlueMove):
        """Snooker update of Ter Braak & Vrugt (2008); see :func:`snooker_move`."""

        def __init__(self, gamma):
            self.gamma = float(gamma)
            super().__init__(nsplits=4)

        def get_proposal(self, s, c, random):
            n, ndim = s.shape
            integers = getattr(random, "integers", None) or random.randint
            # one walker from each of the three other sub-ensembles, in random order
            w = np.stack([c[j][integers(len(c[j]), size=n)] for j in range(3)], axis=1)
            order = np.argsort(random.uniform(size=(n, 3)), axis=1)
            w = np.take_along_axis(w, order[:, :, None], axis=1)
            z, z1, z2 = w[:, 0], w[:, 1], w[:, 2]
            delta = s - z
            r = np.linalg.norm(delta, axis=1)
            ok = r > 0
            e = np.zeros_like(delta)
            e[ok] = delta[ok] / r[ok, None]  # unit vector of the line through z and s
            step = self.gamma * np.sum(e * (z1 - z2), axis=1)
            q = s + e * step[:, None]
            with np.errstate(divide="ignore"):
                log_factor = (ndim - 1) * (np.log(np.abs(r + step)) - np.log(r))
            log_factor[~ok] = 0.0  # z on top of s: q = s, a null move
            return q, log_factor

    return SnookerMove


def snooker_move(gamma: float = 1.7):
    """A differential-evolution snooker move for emcee (Ter Braak & Vrugt 2008).

    For each walker ``x`` three other walkers ``z, z1, z2`` are drawn (one
    from each other quarter of the ensemble, in random order). With ``e`` the
    unit vector from ``z`` to ``x``, the proposal is
    ``x' = x + gamma e (e . (z1 - z2))``: a symmetric step along the line
    through ``z``, accepted with probability
    ``min(1, p(x') |x' - z|^(d-1) / (p(x) |x - z|^(d-1)))`` (Ter Braak & Vrugt
    2008, Statistics and Computing 18:435-446, the snooker update).

    emcee 3.1.6's ``DESnookerMove`` divides ``x - z`` by the square root of
    its length instead of the length, so its step grows with ``|x - z|``,
    and weights the acceptance by ``(d - 1) / 2`` instead of ``d - 1``; it
    does not leave the target invariant (sampling a 5-D standard normal with
    it alone put about 8.7 % instead of 5 % of the draws below the 5 %
    quantile, 30 seeded runs of 4000 steps). This move is used instead.

    Parameters
    ----------
    gamma : float
        Step factor (default 1.7, the mean of the range Ter Braak & Vrugt
        recommend; emcee's default).

    Returns
    -------
    emcee.moves.RedBlueMove
        A move for ``emcee.EnsembleSampler(..., moves=...)``.

    Examples
    --------
    >>> import emcee, numpy as np
    >>> lp = lambda x: -0.5 * np.sum(x * x, axis=1)
    >>> s = emcee.EnsembleSampler(16, 3, lp, vectorize=True, moves=snooker_move())
    >>> s.run_mcmc(np.random.default_rng(0).normal(size=(16, 3)), 20).coords.shape
    (16, 3)
    """
    if not (isinstance(gamma, int | float | np.integer | np.floating) and gamma > 0):
        msg = f"gamma={gamma!r} must be a positive number"
        raise InputError(msg)
    return _snooker_class()(gamma)


def _moves():
    import emcee

    return [(emcee.moves.DEMove(), 0.8), (snooker_move(), 0.2)]


_MOVES_TEXT = "0.8 DEMove (emcee) + 0.2 snooker (Ter Braak & Vrugt 2008; soilwave.sampling)"


# --- the generic driver ----------------------------------------------------------------


def _check_options(
    seed,
    n_walkers,
    max_steps,
    min_steps,
    check_every,
    n_groups,
    tau_factor,
    burn_in_factor,
    rhat_max,
):
    if seed is not None and (
        isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0
    ):
        msg = f"seed={seed!r} must be a non-negative integer or None"
        raise InputError(msg)
    for name, value, minimum in (
        ("n_walkers", n_walkers, 2),
        ("max_steps", max_steps, 10),
        ("min_steps", min_steps, 0),
        ("check_every", check_every, 10),
        ("n_groups", n_groups, 2),
    ):
        if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < minimum:
            msg = f"{name}={value!r} must be an integer >= {minimum}"
            raise InputError(msg)
    if not tau_factor > 0 or not burn_in_factor >= 0:
        msg = f"tau_factor={tau_factor!r} must be > 0 and burn_in_factor={burn_in_factor!r} >= 0"
        raise InputError(msg)
    if not rhat_max > 1:
        msg = f"rhat_max={rhat_max!r} must be > 1"
        raise InputError(msg)


def run_emcee(
    log_prob,
    x0,
    cov,
    *,
    names,
    seed,
    n_walkers: int = 32,
    max_steps: int = 20000,
    min_steps: int = 500,
    tau_factor: float = 50.0,
    burn_in_factor: float = BURN_IN_FACTOR,
    check_every: int = 100,
    n_groups: int = 4,
    rhat_max: float = 1.01,
    progress: bool = False,
) -> SamplerRun:
    """Sample a vectorised log density with emcee until ``tau_factor`` autocorrelation times.

    Steps 2-5 of the module documentation: initial ensemble around ``x0``,
    ensemble MCMC in chunks of ``check_every`` steps until the chain is at
    least ``tau_factor * max(tau)`` steps long (and ``min_steps``), burn-in
    and thinning from tau, ESS and R-hat.

    Parameters
    ----------
    log_prob : callable
        ``log_prob(x)`` for ``x`` of shape ``(n, ndim)`` returns ``(n,)`` log
        densities (``-inf`` outside the support).
    x0 : array_like
        Centre of the initial ensemble, ``(ndim,)``; its density must be positive.
    cov : array_like
        Covariance of the initial ensemble, ``(ndim, ndim)``, symmetric
        positive semi-definite.
    names : sequence of str
        One label per coordinate (used in diagnostics and messages).
    seed : int or None
        Seed of every random number of the run (initial ensemble and moves).
    n_walkers : int
        Walkers (raised to at least ``2 * ndim + 2`` and to an even number).
    max_steps : int
        Step cap; a run stopped by it is flagged not converged.
    min_steps : int
        Never stop before this many steps.
    tau_factor : float
        Stop when the chain is at least ``tau_factor * max(tau)`` steps long.
    burn_in_factor : float
        Burn-in in units of ``max(tau)`` (at most half the chain).
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
        ``x_start`` is ``x0``.

    Raises
    ------
    InputError
        Bad options, shapes, or ``x0`` outside the support of ``log_prob``.

    Warns
    -----
    ConvergenceWarning
        When the chain is shorter than ``tau_factor`` autocorrelation times at
        ``max_steps``, or an R-hat is not below ``rhat_max``; the reason is
        kept in ``diagnostics["reason"]``.

    Examples
    --------
    >>> import numpy as np
    >>> lp = lambda x: -0.5 * np.sum(x * x, axis=1)
    >>> run = run_emcee(lp, np.zeros(2), np.eye(2), names=["a", "b"], seed=1)
    >>> run.samples.shape[1], run.diagnostics["converged"]
    (2, True)
    """
    import emcee

    _check_options(
        seed,
        n_walkers,
        max_steps,
        min_steps,
        check_every,
        n_groups,
        tau_factor,
        burn_in_factor,
        rhat_max,
    )
    t_start = time.perf_counter()
    x0 = np.array(x0, dtype=float)
    if x0.ndim != 1 or x0.size == 0 or not np.all(np.isfinite(x0)):
        msg = f"x0 must be a finite 1-D vector; got shape {x0.shape}"
        raise InputError(msg)
    ndim = x0.size
    names = [str(n) for n in names]
    if len(names) != ndim:
        msg = f"names has {len(names)} labels; expected {ndim}, one per coordinate of x0"
        raise InputError(msg)
    cov = np.array(cov, dtype=float)
    if cov.shape != (ndim, ndim) or not np.all(np.isfinite(cov)):
        msg = f"cov has shape {cov.shape}; expected a finite ({ndim}, {ndim}) covariance"
        raise InputError(msg)
    cov = 0.5 * (cov + cov.T)
    w = np.linalg.eigvalsh(cov)
    if w.max() <= 0 or w.min() < -1e-10 * w.max():
        msg = f"cov is not positive semi-definite (eigenvalues {w.min():.3g} to {w.max():.3g})"
        raise InputError(msg)
    lp0 = np.asarray(log_prob(x0[None, :]), dtype=float)
    if lp0.shape != (1,):
        msg = f"log_prob of a (1, {ndim}) batch returned shape {lp0.shape}; expected (1,)"
        raise InputError(msg)
    if not np.isfinite(lp0[0]):
        msg = (
            f"log_prob(x0) is {float(lp0[0])!r}; x0 must lie where the density is positive "
            f"(coordinates {names})"
        )
        raise InputError(msg)

    n_walkers = max(int(n_walkers), 2 * ndim + 2)
    n_walkers += n_walkers % 2
    rng, emcee_random = _seed_streams(seed)
    p0 = initial_ensemble(log_prob, x0, cov, n_walkers, rng=rng)
    sampler = emcee.EnsembleSampler(n_walkers, ndim, log_prob, vectorize=True, moves=_moves())
    sampler._random = emcee_random

    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(
            total=min(max_steps, max(min_steps, check_every)),
            desc="sampling",
            unit="step",
            leave=False,
        )
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
    finite = np.isfinite(tau)
    tau_max = float(np.max(tau[finite])) if finite.any() else float(n_steps)
    tau_min = float(np.min(tau[finite])) if finite.any() else 1.0
    burn_in = min(int(np.ceil(burn_in_factor * tau_max)), n_steps // 2)
    thin = max(1, int(0.5 * tau_min))
    ess, rhat = _diagnose(chain, burn_in, n_groups)
    kept = np.arange(burn_in, n_steps, thin)
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
            f"R-hat across walker groups {rhat[worst]:.3f} for {names[worst]} exceeds {rhat_max}"
        )
    converged = not reasons
    if not converged:
        msg = "sampler did not converge: " + "; ".join(reasons)
        warnings.warn(msg, ConvergenceWarning, stacklevel=2)

    diagnostics = {
        "parameter": names,
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
        "burn_in_factor": float(burn_in_factor),
        "thin": int(thin),
        "tau_factor": float(tau_factor),
        "rhat_max": float(rhat_max),
        "wall_time_s": float(wall),
        "ess_per_second": float(np.nanmin(ess) / wall) if wall > 0 else float("nan"),
        "moves": _MOVES_TEXT,
    }
    return SamplerRun(
        samples=chain[kept].reshape(-1, ndim),
        log_prob=lp_chain[kept].reshape(-1),
        walker=np.tile(np.arange(n_walkers), kept.size),
        step=np.repeat(kept, n_walkers),
        x_start=x0,
        diagnostics=diagnostics,
    )


# --- the layered-earth inversion ---------------------------------------------------------


def run_inversion_sampler(
    posterior,
    *,
    starts=(),
    seed=None,
    n_walkers: int = 32,
    max_steps: int = 20000,
    min_steps: int = 500,
    tau_factor: float = 50.0,
    burn_in_factor: float = BURN_IN_FACTOR,
    check_every: int = 100,
    n_groups: int = 4,
    rhat_max: float = 1.01,
    progress: bool = False,
) -> SamplerRun:
    """Least-squares start, then :func:`run_emcee` on a layered-earth posterior.

    Parameters
    ----------
    posterior : soilwave.posterior.LogPosterior
        Vectorised log posterior.
    starts : sequence of numpy.ndarray
        Starting sampling vectors for least squares (prior draws are added).
    seed : int or None
        Seed of every random number of the run (see the module docstring).
    n_walkers, max_steps, min_steps, tau_factor, burn_in_factor : optional
        As for :func:`run_emcee`.
    check_every, n_groups, rhat_max, progress : optional
        As for :func:`run_emcee`.

    Returns
    -------
    SamplerRun
        ``x_start`` is the least-squares fit.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> from soilwave.posterior import LogPosterior
    >>> from soilwave.priors import Priors
    >>> picks = xr.Dataset({"offset": ("pick", [1.0, 2.0, 1.0, 2.0]),
    ...                     "time": ("pick", [10.0, 20.0, 22.4, 26.7]),
    ...                     "sigma": ("pick", [0.3] * 4),
    ...                     "phase": ("pick", ["ground", "ground", "reflection", "reflection"]),
    ...                     "interface": ("pick", [0, 0, 1, 1])})
    >>> post = LogPosterior(picks, priors=Priors(time_zero_mean=0.0, noise_scale_sd=None))
    >>> run = run_inversion_sampler(post, seed=0, max_steps=3000)
    >>> run.samples.shape[1] == post.ndim
    True
    """
    _check_options(
        seed,
        n_walkers,
        max_steps,
        min_steps,
        check_every,
        n_groups,
        tau_factor,
        burn_in_factor,
        rhat_max,
    )
    t_start = time.perf_counter()
    # the least-squares starts and the sampler get independent streams of one seed
    ls_seed, mc_seed = (int(s.generate_state(1)[0]) for s in np.random.SeedSequence(seed).spawn(2))
    x_ls, cov = least_squares_start(posterior, list(starts), rng=np.random.default_rng(ls_seed))
    run = run_emcee(
        posterior,
        x_ls,
        cov,
        names=list(posterior.names),
        seed=mc_seed,
        n_walkers=n_walkers,
        max_steps=max_steps,
        min_steps=min_steps,
        tau_factor=tau_factor,
        burn_in_factor=burn_in_factor,
        check_every=check_every,
        n_groups=n_groups,
        rhat_max=rhat_max,
        progress=progress,
    )
    wall = time.perf_counter() - t_start
    run.diagnostics["wall_time_s"] = float(wall)
    ess_min = float(np.nanmin(run.diagnostics["ess"]))
    run.diagnostics["ess_per_second"] = ess_min / wall if wall > 0 else float("nan")
    return run
