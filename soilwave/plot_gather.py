"""Figures of gathers, semblance spectra and picks (matplotlib).

Layer 4 (presentation). Every function draws on a given axes or a new figure
and returns the :class:`matplotlib.figure.Figure`.

- :func:`plot_gather`: a gather as an image (time down) or as wiggle traces;
- :func:`plot_semblance`: a semblance spectrum with its picked maxima;
- :func:`plot_picks`: picks with error bars over the gather and, given an
  inversion result, travel-time curves of posterior draws through the forward
  model (:class:`soilwave.traveltime.TravelTimeOperator`).
"""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import xarray as xr

from soilwave.errors import InputError
from soilwave.gather import validate_gather
from soilwave.traveltime import TravelTimeOperator
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["plot_gather", "plot_picks", "plot_semblance"]

#: Marker colours of the pick phases.
PHASE_COLOURS = {
    "air": "tab:cyan",
    "ground": "tab:green",
    "reflection": "tab:red",
    "refraction": "tab:purple",
    "diffraction": "tab:orange",
}


def _axes(ax, figsize=(6.0, 5.0)):
    if ax is None:
        fig, ax = plt.subplots(figsize=figsize)
    else:
        fig = ax.figure
    return fig, ax


def _lateral_label(dim):
    return "offset (m)" if dim == "offset" else "position (m)"


def _edges(centres: np.ndarray) -> np.ndarray:
    """Cell edges around strictly increasing centres (half-way points, extended at the ends)."""
    c = np.asarray(centres, dtype=float)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def clip_level(values, clip: float) -> float:
    """Amplitude at quantile ``clip`` of ``|values|`` (the largest value, or 1, if that is 0)."""
    a = np.abs(np.asarray(values, dtype=float))
    level = float(np.quantile(a, clip)) if a.size else 0.0
    if not level > 0:
        level = float(a.max()) if a.size and a.max() > 0 else 1.0
    return level


def draw_gather(ax, gather, *, kind="image", clip=0.99, cmap="gray", scale=1.0):
    """Draw a gather on ``ax`` (cleared first): image or wiggles, time increasing down.

    The shared drawing routine of :func:`plot_gather` and the notebook tools.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Axes to draw on.
    gather : xarray.DataArray
        Gather with dims ``(offset, time)`` or ``(position, time)``.
    kind : {"image", "wiggle"}, optional
        Grey-scale image, or wiggle traces with positive lobes filled.
    clip : float, optional
        Amplitudes beyond this quantile of ``|amplitude|`` are clipped (0 < clip <= 1).
    cmap : str, optional
        Colour map of the image.
    scale : float, optional
        Wiggle deflection at the clip level, in half trace spacings.

    Returns
    -------
    (artist, float)
        The image (``None`` for wiggles) and the clip level (amplitude units).
    """
    validate_gather(gather)
    if kind not in ("image", "wiggle"):
        msg = f"plot_gather: kind must be 'image' or 'wiggle'; got {kind!r}"
        raise InputError(msg)
    if not 0.0 < float(clip) <= 1.0:
        msg = f"plot_gather: clip must lie in (0, 1]; got {clip!r}"
        raise InputError(msg)
    dim = str(gather.dims[0])
    x = np.asarray(gather[dim].values, dtype=float)
    t = np.asarray(gather["time"].values, dtype=float)
    data = np.asarray(gather.values, dtype=float)
    level = clip_level(data, float(clip))
    ax.clear()
    image = None
    if kind == "image":
        xe, te = _edges(x), _edges(t)
        if x.size < 2 or np.allclose(np.diff(x), x[1] - x[0], rtol=1e-6, atol=0.0):
            image = ax.imshow(
                data.T,
                cmap=cmap,
                vmin=-level,
                vmax=level,
                aspect="auto",
                interpolation="nearest",
                extent=(xe[0], xe[-1], te[-1], te[0]),
            )
        else:  # uneven trace spacing: one cell per trace
            image = ax.pcolormesh(
                xe, te, data.T, cmap=cmap, vmin=-level, vmax=level, shading="flat", rasterized=True
            )
    else:
        spacing = float(np.min(np.diff(x))) if x.size > 1 else 1.0
        factor = float(scale) * 0.5 * spacing / level
        for xi, trace in zip(x, data, strict=True):
            w = np.clip(trace, -level, level) * factor
            ax.plot(xi + w, t, color="k", lw=0.5)
            ax.fill_betweenx(t, xi, xi + w, where=w > 0, color="k", lw=0, interpolate=True)
        pad = 0.6 * spacing
        ax.set_xlim(x[0] - pad, x[-1] + pad)
    ax.set_ylim(t[-1], t[0])
    ax.set_xlabel(_lateral_label(dim))
    ax.set_ylabel("time (ns)")
    freq = gather.attrs.get("frequency_mhz")
    label = (
        f"{gather.attrs.get('geometry', '')} gather" if dim == "offset" else "fixed-offset profile"
    )
    ax.set_title(label + (f", {float(freq):g} MHz" if freq else ""), fontsize="medium")
    return image, level


def plot_gather(gather, *, kind="image", ax=None, clip=0.99, cmap="gray", scale=1.0):
    """Draw a gather as an image or as wiggle traces.

    Parameters
    ----------
    gather : xarray.DataArray
        Gather with dims ``(offset, time)`` or ``(position, time)``.
    kind : {"image", "wiggle"}, optional
        Grey-scale image (time down) or wiggle traces with positive lobes filled.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on; a new figure is made when omitted.
    clip : float, optional
        Amplitudes beyond this quantile of ``|amplitude|`` are clipped (0 < clip <= 1).
    cmap : str, optional
        Colour map of the image.
    scale : float, optional
        Wiggle deflection at the clip level, in half trace spacings.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> g = gather_from_array(np.random.default_rng(0).normal(size=(8, 50)),
    ...                       offsets=np.arange(1.0, 9.0), dt_ns=0.5, frequency_mhz=200.0)
    >>> fig = plot_gather(g, kind="wiggle")
    >>> fig.axes[0].get_ylabel()
    'time (ns)'
    """
    fig, ax = _axes(ax)
    image, _ = draw_gather(ax, gather, kind=kind, clip=clip, cmap=cmap, scale=scale)
    if image is not None:
        fig.colorbar(image, ax=ax, label=f"amplitude ({gather.attrs.get('units', '1')})")
    return fig


def plot_semblance(spectrum, picks=None, *, ax=None, cmap="viridis"):
    """Draw a semblance spectrum (velocity across, zero-offset time down).

    Parameters
    ----------
    spectrum : xarray.DataArray
        Output of :func:`soilwave.semblance`, dims ``(time, velocity)``.
    picks : xarray.Dataset, optional
        Output of :func:`soilwave.pick_semblance`; drawn with their
        half-maximum sigmas as error bars.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on.
    cmap : str, optional
        Colour map.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> s = xr.DataArray(np.random.default_rng(0).uniform(size=(40, 30)),
    ...                  dims=("time", "velocity"),
    ...                  coords={"time": np.arange(40.0), "velocity": np.linspace(0.05, 0.2, 30)})
    >>> fig = plot_semblance(s)
    >>> fig.axes[0].get_xlabel()
    'RMS velocity (m/ns)'
    """
    if not isinstance(spectrum, xr.DataArray) or set(spectrum.dims) != {"time", "velocity"}:
        msg = "plot_semblance: spectrum must be a DataArray with dims ('time', 'velocity')"
        raise InputError(msg)
    sp = spectrum.transpose("time", "velocity")
    fig, ax = _axes(ax, (5.0, 5.0))
    mesh = ax.pcolormesh(
        sp["velocity"].values,
        sp["time"].values,
        sp.values,
        cmap=cmap,
        shading="nearest",
        vmin=0.0,
        vmax=max(float(sp.max()), 1e-12),
    )
    fig.colorbar(mesh, ax=ax, label="semblance")
    if picks is not None:
        if not isinstance(picks, xr.Dataset) or "t0" not in picks or "v_rms" not in picks:
            msg = "plot_semblance: picks must be the Dataset returned by soilwave.pick_semblance"
            raise InputError(msg)
        xerr = picks["v_rms_sigma"].values if "v_rms_sigma" in picks else None
        yerr = picks["t0_sigma"].values if "t0_sigma" in picks else None
        ax.errorbar(
            picks["v_rms"].values,
            picks["t0"].values,
            xerr=xerr,
            yerr=yerr,
            fmt="o",
            color="w",
            mec="k",
            ecolor="w",
            capsize=3,
            label="maxima",
        )
        for k, (v, t0) in enumerate(
            zip(picks["v_rms"].values, picks["t0"].values, strict=False), start=1
        ):
            ax.annotate(str(k), (v, t0), textcoords="offset points", xytext=(6, -6), color="w")
    t = sp["time"].values
    ax.set_ylim(t[-1], t[0])
    ax.set_xlabel("RMS velocity (m/ns)")
    ax.set_ylabel("zero-offset two-way time (ns)")
    ax.set_title("semblance")
    return fig


def _posterior_curves(result, picks, offsets, n_curves, seed):
    """Predicted times (n_draws, n_points) and labels of posterior draws."""
    samples = getattr(result, "samples", None)
    if samples is None or "thickness" not in samples:
        msg = (
            "plot_picks: result must have .samples with 'thickness' and 'velocity' or "
            "'permittivity' over (sample, layer), like soilwave.InversionResult"
        )
        raise InputError(msg)
    if "velocity" in samples:
        vel = np.asarray(samples["velocity"].transpose("sample", "layer").values, dtype=float)
    elif "permittivity" in samples:
        eps = np.asarray(samples["permittivity"].transpose("sample", "layer").values, float)
        vel = SPEED_OF_LIGHT / np.sqrt(eps)
    else:
        msg = "plot_picks: result.samples has neither 'velocity' nor 'permittivity'"
        raise InputError(msg)
    thick = np.asarray(samples["thickness"].transpose("sample", "layer").values, dtype=float)
    n_s = vel.shape[0]
    tz = (
        np.asarray(samples["time_zero"].values, dtype=float)
        if "time_zero" in samples
        else np.zeros(n_s)
    )
    rng = np.random.default_rng(seed)
    take = rng.choice(n_s, size=min(int(n_curves), n_s), replace=False)
    phase = np.asarray(picks["phase"].values).astype(str)
    itf = np.asarray(picks["interface"].values).astype(int)
    groups = []
    if np.any(phase == "air"):
        groups.append(("air", 0))
    if np.any(phase == "ground"):
        groups.append(("ground", 0))
    n_thick = int(np.sum(np.all(np.isfinite(thick), axis=0)))
    for k in sorted(set(itf[phase == "reflection"].tolist())):
        if 1 <= k <= n_thick:
            groups.append(("reflection", k))
    if not groups:
        return []
    ph = np.concatenate([[g[0]] * offsets.size for g in groups])
    it = np.concatenate([[g[1]] * offsets.size for g in groups])
    xx = np.tile(offsets, len(groups))
    op = TravelTimeOperator(xx, ph, it)
    h = thick[take][:, :n_thick]
    v = vel[take][:, : op.n_layers]
    times = op(h, v, tz[take])
    times = np.asarray(times).reshape(take.size, len(groups), offsets.size)
    return [(g, times[:, j, :]) for j, g in enumerate(groups)]


def plot_picks(gather, picks, *, result=None, ax=None, n_curves=50, seed=0, kind="image"):
    """Draw picks with their sigmas over a gather, optionally with posterior curves.

    Parameters
    ----------
    gather : xarray.DataArray
        Multi-offset gather, dims ``(offset, time)``.
    picks : xarray.Dataset
        Pick table (:func:`soilwave.make_picks`, :func:`soilwave.auto_pick`).
    result : object, optional
        Inversion result with ``.samples`` holding ``thickness`` and ``velocity``
        (or ``permittivity``) over ``(sample, layer)`` and optionally
        ``time_zero`` over ``sample``, such as :class:`soilwave.InversionResult`.
        ``n_curves`` random draws are drawn through the forward model.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on.
    n_curves : int, optional
        Number of posterior draws drawn.
    seed : int, optional
        Seed of the choice of draws.
    kind : {"image", "wiggle"}, optional
        How the gather is drawn.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> from soilwave.picks import make_picks
    >>> g = gather_from_array(np.zeros((5, 100)), offsets=[1.0, 1.5, 2.0, 2.5, 3.0],
    ...                       dt_ns=0.5, frequency_mhz=200.0)
    >>> p = make_picks([1.0, 2.0], [10.0, 20.0], "ground", sigma=0.5)
    >>> fig = plot_picks(g, p)
    >>> len(fig.axes[0].get_legend().get_texts())
    1
    """
    validate_gather(gather)
    if gather.dims[0] != "offset":
        msg = f"plot_picks needs a multi-offset gather (dims offset, time); got {gather.dims}"
        raise InputError(msg)
    if not isinstance(picks, xr.Dataset) or "pick" not in picks.dims:
        msg = "plot_picks: picks must be a pick table (xarray.Dataset along 'pick')"
        raise InputError(msg)
    fig = plot_gather(gather, kind=kind, ax=ax)
    ax = fig.axes[0] if ax is None else ax
    phase = np.asarray(picks["phase"].values).astype(str)
    itf = np.asarray(picks["interface"].values).astype(int)
    off = np.asarray(picks["offset"].values, dtype=float)
    tt = np.asarray(picks["time"].values, dtype=float)
    sig = np.asarray(picks["sigma"].values, dtype=float)
    if result is not None:
        x = np.asarray(gather["offset"].values, dtype=float)
        xs = np.linspace(x.min(), x.max(), 60)
        for (ph, _k), times in _posterior_curves(result, picks, xs, n_curves, seed):
            colour = PHASE_COLOURS.get(ph, "k")
            for row in times:
                ax.plot(xs, row, color=colour, alpha=0.15, lw=0.8)
        ax.plot([], [], color="0.3", lw=0.8, label=f"posterior draws ({int(n_curves)})")
    for ph in dict.fromkeys(phase.tolist()):
        sel = phase == ph
        for k in sorted(set(itf[sel].tolist())):
            s = sel & (itf == k)
            label = ph if k == 0 else f"{ph} {k}"
            ax.errorbar(
                off[s],
                tt[s],
                yerr=sig[s],
                fmt=".",
                ms=4,
                capsize=0,
                color=PHASE_COLOURS.get(ph, "k"),
                label=label,
            )
    ax.legend(loc="lower left", fontsize="small")
    return fig
