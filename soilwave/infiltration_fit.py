"""Infiltration parameters from a tracked wetting front (Green-Ampt, Philip) with emcee.

Data
----
The input is the dataset returned by :func:`soilwave.track_front` (or any
dataset with the same variables): elapsed time ``time`` (h since water was
first applied, i.e. since ponding began), a ``pre_wetting`` flag, and either
posterior draws ``front_depth_samples`` and ``delta_theta_samples`` along
``(sample, time)`` or, failing those, quantiles ``front_depth`` and
``delta_theta`` along ``(time, quantile)``. Surveys flagged ``pre_wetting``
or at ``time <= 0`` are not used.

Each survey's front depth enters through a Gaussian approximation of its
posterior (mean and standard deviation of the draws; from quantiles: the
median and half the 16-84 % range), with an optional extra model-error
standard deviation ``model_error`` (m) added in quadrature. Correlations
between surveys and between a survey's front depth and its water-content jump
are neglected; this is an approximation, stated here.

The water-content jump across the front ``delta_theta = theta_s - theta_i``
is *sampled*, not fixed: its prior is a normal distribution (truncated to
[0.005, 0.7]) with the mean and standard deviation of the per-draw average over
the wet surveys of the front posterior's ``delta_theta`` (averaging per draw
keeps the petrophysical uncertainty, which is shared by all surveys, in the
spread). Pass ``delta_theta=(mean, sd)`` or a float to override.

Models and priors
-----------------
Green-Ampt (Green & Ampt 1911): front depth ``L(t) = F(t) / delta_theta`` with
``F - psi dtheta ln(1 + F / (psi dtheta)) = K t`` (:mod:`soilwave.infiltration`).
Priors: saturated conductivity ``K`` log-uniform on [0.01, 100] cm/h and
suction head ``psi`` log-uniform on [1, 100] cm (they span the texture classes
of Rawls, Brakensiek & Miller 1983: K 0.03-11.78 cm/h, psi 4.95-31.63 cm).

Philip (1957) two-term: ``L(t) = (S t^(1/2) + A t) / delta_theta``. Priors:
sorptivity ``S`` log-uniform on [0.01, 100] cm h^-1/2, ``A`` uniform on [0, 50] cm/h.

Texture classes
---------------
:meth:`InfiltrationFit.compare_rawls` places a Green-Ampt posterior among the
USDA texture classes of Rawls, Brakensiek & Miller (1983)
(:data:`soilwave.RAWLS_1983`): for each class whether its ``K`` and ``psi`` lie
inside the posterior 90 % intervals. A sandy-loam front (``K`` 1.09 cm/h,
``psi`` 11.01 cm) is recovered in the tests with the sandy-loam class inside and
the sand, loam and clay classes outside the ``K`` interval. Field values of a
class scatter widely about these means; treat the comparison as a plausibility
check, not a texture determination.

Sampling
--------
emcee's affine-invariant ensemble sampler (Goodman & Weare 2010;
Foreman-Mackey et al. 2013) in ``(ln K, ln psi, delta_theta)`` (or
``(ln S, A, delta_theta)``) through :func:`soilwave.sampling.run_emcee`,
started around the best point of a 41 x 41 grid over the first two
coordinates: run until the chain is at least 50 integrated autocorrelation
times long (emcee documentation), burn-in and thinning from tau, and tau,
acceptance, ESS and R-hat in :attr:`InfiltrationFit.diagnostics`.

Examples
--------
>>> import numpy as np, xarray as xr
>>> import soilwave as sw
>>> t = np.array([2.0, 4.0, 8.0, 12.0])
>>> L = sw.green_ampt_front_depth(t, saturated_conductivity=1.09, suction_head=11.01,
...                               delta_theta=0.3) / 100
>>> rng = np.random.default_rng(0)
>>> draws = L + 0.01 * rng.standard_normal((400, 4))
>>> front = xr.Dataset({"front_depth_samples": (("sample", "time"), draws),
...                     "delta_theta_samples": (("sample", "time"),
...                                             0.3 + 0.02 * rng.standard_normal((400, 4)))},
...                    coords={"time": t})
>>> fit = sw.fit_green_ampt(front, seed=1)
>>> fit.samples["saturated_conductivity"].attrs["units"]
'cm/h'
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import xarray as xr

from soilwave.errors import InputError
from soilwave.infiltration import (
    RAWLS_1983,
    green_ampt_front_depth,
    green_ampt_infiltration,
    philip_infiltration,
)
from soilwave.provenance import append_history
from soilwave.sampling import run_emcee

__all__ = ["InfiltrationFit", "fit_green_ampt", "fit_philip"]

#: Prior bounds (physical units).
K_BOUNDS_CM_H = (0.01, 100.0)
PSI_BOUNDS_CM = (1.0, 100.0)
S_BOUNDS = (0.01, 100.0)
A_BOUNDS_CM_H = (0.0, 50.0)
DTHETA_BOUNDS = (0.005, 0.7)
QUANTILES = (0.05, 0.16, 0.5, 0.84, 0.95)


# --- result ------------------------------------------------------------------------------


@dataclasses.dataclass
class InfiltrationFit:
    """Posterior of an infiltration model fitted to wetting-front depths.

    Attributes
    ----------
    model : str
        ``"green-ampt"`` or ``"philip"``.
    samples : xarray.Dataset
        Posterior draws along ``sample``: Green-Ampt ``saturated_conductivity``
        (cm/h), ``suction_head`` (cm); Philip ``sorptivity`` (cm h^-1/2),
        ``transmissivity`` (cm/h); both ``delta_theta`` (1).
    data : xarray.Dataset
        The fitted data along ``time``: ``front_depth_mean``, ``front_depth_sd`` (m)
        and the ``delta_theta`` prior in the attributes.
    diagnostics : dict
        Sampler diagnostics (tau, ESS, R-hat, acceptance, converged, ...).
    """

    model: str
    samples: xr.Dataset
    data: xr.Dataset
    diagnostics: dict

    def summary(self) -> pd.DataFrame:
        """Posterior mean, sd and 5/50/95 % quantiles of each parameter, with units.

        Returns
        -------
        pandas.DataFrame
            One row per parameter.
        """
        rows = []
        for name, da in self.samples.data_vars.items():
            v = np.asarray(da.values, float)
            q = np.quantile(v, [0.05, 0.5, 0.95])
            rows.append(
                {
                    "parameter": name,
                    "units": da.attrs.get("units", ""),
                    "mean": float(v.mean()),
                    "sd": float(v.std(ddof=1)),
                    "q05": float(q[0]),
                    "median": float(q[1]),
                    "q95": float(q[2]),
                }
            )
        return pd.DataFrame(rows).set_index("parameter")

    def _infiltration_cm(self, t):
        s = self.samples
        t = np.asarray(t, float)[None, :]
        if self.model == "green-ampt":
            return green_ampt_infiltration(
                t,
                saturated_conductivity=s["saturated_conductivity"].values[:, None],
                suction_head=s["suction_head"].values[:, None],
                delta_theta=s["delta_theta"].values[:, None],
            )
        return philip_infiltration(
            t,
            sorptivity=s["sorptivity"].values[:, None],
            transmissivity=s["transmissivity"].values[:, None],
        )

    def predict(self, time, *, quantiles=QUANTILES) -> xr.Dataset:
        """Posterior-predictive front depth and cumulative infiltration at given times.

        Parameters
        ----------
        time : array_like
            Elapsed time since ponding, h (>= 0).
        quantiles : sequence of float
            Quantiles to return.

        Returns
        -------
        xarray.Dataset
            ``front_depth`` (m) and ``cumulative_infiltration`` (mm) over ``(time, quantile)``.
        """
        t = np.atleast_1d(np.asarray(time, float))
        F = self._infiltration_cm(t)
        L = F / self.samples["delta_theta"].values[:, None] / 100.0
        q = np.asarray(quantiles, float)
        return xr.Dataset(
            {
                "front_depth": (
                    ("quantile", "time"),
                    np.quantile(L, q, axis=0),
                    {"units": "m", "long_name": f"{self.model} wetting-front depth"},
                ),
                "cumulative_infiltration": (
                    ("quantile", "time"),
                    np.quantile(F * 10.0, q, axis=0),
                    {"units": "mm", "long_name": f"{self.model} cumulative infiltration"},
                ),
            },
            coords={"time": ("time", t, {"units": "h"}), "quantile": q},
        ).transpose("time", "quantile")

    def compare_rawls(self) -> pd.DataFrame:
        """Place the Green-Ampt posterior among the texture classes of Rawls et al. (1983).

        Returns
        -------
        pandas.DataFrame
            Per class: its ``saturated_conductivity`` (cm/h) and ``suction_head``
            (cm), whether each lies inside the posterior 90 % interval, and the
            ``log10`` ratio of the class conductivity to the posterior median.
        """
        if self.model != "green-ampt":
            msg = f"compare_rawls needs a Green-Ampt fit; this fit is {self.model!r}"
            raise InputError(msg)
        k = self.samples["saturated_conductivity"].values
        psi = self.samples["suction_head"].values
        k_lo, k_med, k_hi = np.quantile(k, [0.05, 0.5, 0.95])
        p_lo, p_hi = np.quantile(psi, [0.05, 0.95])
        rows = []
        for name, rec in RAWLS_1983.items():
            kc, pc = rec["saturated_conductivity"], rec["suction_head"]
            rows.append(
                {
                    "texture_class": name,
                    "saturated_conductivity": kc,
                    "suction_head": pc,
                    "conductivity_in_90": bool(k_lo <= kc <= k_hi),
                    "suction_head_in_90": bool(p_lo <= pc <= p_hi),
                    "log10_conductivity_ratio": float(np.log10(kc / k_med)),
                    "source": rec["source"],
                }
            )
        return pd.DataFrame(rows).set_index("texture_class")


# --- data extraction ---------------------------------------------------------------------


def _front_data(front, *, model_error):
    if not isinstance(front, xr.Dataset):
        msg = f"front must be an xarray.Dataset from track_front; got {type(front).__name__}"
        raise InputError(msg)
    if "time" not in front.coords and "time" not in front.dims:
        msg = "front dataset has no 'time' coordinate (elapsed hours since ponding)"
        raise InputError(msg)
    t = np.asarray(front["time"].values, float)
    use = t > 0
    if "pre_wetting" in front:
        use &= ~np.asarray(front["pre_wetting"].values, bool)
    if "front_depth_samples" in front:
        d = front["front_depth_samples"].transpose("sample", "time").values
        mean, sd = d.mean(axis=0), d.std(axis=0, ddof=1)
    elif "front_depth" in front and "quantile" in front["front_depth"].dims:
        fd = front["front_depth"]
        mean = fd.sel(quantile=0.5).values
        sd = 0.5 * (fd.sel(quantile=0.84).values - fd.sel(quantile=0.16).values)
    else:
        msg = (
            "front dataset needs 'front_depth_samples' (sample, time) or 'front_depth' "
            "(time, quantile with 0.16, 0.5, 0.84), in m"
        )
        raise InputError(msg)
    use &= np.isfinite(mean) & np.isfinite(sd) & (mean > 0)
    if use.sum() < 2:
        msg = (
            f"need at least 2 surveys after wetting with a front depth; got {int(use.sum())} "
            f"(times {t.tolist()} h)"
        )
        raise InputError(msg)
    sd_tot = np.sqrt(np.maximum(sd, 1e-6) ** 2 + float(model_error) ** 2)
    return t[use], mean[use], sd_tot[use], use


def _delta_theta_prior(front, use, delta_theta):
    if delta_theta is not None:
        if np.ndim(delta_theta) == 0:
            m, s = float(delta_theta), 0.0
        else:
            m, s = (float(v) for v in delta_theta)
        source = "given"
    elif "delta_theta_samples" in front:
        d = front["delta_theta_samples"].transpose("sample", "time").values[:, use]
        per_draw = d.mean(axis=1)
        m, s = float(per_draw.mean()), float(per_draw.std(ddof=1))
        source = "front posterior (per-draw mean over wet surveys)"
    elif "delta_theta" in front and "quantile" in front["delta_theta"].dims:
        q = front["delta_theta"].isel(time=np.flatnonzero(use))
        m = float(q.sel(quantile=0.5).mean())
        s = float(0.5 * (q.sel(quantile=0.84) - q.sel(quantile=0.16)).mean())
        source = "front posterior quantiles"
    else:
        msg = "no water-content jump: front has no 'delta_theta'; pass delta_theta=(mean, sd)"
        raise InputError(msg)
    lo, hi = DTHETA_BOUNDS
    if not (lo < m < hi) or not s >= 0 or not math.isfinite(s):
        msg = f"delta_theta prior mean {m!r} (sd {s!r}) is outside ({lo}, {hi}) m3/m3"
        raise InputError(msg)
    return m, s, source


# --- fitting -------------------------------------------------------------------------------


def _fit(front, model, *, seed, delta_theta, model_error, n_walkers, max_steps, progress):
    t, mean, sd, use = _front_data(front, model_error=model_error)
    dm, ds, dsource = _delta_theta_prior(front, use, delta_theta)
    fixed_dtheta = ds == 0.0
    if model == "green-ampt":
        names = ["log_saturated_conductivity", "log_suction_head", "delta_theta"]
        b1 = np.log(K_BOUNDS_CM_H)
        b2 = np.log(PSI_BOUNDS_CM)
    else:
        names = ["log_sorptivity", "transmissivity", "delta_theta"]
        b1 = np.log(S_BOUNDS)
        b2 = np.asarray(A_BOUNDS_CM_H)
    lo_d, hi_d = DTHETA_BOUNDS

    def predict_cm(x):
        a, b, d = x[:, 0:1], x[:, 1:2], x[:, 2:3]
        if model == "green-ampt":
            return green_ampt_front_depth(
                t[None, :], saturated_conductivity=np.exp(a), suction_head=np.exp(b), delta_theta=d
            )
        return (np.exp(a) * np.sqrt(t[None, :]) + b * t[None, :]) / d

    def log_prob(x):
        x = np.atleast_2d(x)
        if fixed_dtheta:
            x = np.concatenate([x[:, :2], np.full((x.shape[0], 1), dm)], axis=1)
        ok = (
            (x[:, 0] >= b1[0])
            & (x[:, 0] <= b1[1])
            & (x[:, 1] >= b2[0])
            & (x[:, 1] <= b2[1])
            & (x[:, 2] > lo_d)
            & (x[:, 2] < hi_d)
        )
        out = np.full(x.shape[0], -np.inf)
        if not ok.any():
            return out
        xo = x[ok]
        pred_m = predict_cm(xo) / 100.0
        r = (pred_m - mean[None, :]) / sd[None, :]
        lp = -0.5 * np.sum(r * r, axis=1)
        if not fixed_dtheta:
            lp = lp - 0.5 * ((xo[:, 2] - dm) / ds) ** 2
        out[ok] = lp
        return out

    # start: a coarse grid search over the first two parameters
    g1 = np.linspace(b1[0], b1[1], 41)
    g2 = np.linspace(b2[0], b2[1], 41)
    G1, G2 = np.meshgrid(g1, g2, indexing="ij")
    grid = np.stack([G1.ravel(), G2.ravel(), np.full(G1.size, dm)], axis=1)
    best = grid[int(np.argmax(log_prob(grid if not fixed_dtheta else grid[:, :2])))]
    x0 = best if not fixed_dtheta else best[:2]
    scale = np.array([0.05, 0.05 * (b2[1] - b2[0]) / 5.0, max(ds, 1e-3) * 0.2])
    if fixed_dtheta:
        names = names[:2]
        scale = scale[:2]
    run = run_emcee(
        log_prob,
        x0,
        np.diag(scale**2),
        names=names,
        seed=seed,
        n_walkers=n_walkers,
        max_steps=max_steps,
        progress=progress,
    )
    samples, diag = run.samples, run.diagnostics
    if fixed_dtheta:
        samples = np.concatenate([samples, np.full((samples.shape[0], 1), dm)], axis=1)
    n = samples.shape[0]
    if model == "green-ampt":
        data_vars = {
            "saturated_conductivity": (
                "sample",
                np.exp(samples[:, 0]),
                {"units": "cm/h", "long_name": "saturated hydraulic conductivity (Green-Ampt)"},
            ),
            "suction_head": (
                "sample",
                np.exp(samples[:, 1]),
                {"units": "cm", "long_name": "wetting-front suction head (Green-Ampt)"},
            ),
        }
        priors = (
            f"saturated_conductivity log-uniform {K_BOUNDS_CM_H} cm/h; "
            f"suction_head log-uniform {PSI_BOUNDS_CM} cm"
        )
    else:
        data_vars = {
            "sorptivity": (
                "sample",
                np.exp(samples[:, 0]),
                {"units": "cm h-1/2", "long_name": "sorptivity (Philip two-term)"},
            ),
            "transmissivity": (
                "sample",
                samples[:, 1],
                {"units": "cm/h", "long_name": "second Philip coefficient A"},
            ),
        }
        priors = f"sorptivity log-uniform {S_BOUNDS} cm h-1/2; A uniform {A_BOUNDS_CM_H} cm/h"
    data_vars["delta_theta"] = (
        "sample",
        samples[:, 2],
        {"units": "1", "long_name": "water-content jump across the front"},
    )
    prior_text = (
        f"{priors}; delta_theta normal(mean {dm:.4f}, sd {ds:.4f}) truncated to "
        f"{DTHETA_BOUNDS} ({dsource})"
    )
    step = "fit_green_ampt" if model == "green-ampt" else "fit_philip"
    history = append_history(front.attrs, step, seed=seed)["history"]
    samples_ds = xr.Dataset(
        data_vars,
        coords={"sample": np.arange(n)},
        attrs={"model": model, "priors": prior_text, "history": history},
    )
    data = xr.Dataset(
        {
            "front_depth_mean": ("time", mean, {"units": "m"}),
            "front_depth_sd": ("time", sd, {"units": "m"}),
        },
        coords={"time": ("time", t, {"units": "h"})},
        attrs={
            "delta_theta_prior_mean": dm,
            "delta_theta_prior_sd": ds,
            "delta_theta_prior_source": dsource,
            "model_error_m": float(model_error),
        },
    )
    return InfiltrationFit(model=model, samples=samples_ds, data=data, diagnostics=diag)


def fit_green_ampt(
    front,
    *,
    seed=None,
    delta_theta=None,
    model_error=0.0,
    n_walkers=32,
    max_steps=20000,
    progress=False,
) -> InfiltrationFit:
    """Fit Green-Ampt ``K`` and ``psi`` to wetting-front depths over time with emcee.

    Parameters
    ----------
    front : xarray.Dataset
        From :func:`soilwave.track_front` (see the module documentation for the
        variables used). ``time`` must count hours from the start of ponding.
    seed : int, optional
        Seed of every random number of the fit.
    delta_theta : float or (float, float), optional
        Override the water-content jump: a fixed value, or ``(mean, sd)`` of a
        normal prior. Default: from the front posterior.
    model_error : float, optional
        Extra standard deviation, m, added to each survey's front-depth spread.
    n_walkers : int
        emcee walkers (default 32).
    max_steps : int
        Step cap (default 20000).
    progress : bool
        Show a progress bar.

    Returns
    -------
    InfiltrationFit
        ``.samples`` holds ``saturated_conductivity`` (cm/h), ``suction_head``
        (cm) and ``delta_theta``; ``.summary()``, ``.predict()``, ``.compare_rawls()``.

    Raises
    ------
    InputError
        Fewer than two wet surveys, or a missing front-depth or jump variable.

    Examples
    --------
    See the module docstring.
    """
    return _fit(
        front,
        "green-ampt",
        seed=seed,
        delta_theta=delta_theta,
        model_error=model_error,
        n_walkers=n_walkers,
        max_steps=max_steps,
        progress=progress,
    )


def fit_philip(
    front,
    *,
    seed=None,
    delta_theta=None,
    model_error=0.0,
    n_walkers=32,
    max_steps=20000,
    progress=False,
) -> InfiltrationFit:
    """Fit Philip's two-term ``S`` and ``A`` to wetting-front depths over time with emcee.

    Front depth ``L = (S t^(1/2) + A t) / delta_theta``.

    Parameters
    ----------
    front : xarray.Dataset
        As for :func:`fit_green_ampt`.
    seed, delta_theta, model_error, n_walkers, max_steps, progress
        As for :func:`fit_green_ampt`.

    Returns
    -------
    InfiltrationFit
        ``.samples`` holds ``sorptivity`` (cm h^-1/2), ``transmissivity`` (cm/h)
        and ``delta_theta``.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> import soilwave as sw
    >>> t = np.array([1.0, 2.0, 4.0, 8.0])
    >>> L = sw.philip_infiltration(t, sorptivity=3.0, transmissivity=0.5) / 0.3 / 100
    >>> front = xr.Dataset({"front_depth_samples": (("sample", "time"),
    ...     L + 0.005 * np.random.default_rng(0).standard_normal((300, 4)))},
    ...     coords={"time": t})
    >>> fit = sw.fit_philip(front, seed=2, delta_theta=0.3)
    >>> 2.0 < float(fit.samples["sorptivity"].median()) < 4.0
    True
    """
    return _fit(
        front,
        "philip",
        seed=seed,
        delta_theta=delta_theta,
        model_error=model_error,
        n_walkers=n_walkers,
        max_steps=max_steps,
        progress=progress,
    )
