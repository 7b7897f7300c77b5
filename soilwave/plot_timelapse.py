"""Figures of repeat surveys: wetting front over time, water content over position and time.

matplotlib only; every function draws on given axes (or new ones) and returns
the Figure, like the other ``soilwave.plot_*`` modules.

Examples
--------
>>> import matplotlib
>>> matplotlib.use("Agg")
>>> import numpy as np, xarray as xr
>>> from soilwave.plot_timelapse import plot_front
>>> q = np.array([0.05, 0.16, 0.5, 0.84, 0.95])
>>> d = np.array([[0, 0, 0, 0, 0], [0.15, 0.17, 0.18, 0.19, 0.21]])
>>> front = xr.Dataset({"front_depth": (("time", "quantile"), d, {"units": "m"})},
...                    coords={"time": [0.0, 2.0], "quantile": q})
>>> fig = plot_front(front)
>>> fig.axes[0].get_ylabel()
'front depth (m)'
"""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np

from soilwave.errors import InputError

__all__ = ["plot_front", "plot_storage", "plot_water_content_section"]


def _band(da, lo, hi):
    return da.sel(quantile=lo).values, da.sel(quantile=hi).values


def plot_front(front, *, fit=None, ax=None, bands=((0.05, 0.95), (0.16, 0.84)), n_curve=200):
    """Wetting-front depth against time with credible bands and a fitted infiltration curve.

    Parameters
    ----------
    front : xarray.Dataset
        From :func:`soilwave.track_front` (``front_depth`` over ``time``, ``quantile``).
    fit : soilwave.InfiltrationFit, optional
        Adds the fitted model's median front depth and its 90 % band.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on; new ones by default.
    bands : sequence of (float, float)
        Quantile pairs drawn as error bars (outer first).
    n_curve : int
        Points of the fitted curve.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if "front_depth" not in front:
        msg = "front dataset has no 'front_depth' (from soilwave.track_front)"
        raise InputError(msg)
    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4))
    fd = front["front_depth"]
    t = front["time"].values
    med = fd.sel(quantile=0.5).values
    widths = (1.0, 2.5)
    for k, (lo, hi) in enumerate(bands):
        a, b = _band(fd, lo, hi)
        ax.errorbar(
            t,
            med,
            yerr=[med - a, b - med],
            fmt="none",
            ecolor="C0",
            elinewidth=widths[min(k, 1)],
            capsize=3 if k == 0 else 0,
            alpha=0.6 if k == 0 else 0.9,
            label=f"{round((hi - lo) * 100)} % credible interval",
        )
    ax.plot(t, med, "o", color="C0", label="posterior median (track_front)")
    if fit is not None:
        tt = np.linspace(0.0, max(float(np.max(t)), 1e-3) * 1.1, n_curve)
        pred = fit.predict(tt)["front_depth"]
        ax.fill_between(
            tt,
            pred.sel(quantile=0.05).values,
            pred.sel(quantile=0.95).values,
            color="C1",
            alpha=0.25,
            label=f"{fit.model} fit, 90 % band",
        )
        ax.plot(tt, pred.sel(quantile=0.5).values, color="C1", label=f"{fit.model} fit, median")
    ax.set_xlabel("time since wetting began (h)")
    ax.set_ylabel("front depth (m)")
    ax.invert_yaxis()
    ax.legend(loc="best", fontsize="small")
    ax.set_title("wetting front")
    return ax.figure


def plot_storage(front, *, ax=None):
    """Storage change against time with its 90 % band, and applied water if known.

    Parameters
    ----------
    front : xarray.Dataset
        From :func:`soilwave.track_front`.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if "storage_change" not in front:
        msg = "front dataset has no 'storage_change' (from soilwave.track_front)"
        raise InputError(msg)
    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4))
    ds = front["storage_change"]
    t = front["time"].values
    a, b = _band(ds, 0.05, 0.95)
    ax.fill_between(t, a, b, color="C2", alpha=0.3, label="storage change, 90 % interval")
    ax.plot(t, ds.sel(quantile=0.5).values, "o-", color="C2", label="storage change, median")
    if "applied_water" in front:
        ax.plot(t, front["applied_water"].values, "s--", color="k", label="applied water")
    ax.set_xlabel("time since wetting began (h)")
    ax.set_ylabel("water (mm)")
    ax.legend(loc="best", fontsize="small")
    ax.set_title("storage change")
    return ax.figure


def plot_water_content_section(wc, *, uncertainty="interval", axes=None, cmap="viridis_r"):
    """Water content over position and time as an image, with an uncertainty panel.

    Parameters
    ----------
    wc : xarray.Dataset
        From :func:`soilwave.groundwave_water_content` (``water_content`` over
        ``position``, ``time``, ``quantile``; a single line without ``time`` is
        drawn as a one-row image).
    uncertainty : {"interval", "sd"}
        Right panel: width of the 90 % credible interval, or posterior sd.
    axes : pair of matplotlib.axes.Axes, optional
        Axes for the two panels.
    cmap : str
        Colour map of the water-content panel.

    Returns
    -------
    matplotlib.figure.Figure
        Axes 0: water content; axes 1: uncertainty (colour bars follow).
    """
    if "water_content" not in wc:
        msg = "dataset has no 'water_content' (from soilwave.groundwave_water_content)"
        raise InputError(msg)
    if uncertainty not in ("interval", "sd"):
        msg = f"uncertainty must be 'interval' or 'sd'; got {uncertainty!r}"
        raise InputError(msg)
    w = wc["water_content"]
    if "time" not in w.dims:
        w = w.expand_dims(time=[0.0])
    w = w.transpose("time", "position", "quantile")
    med = w.sel(quantile=0.5).values
    if uncertainty == "interval":
        unc = w.sel(quantile=0.95).values - w.sel(quantile=0.05).values
        ulabel = "90 % interval width (m3/m3)"
    else:
        sd = wc["water_content_sd"]
        sd = sd if "time" in sd.dims else sd.expand_dims(time=[0.0])
        unc = sd.transpose("time", "position").values
        ulabel = "posterior sd (m3/m3)"
    pos = w["position"].values
    tim = w["time"].values
    if axes is None:
        fig, axes = plt.subplots(1, 2, figsize=(10, 4), sharey=True, constrained_layout=True)
    else:
        fig = axes[0].figure
    ax0, ax1 = axes

    def edges(v):
        v = np.asarray(v, float)
        if v.size == 1:
            return np.array([v[0] - 0.5, v[0] + 0.5])
        mid = 0.5 * (v[1:] + v[:-1])
        return np.concatenate([[v[0] - (mid[0] - v[0])], mid, [v[-1] + (v[-1] - mid[-1])]])

    xe, ye = edges(pos), edges(tim)
    m0 = ax0.pcolormesh(xe, ye, np.ma.masked_invalid(med), cmap=cmap, shading="flat")
    fig.colorbar(m0, ax=ax0, label="water content, median (m3/m3)")
    m1 = ax1.pcolormesh(xe, ye, np.ma.masked_invalid(unc), cmap="magma_r", shading="flat")
    fig.colorbar(m1, ax=ax1, label=ulabel)
    if "separable" in wc:
        sep = wc["separable"]
        sep = sep if "time" in sep.dims else sep.expand_dims(time=[0.0])
        bad = ~sep.transpose("time", "position").values.astype(bool)
        ti, pi = np.nonzero(bad & np.isfinite(med))
        for ax in axes:
            ax.plot(pos[pi], tim[ti], "x", color="red", ms=5, label="waves not separable")
        if ti.size:
            ax0.legend(loc="upper right", fontsize="small")
    for ax in axes:
        ax.set_xlabel("position (m)")
    ax0.set_ylabel("time (h)")
    ax0.set_title("water content")
    ax1.set_title("uncertainty")
    return ax0.figure
