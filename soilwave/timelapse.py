"""Wetting-front tracking through repeat multi-offset surveys: one joint posterior.

Model
-----
After water is applied the soil is a *step front*: a wet layer of relative
permittivity ``eps_wet(t)`` and thickness ``L(t)`` (the front depth) over the
soil below the front, which keeps its initial permittivity ``eps_below``. The
soil below the front is the same soil at every survey, so ``eps_below`` is one
parameter shared by all surveys; the pre-wetting survey (no front reflection;
its ground wave travels through that soil) fixes it, and head waves along the
front (``refraction`` picks, interface 1) in later surveys add to it. Each
survey after wetting has its own ``eps_wet``, ``L`` and time zero; a
pre-wetting survey has a time zero only.

Phases used: ``air``, ``ground`` (through the top layer: the wet layer after
wetting, the initial soil before), ``reflection`` from the front (interface 1)
and ``refraction`` along it (interface 1); times come from
:class:`soilwave.traveltime.TravelTimeOperator` (exact ray tracing). A wet
layer much thinner than a wavelength is not resolved and its ground wave
senses the soil below as well (common practice); the model ignores this.
``diffraction`` picks are ignored with a warning. Deeper interfaces are not
part of this model and raise :class:`~soilwave.errors.InputError`.

Priors (:class:`soilwave.priors.Priors`, default ``Priors()``): relative
permittivities log-uniform on ``[permittivity_min, permittivity_max]``
(default 1-90), truncated so that ``eps_wet >= eps_below`` (wetting adds water;
switch off with ``wetter_above=False``); front depth uniform on
``[min_thickness, max_thickness]`` (default 0.02-5 m); per-survey time zero
normal around that survey's air-wave estimate with sd ``time_zero_sd``
(default 2 ns); one shared log-normal pick-noise scale. Sampling runs in
``(ln eps, ln tau, t0, ln s)`` with ``tau = 2 L sqrt(eps_wet) / c`` the vertical
two-way time through the wet layer, and adds the log Jacobian
``sum ln eps + sum ln L + ln s`` so the priors stay those of the physical
quantities (the parameterisation of :mod:`soilwave.posterior`). The joint
posterior is sampled with :func:`soilwave.sampling.run_emcee`, started around
a least-squares fit of the same model.

Products
--------
Water content comes from posterior permittivity draws through the
petrophysical model (default :class:`soilwave.petro.Topp`), one parameter draw
per posterior sample shared by the wet and the initial soil, so the relation's
own uncertainty enters both and partly cancels in their difference. The
storage change of the step front is ``dS = (theta_wet - theta_below) L``
(mm), the integral over depth of the change in water content. With an
applied-water amount it is compared with what went in.

The returned :class:`xarray.Dataset` has dimensions ``time`` (elapsed hours,
as in the survey set), ``quantile`` (0.05, 0.16, 0.5, 0.84, 0.95) and
``sample`` (posterior draws, when ``keep_samples``):

=================================  =================  =====  ==============================
variable                           dims               units  meaning
=================================  =================  =====  ==============================
``front_depth``                    time, quantile     m      wetting-front depth (0 before
                                                             wetting)
``water_content_wet``              time, quantile     1      water content above the front
``water_content_below``            quantile           1      initial water content (below)
``delta_theta``                    time, quantile     1      jump across the front
``storage_change``                 time, quantile     mm     ``dS`` since the initial state
``permittivity_wet``               time, quantile     1      relative permittivity above
``permittivity_below``             quantile           1      relative permittivity below
``time_zero``                      time, quantile     ns     per-survey time zero
``applied_water``                  time               mm     cumulative applied water
``storage_recovery``               time, quantile     1      ``dS / applied`` (if given)
``storage_deficit``                time, quantile     mm     ``applied - dS`` (if given)
``<name>_samples``                 sample, time       ...    the draws behind each variable
=================================  =================  =====  ==============================

Water-content variables carry the CF standard name
``volume_fraction_of_condensed_water_in_soil``. The dataset attributes hold
the sampler diagnostics (``sampler_*``), the priors, the petrophysical model
and the ``history``. :func:`write_timelapse` saves it (or any time-lapse
dataset) to NetCDF.

Examples
--------
>>> import numpy as np
>>> import soilwave as sw
>>> c = 0.299792458
>>> x = np.linspace(0.5, 2.5, 5)
>>> def picks(eps1, depth=None):
...     t = [x / c, x * np.sqrt(eps1) / c]
...     ph = ["air"] * 5 + ["ground"] * 5
...     if depth is not None:
...         t.append(np.sqrt(x**2 + 4 * depth**2) * np.sqrt(eps1) / c)
...         ph += ["reflection"] * 5
...     n = len(ph)
...     return sw.make_picks(np.tile(x, n // 5), np.concatenate(t), ph,
...                          interface=[1 if p == "reflection" else 0 for p in ph], sigma=0.3)
>>> front = sw.track_front({0.0: picks(5.0), 3.0: picks(14.0, 0.3)}, seed=1)
>>> round(float(front["front_depth"].sel(time=3.0, quantile=0.5)), 1)
0.3
"""

from __future__ import annotations

import math
import os
import tempfile
import warnings
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import xarray as xr
from scipy.optimize import least_squares

from soilwave.errors import InputError, OutputExistsError, SoilwaveWarning
from soilwave.priors import Priors
from soilwave.provenance import append_history
from soilwave.sampling import run_emcee
from soilwave.surveys import (
    check_survey_set,
    survey_picks,
    survey_set_from_picks,
)
from soilwave.traveltime import TravelTimeOperator
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["QUANTILES", "WATER_CONTENT_STANDARD_NAME", "track_front", "write_timelapse"]

#: Quantiles reported by :func:`track_front`.
QUANTILES = (0.05, 0.16, 0.5, 0.84, 0.95)
#: CF standard name of volumetric water content.
WATER_CONTENT_STANDARD_NAME = "volume_fraction_of_condensed_water_in_soil"

_C = SPEED_OF_LIGHT
_COMBINED_MAX = 5000


# --- the joint posterior -----------------------------------------------------------------


class _FrontPosterior:
    """Vectorised log posterior of the step-front model over all surveys."""

    def __init__(self, tables, pre, priors, *, wetter_above):
        self.priors = priors
        self.wetter_above = bool(wetter_above)
        self.n_survey = len(tables)
        self.pre = np.asarray(pre, bool)
        self.wet_index = np.flatnonzero(~self.pre)
        self.n_wet = self.wet_index.size
        self.ops, self.obs, self.sig, self.t0_mean = [], [], [], []
        for tab in tables:
            self.ops.append(TravelTimeOperator.from_picks(tab))
            self.obs.append(np.asarray(tab["time"].values, float))
            self.sig.append(np.asarray(tab["sigma"].values, float))
            self.t0_mean.append(priors.resolve_time_zero_mean(tab))
        self.t0_mean = np.asarray(self.t0_mean)
        self.n_obs = int(sum(o.size for o in self.obs))
        self.obs_all = np.concatenate(self.obs)
        self.sig_all = np.concatenate(self.sig)
        self.sum_log_sig = float(np.sum(np.log(self.sig_all)))
        # one operator over every pick, evaluated for every survey's model at once and
        # the matching block taken (cheaper than one call per survey while the
        # product n_survey * n_pick stays small)
        self.combined = None
        if self.n_survey * self.n_obs <= _COMBINED_MAX:
            cat = xr.concat([t[["offset", "phase", "interface"]] for t in tables], dim="pick")
            self.combined = TravelTimeOperator.from_picks(cat)
            self.pick_survey = np.concatenate([np.full(o.size, i) for i, o in enumerate(self.obs)])
        self.free_noise = priors.noise_scale_sd is not None
        # layout of x
        self.i_dry = 0
        self.i_eps = 1 + np.arange(self.n_wet)
        self.i_tau = 1 + self.n_wet + np.arange(self.n_wet)
        self.i_t0 = 1 + 2 * self.n_wet + np.arange(self.n_survey)
        self.ndim = 1 + 2 * self.n_wet + self.n_survey + (1 if self.free_noise else 0)
        self.i_log = np.r_[0, self.i_eps, self.i_tau, [self.ndim - 1] if self.free_noise else []]
        self.i_log = self.i_log.astype(int)
        self.names = (
            ["log_permittivity_below"]
            + [f"log_permittivity_wet[{j}]" for j in range(self.n_wet)]
            + [f"log_vertical_time[{j}]" for j in range(self.n_wet)]
            + [f"time_zero[{i}]" for i in range(self.n_survey)]
            + (["log_noise_scale"] if self.free_noise else [])
        )

    def physical(self, x):
        x = np.atleast_2d(x)
        eps_dry = np.exp(x[:, self.i_dry])
        eps_wet = np.exp(x[:, self.i_eps])
        tau = np.exp(x[:, self.i_tau])
        depth = _C * tau / (2.0 * np.sqrt(eps_wet))
        t0 = x[:, self.i_t0]
        s = np.exp(x[:, -1]) if self.free_noise else np.ones(x.shape[0])
        return eps_dry, eps_wet, depth, t0, s

    def predictions(self, eps_dry, eps_wet, depth, t0):
        """Predicted times of every pick (surveys concatenated), shape (n, n_obs)."""
        v_dry = _C / np.sqrt(eps_dry)
        if self.combined is not None:
            n = eps_dry.size
            h = np.ones((n, self.n_survey, 1))
            v = np.repeat(v_dry[:, None, None], 2, axis=2).repeat(self.n_survey, axis=1)
            h[:, self.wet_index, 0] = depth
            v[:, self.wet_index, 0] = _C / np.sqrt(eps_wet)
            t = self.combined(h, v, t0)
            return t[:, self.pick_survey, np.arange(self.n_obs)]
        out = []
        j = 0
        for i in range(self.n_survey):
            if self.pre[i]:
                h = np.full((eps_dry.size, 1), 1.0)
                v = np.stack([v_dry, v_dry], axis=-1)
            else:
                h = depth[:, j : j + 1]
                v = np.stack([_C / np.sqrt(eps_wet[:, j]), v_dry], axis=-1)
                j += 1
            out.append(self.ops[i](h, v, t0[:, i]))
        return np.concatenate(out, axis=1)

    def log_prior(self, eps_dry, eps_wet, depth, t0, s):
        pr = self.priors
        eps_all = np.concatenate([eps_dry[:, None], eps_wet], axis=1)
        lp = pr.log_prob_permittivity(eps_all)
        lp = lp + pr.log_prob_thickness(depth) if self.n_wet else lp
        lp = lp + np.sum(pr.log_prob_time_zero(t0, time_zero_mean=self.t0_mean), axis=1)
        if self.free_noise:
            lp = lp + pr.log_prob_noise_scale(s)
        if self.wetter_above and self.n_wet:
            lp = np.where(np.all(eps_wet >= eps_dry[:, None], axis=1), lp, -np.inf)
        # log Jacobian of x -> (eps, L, t0, s)
        lp = lp + np.log(eps_dry) + np.sum(np.log(eps_wet), axis=1) + np.sum(np.log(depth), axis=1)
        if self.free_noise:
            lp = lp + np.log(s)
        return lp

    def __call__(self, x):
        x = np.atleast_2d(np.asarray(x, float))
        out = np.full(x.shape[0], -np.inf)
        logs = x[:, self.i_log]  # log parameters: keep exp() finite
        finite = np.all(np.isfinite(x), axis=1) & np.all(np.abs(logs) < 50, axis=1)
        if not finite.any():
            return out
        phys = self.physical(x[finite])
        lp = self.log_prior(*phys)
        ok = np.isfinite(lp)
        if not ok.any():
            out[finite] = lp
            return out
        eps_dry, eps_wet, depth, t0, s = (p[ok] for p in phys)
        pred = self.predictions(eps_dry, eps_wet, depth, t0)
        r = (pred - self.obs_all) / (self.sig_all * s[:, None])
        ll = -0.5 * np.sum(r * r, axis=1) - self.sum_log_sig - self.n_obs * np.log(s)
        ll = np.where(np.isfinite(ll), ll, -np.inf)
        res = lp.copy()
        res[ok] = lp[ok] + ll
        out[finite] = res
        return out

    def residuals(self, z):
        """Whitened residuals (noise scale 1) plus prior terms, for least squares."""
        x = np.concatenate([z, [0.0]]) if self.free_noise else z
        eps_dry, eps_wet, depth, t0, _ = self.physical(x)
        r = (self.predictions(eps_dry, eps_wet, depth, t0)[0] - self.obs_all) / self.sig_all
        r = np.where(np.isfinite(r), r, 1e3)
        return np.concatenate(
            [
                r,
                (t0[0] - self.t0_mean) / self.priors.time_zero_sd,
                [0.1 * (x[self.i_dry] - math.log(5.0))],  # weak pull where unconstrained
            ]
        )

    def start(self, tables):
        """Analytic starting model from the picks (air-wave time zero, ground and NMO)."""
        z = np.zeros(self.ndim - (1 if self.free_noise else 0))
        z[self.i_t0] = self.t0_mean
        eps_w, tau_w, eps_pre = [], [], []
        for i, tab in enumerate(tables):
            x = np.asarray(tab["offset"].values, float)
            t = np.asarray(tab["time"].values, float) - self.t0_mean[i]
            ph = np.asarray(tab["phase"].values).astype(str)
            g = (ph == "ground") & (x > 0) & (t > 0)
            v = float(np.median(x[g] / t[g])) if g.any() else math.nan
            if self.pre[i]:
                if math.isfinite(v):
                    eps_pre.append((_C / v) ** 2)
                continue
            r = ph == "reflection"
            if not math.isfinite(v) and r.sum() >= 2 and np.ptp(x[r]) > 0:
                b, _a = np.polyfit(x[r] ** 2, t[r] ** 2, 1)
                v = 1.0 / math.sqrt(b) if b > 0 else 0.1
            v = min(max(v if math.isfinite(v) else 0.1, 0.034), 0.29)
            tau2 = np.mean(t[r] ** 2 - (x[r] / v) ** 2)
            tau_w.append(math.sqrt(max(tau2, 0.25)))
            eps_w.append((_C / v) ** 2)
        eps_w = np.asarray(eps_w)
        eps_dry = float(np.mean(eps_pre)) if eps_pre else float(np.min(eps_w, initial=9.0)) * 0.6
        lo, hi = self.priors.permittivity_min * 1.01, self.priors.permittivity_max * 0.99
        eps_dry = min(max(eps_dry, lo), hi)
        eps_w = np.clip(eps_w, eps_dry * 1.001 if self.wetter_above else lo, hi)
        z[self.i_dry] = math.log(eps_dry)
        z[self.i_eps] = np.log(eps_w)
        z[self.i_tau] = np.log(tau_w) if self.n_wet else []
        return z


# --- input handling -----------------------------------------------------------------------


_PHASES_USED = ("air", "ground", "reflection", "refraction")


def _prepare(surveys):
    if isinstance(surveys, Mapping) and not isinstance(surveys, xr.Dataset):
        ss = survey_set_from_picks(surveys)
    else:
        check_survey_set(surveys)
        ss = surveys
    times = np.asarray(ss["time"].values, float)
    pre = np.asarray(ss["pre_wetting"].values, bool)
    tables = []
    for i in range(ss.sizes["time"]):
        tab = survey_picks(ss, i)
        ph = np.asarray(tab["phase"].values).astype(str)
        drop = ~np.isin(ph, _PHASES_USED)
        if drop.any():
            msg = (
                f"survey at {times[i]:g} h: {int(drop.sum())} pick(s) of phase(s) "
                f"{sorted(set(ph[drop].tolist()))} are not used by the front model"
            )
            warnings.warn(msg, SoilwaveWarning, stacklevel=3)
            tab = tab.isel(pick=np.flatnonzero(~drop))
            ph = ph[~drop]
        itf = np.asarray(tab["interface"].values)
        layered = np.isin(ph, ("reflection", "refraction"))
        if pre[i] and layered.any():
            k = int(np.flatnonzero(layered)[0])
            msg = (
                f"survey at {times[i]:g} h is flagged pre_wetting but has {ph[k]} pick(s) "
                f"(first: pick {k}, interface {int(itf[k])}); the front model has no "
                "interface before wetting: drop them or unflag the survey"
            )
            raise InputError(msg)
        deep = layered & (itf != 1)
        if deep.any():
            k = int(np.flatnonzero(deep)[0])
            msg = (
                f"survey at {times[i]:g} h: pick {k} is a {ph[k]} from interface "
                f"{int(itf[k])}; the step-front model has one interface (1 = the front)"
            )
            raise InputError(msg)
        if not pre[i] and not np.any(ph == "reflection"):
            msg = (
                f"survey at {times[i]:g} h has no reflection picks from the front "
                "(phase 'reflection', interface 1); flag it pre_wetting or drop it"
            )
            raise InputError(msg)
        if tab.sizes["pick"] == 0:
            msg = f"survey at {times[i]:g} h has no usable picks"
            raise InputError(msg)
        tables.append(tab)
    if pre.all():
        msg = "every survey is flagged pre_wetting: there is no front to track"
        raise InputError(msg)
    if not pre.any():
        msg = (
            "no pre-wetting survey: the water content below the front is constrained only "
            "by head waves (if picked) and the prior; flag the survey before wetting"
        )
        warnings.warn(msg, SoilwaveWarning, stacklevel=3)
    return ss, times, pre, tables


def _applied_water(applied_water_mm, ss, times, pre):
    if applied_water_mm is None:
        w = np.asarray(ss["applied_water"].values, float)
        if not np.any(np.isfinite(w)):
            return None
        return np.where(pre & np.isnan(w), 0.0, w)
    if isinstance(applied_water_mm, Mapping):
        wmap = {float(k): float(v) for k, v in applied_water_mm.items()}
        unknown = sorted(set(wmap) - set(times.tolist()))
        if unknown:
            msg = f"applied_water_mm gives times {unknown} h that are not survey times"
            raise InputError(msg)
        w = np.array([wmap.get(t, math.nan) for t in times])
    else:
        try:
            total = float(applied_water_mm)
        except (TypeError, ValueError):
            msg = f"applied_water_mm must be a number (mm) or a mapping; got {applied_water_mm!r}"
            raise InputError(msg) from None
        w = np.where(pre, 0.0, total)
    if np.any(w[np.isfinite(w)] < 0):
        msg = f"applied_water_mm must be >= 0 mm; got {w.tolist()}"
        raise InputError(msg)
    return w


# --- main entry point -------------------------------------------------------------------------


def _q(draws, axis=0):
    return np.quantile(draws, QUANTILES, axis=axis)


def track_front(
    surveys,
    *,
    seed=None,
    model=None,
    applied_water_mm=None,
    priors=None,
    wetter_above=True,
    keep_samples=True,
    n_samples=2000,
    n_walkers=None,
    max_steps=40000,
    tau_factor=50.0,
    progress=False,
) -> xr.Dataset:
    """Wetting-front depth, water content and storage change through repeat surveys.

    Parameters
    ----------
    surveys : mapping or xarray.Dataset
        Elapsed hours since wetting began -> pick table (surveys at ``time <= 0``
        count as pre-wetting), or a survey set from :func:`soilwave.read_survey_set`
        / :func:`soilwave.survey_set_from_picks` (its ``pre_wetting`` flags are used).
    seed : int, optional
        Seed of every random number (sampler and petrophysical draws).
    model : soilwave.petro.PetroModel, optional
        Permittivity to water content relation; default :class:`soilwave.Topp`.
    applied_water_mm : float or mapping, optional
        Water applied (irrigation or rain), mm: one total for every survey after
        wetting, or cumulative amounts per elapsed time. Default: the survey
        set's ``applied_water`` (if any).
    priors : soilwave.priors.Priors, optional
        Prior settings (see the module documentation).
    wetter_above : bool
        Require ``eps_wet >= eps_below`` (default True).
    keep_samples : bool
        Keep posterior draws as ``*_samples`` variables along ``sample``.
    n_samples : int
        Largest number of draws kept (evenly thinned).
    n_walkers : int, optional
        emcee walkers; default ``2 * ndim + 2`` rounded up to at least 32.
    max_steps : int
        Step cap of the sampler.
    tau_factor : float
        Stop once the chain is this many autocorrelation times long (default 50).
    progress : bool
        Show a progress bar.

    Returns
    -------
    xarray.Dataset
        See the module documentation.

    Raises
    ------
    InputError
        Missing front reflections after wetting, interfaces other than the
        front, reflection picks in a pre-wetting survey, bad ``applied_water_mm``.

    Examples
    --------
    See the module docstring.
    """
    from soilwave.petro import Topp

    model = Topp() if model is None else model
    priors = Priors() if priors is None else priors
    ss, times, pre, tables = _prepare(surveys)
    water = _applied_water(applied_water_mm, ss, times, pre)
    post = _FrontPosterior(tables, pre, priors, wetter_above=wetter_above)
    z0 = post.start(tables)
    span = np.full(z0.size, 20.0)
    fit = least_squares(
        post.residuals, z0, x_scale="jac", method="trf", bounds=(z0 - span, z0 + span)
    )
    z = fit.x
    jac = fit.jac
    try:
        cov = np.linalg.pinv(jac.T @ jac + np.eye(z.size) * 1e-6)
        scale = np.sqrt(np.clip(np.diag(cov), 1e-10, 1.0))
    except np.linalg.LinAlgError:  # pragma: no cover - defensive
        scale = np.full(z.size, 1e-2)
    x0 = z
    if post.free_noise:
        rms = float(np.sqrt(np.mean(fit.fun[: post.n_obs] ** 2))) if post.n_obs else 1.0
        x0 = np.concatenate([z, [math.log(max(rms, 1e-2))]])
        scale = np.concatenate([scale, [0.5 / math.sqrt(max(post.n_obs, 1))]])
    ss_seed = np.random.SeedSequence(seed)
    seed_sampler, seed_petro = (int(c.generate_state(1)[0]) for c in ss_seed.spawn(2))
    run = run_emcee(
        post,
        x0,
        np.diag((0.3 * scale) ** 2),
        names=post.names,
        seed=seed_sampler,
        n_walkers=32 if n_walkers is None else n_walkers,
        max_steps=max_steps,
        tau_factor=tau_factor,
        progress=progress,
    )
    samples, diag = run.samples, run.diagnostics
    if samples.shape[0] > n_samples:
        keep = np.round(np.linspace(0, samples.shape[0] - 1, int(n_samples))).astype(int)
        samples = samples[keep]
    eps_dry, eps_wet, depth, t0, _s = post.physical(samples)
    n = samples.shape[0]
    rng = np.random.default_rng(seed_petro)
    theta = model.water_content_draws(np.concatenate([eps_wet, eps_dry[:, None]], axis=1), rng=rng)
    th_wet, th_dry = theta[:, :-1], theta[:, -1]
    n_t = times.size
    wet = post.wet_index
    full = {}
    full["front_depth"] = np.zeros((n, n_t))
    full["front_depth"][:, wet] = depth
    for name in ("water_content_wet", "delta_theta", "permittivity_wet"):
        full[name] = np.full((n, n_t), np.nan)
    full["water_content_wet"][:, wet] = th_wet
    full["delta_theta"][:, wet] = th_wet - th_dry[:, None]
    full["permittivity_wet"][:, wet] = eps_wet
    full["storage_change"] = np.zeros((n, n_t))
    full["storage_change"][:, wet] = (th_wet - th_dry[:, None]) * depth * 1000.0
    full["time_zero"] = t0

    meta = {
        "front_depth": ("m", "wetting-front depth below the surface", None),
        "water_content_wet": ("1", "volumetric water content above the front", True),
        "delta_theta": ("1", "water-content jump across the front", None),
        "permittivity_wet": ("1", "relative permittivity above the front", None),
        "storage_change": ("mm", "storage change since the initial state", None),
        "time_zero": ("ns", "time zero of the survey", None),
        "water_content_below": ("1", "initial volumetric water content (below the front)", True),
        "permittivity_below": ("1", "relative permittivity below the front (initial)", None),
    }

    def attrs_of(name):
        units, long_name, is_theta = meta[name]
        a = {"units": units, "long_name": long_name}
        if is_theta:
            a["standard_name"] = WATER_CONTENT_STANDARD_NAME
        return a

    data = {}
    for name, d in full.items():
        qs = np.full((len(QUANTILES), n_t), np.nan)
        cols = np.all(np.isfinite(d), axis=0)
        if cols.any():
            qs[:, cols] = _q(d[:, cols])
        data[name] = (("time", "quantile"), qs.T, attrs_of(name))
    data["water_content_below"] = ("quantile", _q(th_dry), attrs_of("water_content_below"))
    data["permittivity_below"] = ("quantile", _q(eps_dry), attrs_of("permittivity_below"))
    if water is not None:
        data["applied_water"] = (
            "time",
            water,
            {"units": "mm", "long_name": "cumulative applied water (irrigation or rain)"},
        )
        with np.errstate(divide="ignore", invalid="ignore"):
            frac = full["storage_change"] / water[None, :]
        frac[:, ~(water > 0)] = np.nan
        deficit = water[None, :] - full["storage_change"]
        for name, d, units, ln in (
            ("storage_recovery", frac, "1", "storage change / applied water"),
            ("storage_deficit", deficit, "mm", "applied water minus storage change"),
        ):
            qs = np.full((len(QUANTILES), n_t), np.nan)
            cols = np.all(np.isfinite(d), axis=0)
            if cols.any():
                qs[:, cols] = _q(d[:, cols])
            data[name] = (("time", "quantile"), qs.T, {"units": units, "long_name": ln})
            if keep_samples:
                full[name] = d
    if keep_samples:
        for name, d in full.items():
            a = dict(data[name][2])
            a["long_name"] = a["long_name"] + " (posterior draws)"
            data[f"{name}_samples"] = (("sample", "time"), d, a)
        data["water_content_below_samples"] = (
            "sample",
            th_dry,
            {**attrs_of("water_content_below"), "long_name": "initial water content (draws)"},
        )
        data["permittivity_below_samples"] = ("sample", eps_dry, attrs_of("permittivity_below"))
    coords = {
        "time": ("time", times, dict(ss["time"].attrs)),
        "quantile": ("quantile", np.asarray(QUANTILES), {"long_name": "posterior quantile"}),
        "timestamp": ("time", ss["timestamp"].values, dict(ss["timestamp"].attrs)),
        "pre_wetting": ("time", pre, dict(ss["pre_wetting"].attrs)),
    }
    if keep_samples:
        coords["sample"] = ("sample", np.arange(n))
    attrs = {
        "title": "soilwave wetting-front tracking",
        "Conventions": "CF-1.8",
        "model": "step front: wet layer over the initial soil, shared permittivity below",
        "reference_time": str(ss.attrs.get("reference_time", "")),
        "petrophysical_model": repr(model),
        "priors": priors.describe()
        + ("; eps_wet >= eps_below" if wetter_above else "")
        + "; front depth = thickness prior",
        "caution": "moisture estimates need site calibration before decisions rest on them",
        "history": ss.attrs.get("history", ""),
    }
    for key in ("converged", "acceptance", "n_steps", "n_walkers", "burn_in", "thin", "reason"):
        v = diag[key]
        attrs[f"sampler_{key}"] = int(v) if isinstance(v, bool | np.bool_) else v
    attrs["sampler_tau_max"] = float(np.nanmax(diag["tau"]))
    attrs["sampler_ess_min"] = float(np.nanmin(diag["ess"]))
    attrs["sampler_rhat_max"] = float(np.nanmax(diag["rhat"]))
    attrs["sampler_wall_time_s"] = diag["wall_time_s"]
    attrs = append_history(attrs, "track_front", seed=seed, model=repr(model))
    return xr.Dataset(data, coords=coords, attrs=attrs)


# --- export ------------------------------------------------------------------------------------


def write_timelapse(dataset: xr.Dataset, path, *, overwrite: bool = False) -> Path:
    """Write a time-lapse dataset to NetCDF (h5netcdf engine), atomically.

    Parameters
    ----------
    dataset : xarray.Dataset
        For example from :func:`track_front` or :func:`soilwave.groundwave_water_content`.
    path : str or path-like
        Output file (``.nc``).
    overwrite : bool, default False
        Replace an existing file; otherwise :class:`~soilwave.errors.OutputExistsError`.

    Returns
    -------
    pathlib.Path
        The written file.

    Examples
    --------
    >>> import pathlib, tempfile, xarray as xr
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "front.nc"
    >>> write_timelapse(xr.Dataset({"a": ("time", [1.0])}), f).name
    'front.nc'
    """
    if not isinstance(dataset, xr.Dataset):
        msg = f"expected an xarray.Dataset to write; got {type(dataset).__name__}"
        raise InputError(msg)
    path = Path(path)
    if path.exists() and not overwrite:
        msg = f"{path}: output exists; pass overwrite=True to replace it"
        raise OutputExistsError(msg)
    directory = path.parent if str(path.parent) else Path(".")
    ds = dataset.copy()
    for name, var in ds.variables.items():
        if var.dtype == bool:
            ds[name] = var.astype(np.int8)
            ds[name].attrs["flag_values"] = np.array([0, 1], np.int8)
            ds[name].attrs["flag_meanings"] = "false true"
    for key, value in list(ds.attrs.items()):
        if isinstance(value, bool | np.bool_):
            ds.attrs[key] = int(value)
    ds.attrs = append_history(ds.attrs, "write_timelapse", path=path.name)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=directory)
    os.close(fd)
    try:
        ds.to_netcdf(tmp, engine="h5netcdf")
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path
