"""Figures of a layered-earth inversion (matplotlib).

Import explicitly (``import soilwave`` does not load matplotlib)::

    from soilwave.plot_inversion import plot_traveltime_fit, plot_profile, plot_corner

Every function returns the :class:`matplotlib.figure.Figure` it drew on.

Examples
--------
>>> import matplotlib
>>> matplotlib.use("Agg")
>>> import numpy as np, soilwave as sw
>>> from soilwave.plot_inversion import plot_profile
>>> x = np.tile(np.linspace(0.5, 3.0, 8), 2)
>>> ph = ["ground"] * 8 + ["reflection"] * 8
>>> t = sw.TravelTimeOperator(x, ph, [0] * 8 + [1] * 8)([0.6], [0.1, 0.08], 0.0)
>>> res = sw.invert(sw.make_picks(x, t, ph, interface=[0] * 8 + [1] * 8, sigma=0.3), seed=0)
>>> len(plot_profile(res).axes)
2
"""

from __future__ import annotations

import warnings

import matplotlib.pyplot as plt
import numpy as np

from soilwave.errors import InputError, RangeWarning

__all__ = ["plot_corner", "plot_profile", "plot_traveltime_fit"]

_PHASE_COLOURS = {
    "air": "0.4",
    "ground": "tab:green",
    "reflection": "tab:blue",
    "refraction": "tab:orange",
}
_LAYERED_COLOURS = {
    "reflection": ("tab:blue", "tab:purple", "tab:red", "tab:brown"),
    "refraction": ("tab:orange", "tab:olive", "tab:pink", "tab:cyan"),
}


def _check_result(result):
    if not hasattr(result, "samples") or not hasattr(result, "summary"):
        msg = f"expected an InversionResult; got {type(result).__name__}"
        raise InputError(msg)


def plot_traveltime_fit(result, *, ax=None, n_offsets: int = 60, max_draws: int = 400):
    """Picks with error bars and the posterior-predicted travel-time bands.

    For every phase (and interface) in the picks, the median predicted time and
    the central 90 % band of the posterior predictive (without pick noise) are
    drawn over the picked offset range.

    Parameters
    ----------
    result : InversionResult
        Inversion result.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on (a new figure otherwise).
    n_offsets : int
        Offsets at which the bands are evaluated.
    max_draws : int
        Posterior draws used.

    Returns
    -------
    matplotlib.figure.Figure
    """
    _check_result(result)
    if ax is None:
        fig, ax = plt.subplots(figsize=(6.0, 4.5), layout="constrained")
    else:
        fig = ax.figure
    picks = result.picks
    phase = np.asarray(picks["phase"].values).astype(str)
    itf = np.asarray(picks["interface"].values).astype(int)
    x = np.asarray(picks["offset"].values, float)
    t = np.asarray(picks["time"].values, float)
    sig = np.asarray(picks["sigma"].values, float)
    groups = sorted(
        {
            (p, int(k) if p in ("reflection", "refraction") else 0)
            for p, k in zip(phase, itf, strict=True)
        }
    )
    for p, k in groups:
        if p not in _PHASE_COLOURS:
            continue
        sel = (phase == p) & ((itf == k) | (k == 0))
        colour = _PHASE_COLOURS[p] if k == 0 else _LAYERED_COLOURS[p][(k - 1) % 4]
        label = p if k == 0 else f"{p} {k}"
        ax.errorbar(
            x[sel], t[sel], yerr=sig[sel], fmt="o", ms=3, color=colour, label=f"{label} picks"
        )
        grid = np.linspace(x[sel].min(), x[sel].max(), n_offsets)
        pred = result.predicted_times(grid, p, k, max_draws=max_draws).values
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            lo, med, hi = np.nanquantile(pred, [0.05, 0.5, 0.95], axis=0)
        ax.fill_between(grid, lo, hi, color=colour, alpha=0.3, lw=0)
        ax.plot(grid, med, color=colour, lw=1)
    ax.set_xlabel("offset (m)")
    ax.set_ylabel("time (ns)")
    ax.invert_yaxis()
    ax.set_title("picks and posterior-predicted times (median, 90 % band)")
    ax.legend(fontsize="small")
    return fig


def plot_profile(result, model=None, *, depth=None):
    """Permittivity and water content against depth with 68 % and 90 % credible bands.

    Parameters
    ----------
    result : InversionResult
        Inversion result.
    model : soilwave.petro.PetroModel, optional
        Water-content model (default the result's).
    depth : array_like, optional
        Depth grid, m.

    Returns
    -------
    matplotlib.figure.Figure
        Two panels sharing the depth axis (down).
    """
    _check_result(result)
    s = result.summary(depth)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RangeWarning)
        w = result.water_content(model, depth=depth)
    fig, axes = plt.subplots(1, 2, figsize=(7.0, 5.0), sharey=True, layout="constrained")
    for ax, ds, name, label in (
        (axes[0], s, "permittivity", "relative permittivity (1)"),
        (axes[1], w, "water_content", "water content (m$^3$/m$^3$)"),
    ):
        z = ds["depth"].values
        q = ds[name]
        ax.fill_betweenx(
            z,
            q.sel(quantile=0.05),
            q.sel(quantile=0.95),
            color="tab:blue",
            alpha=0.2,
            lw=0,
            label="90 %",
        )
        ax.fill_betweenx(
            z,
            q.sel(quantile=0.16),
            q.sel(quantile=0.84),
            color="tab:blue",
            alpha=0.35,
            lw=0,
            label="68 %",
        )
        ax.plot(q.sel(quantile=0.5), z, color="tab:blue", lw=1.2, label="median")
        ax.set_xlabel(label)
        ax.grid(alpha=0.3)
    axes[0].set_ylabel("depth (m)")
    axes[0].invert_yaxis()
    axes[0].legend(fontsize="small")
    fig.suptitle("posterior profile (water content needs site calibration)")
    return fig


def plot_corner(result, *, variables=None, bins: int = 30, max_draws: int = 4000):
    """Corner plot: 1-D histograms on the diagonal, 2-D histograms below it.

    Parameters
    ----------
    result : InversionResult
        Inversion result.
    variables : list of str, optional
        Columns as ``"permittivity[1]"``, ``"thickness[1]"``, ``"time_zero"``,
        ``"noise_scale"``; default every layer's permittivity, every finite
        thickness, time zero and the noise scale (when it varies).
    bins : int
        Histogram bins.
    max_draws : int
        Posterior draws used.

    Returns
    -------
    matplotlib.figure.Figure
    """
    _check_result(result)
    s = result.samples
    n = s.sizes["sample"]
    take = np.unique(np.linspace(0, n - 1, min(n, max_draws)).astype(int))
    cols = {}
    for layer in s["layer"].values:
        cols[f"permittivity[{int(layer)}]"] = s["permittivity"].sel(layer=layer).values[take]
    for layer in s["layer"].values[:-1]:
        cols[f"thickness[{int(layer)}]"] = s["thickness"].sel(layer=layer).values[take]
    cols["time_zero"] = s["time_zero"].values[take]
    if np.ptp(s["noise_scale"].values) > 0:
        cols["noise_scale"] = s["noise_scale"].values[take]
    if variables is not None:
        unknown = [v for v in variables if v not in cols]
        if unknown:
            msg = f"plot_corner: unknown variable(s) {unknown}; expected some of {list(cols)}"
            raise InputError(msg)
        cols = {v: cols[v] for v in variables}
    names = list(cols)
    k = len(names)
    fig, axes = plt.subplots(k, k, figsize=(1.7 * k + 1, 1.7 * k + 1), squeeze=False)
    for i in range(k):
        for j in range(k):
            ax = axes[i, j]
            if j > i:
                ax.set_visible(False)
                continue
            xi, xj = cols[names[i]], cols[names[j]]
            if i == j:
                ax.hist(xi, bins=bins, color="tab:blue", histtype="stepfilled", alpha=0.6)
                for q in np.quantile(xi, [0.05, 0.5, 0.95]):
                    ax.axvline(q, color="k", lw=0.7, ls="--")
                ax.set_yticks([])
            else:
                ax.hist2d(xj, xi, bins=bins, cmap="Blues")
            if i == k - 1:
                ax.set_xlabel(names[j], fontsize="small")
            else:
                ax.set_xticklabels([])
            if j == 0 and i > 0:
                ax.set_ylabel(names[i], fontsize="small")
            elif j > 0:
                ax.set_yticklabels([])
            ax.tick_params(labelsize="x-small")
    fig.suptitle("posterior draws (dashed: 5 %, 50 %, 95 %)")
    return fig
