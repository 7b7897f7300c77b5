"""Shared parts of the notebook tools: the figure pane, the tool base class, gather drawing.

Internal module of :mod:`soilwave.widgets` (import the tools from there).

A :class:`FigurePane` holds one matplotlib figure and the ipywidgets element
that shows it:

* **clickable** (``interactive=True``): the figure lives on an ipympl canvas,
  itself a widget; mouse clicks reach matplotlib's event callbacks. Needs the
  optional ``notebook`` extra (``pip install "soilwave[notebook]"``).
* **static** (``interactive=False``): the figure is rendered with the Agg
  backend into a PNG shown in an :class:`ipywidgets.Image`; every change of a
  control re-renders it. Works everywhere, including exported notebooks.

``interactive=None`` (the default of every tool) picks the clickable pane when
matplotlib's backend is ipympl (after ``%matplotlib widget`` or
``%matplotlib ipympl``) and the static pane otherwise.

Figures are built with :class:`matplotlib.figure.Figure`, not pyplot, so a
tool never touches pyplot's list of open figures and never shows a stray copy
of its figure in the notebook.
"""

from __future__ import annotations

import functools
import html
import io
import itertools
import warnings

import ipywidgets as widgets
import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from soilwave.errors import InputError, SoilwaveError

__all__ = ["FigurePane", "draw_gather", "interactive_backend_active"]

#: Colours of pick phases and predicted-curve phases (shared by every tool).
PHASE_COLOURS = {
    "air": "0.55",
    "ground": "tab:green",
    "reflection": "tab:blue",
    "refraction": "tab:blue",
    "diffraction": "tab:olive",
}
#: Colours of reflections / refractions from interfaces 1, 2, 3, ... (cycled).
INTERFACE_COLOURS = ("tab:blue", "tab:red", "tab:purple", "tab:brown", "tab:cyan")

_IPYMPL_BACKENDS = ("ipympl", "widget", "module://ipympl.backend_nbagg")
_figure_numbers = itertools.count(1)


def interactive_backend_active() -> bool:
    """True when matplotlib's backend is ipympl (``%matplotlib widget``).

    Examples
    --------
    >>> isinstance(interactive_backend_active(), bool)
    True
    """
    try:
        backend = matplotlib.get_backend(auto_select=False)
    except TypeError:  # pragma: no cover - matplotlib < 3.10
        backend = matplotlib.rcParams["backend"]
    return str(backend or "").lower() in _IPYMPL_BACKENDS


def _resolve_interactive(interactive) -> bool:
    if interactive is None:
        return interactive_backend_active()
    if not isinstance(interactive, bool):
        msg = f"interactive must be True, False or None (automatic); got {interactive!r}"
        raise InputError(msg)
    return interactive


class FigurePane:
    """One matplotlib figure and the widget that shows it (clickable or static PNG).

    Parameters
    ----------
    figsize : tuple of float
        Figure size, inches.
    interactive : bool or None
        Clickable ipympl canvas (True), static PNG (False) or automatic (None).
    dpi : float
        Resolution of the static PNG, dots per inch.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
        The figure; draw on it, then call :meth:`refresh`.
    widget : ipywidgets.DOMWidget
        The ipympl canvas or an :class:`ipywidgets.Image`.
    interactive : bool
        Whether the pane is clickable.
    n_renders : int
        How many times :meth:`refresh` has run (a figure update counter).

    Examples
    --------
    >>> pane = FigurePane(figsize=(3, 2), interactive=False)
    >>> _ = pane.figure.add_subplot().plot([0, 1], [0, 1])
    >>> pane.refresh()
    >>> pane.widget.value[:4] == b"\\x89PNG", pane.n_renders
    (True, 1)
    """

    def __init__(self, *, figsize=(7.0, 5.0), interactive=None, dpi=100.0):
        self.interactive = _resolve_interactive(interactive)
        self.dpi = float(dpi)
        self.n_renders = 0
        fig = Figure(figsize=figsize, dpi=self.dpi, layout="constrained")
        if self.interactive:
            try:
                from ipympl.backend_nbagg import Canvas, FigureManager
            except ImportError:
                msg = (
                    "interactive=True needs ipympl, the optional 'notebook' extra: "
                    "pip install 'soilwave[notebook]' (or pass interactive=False for "
                    "static figures)"
                )
                raise InputError(msg) from None
            canvas = Canvas(fig)
            with warnings.catch_warnings():
                # ipympl's toolbar passes matplotlib arguments on to traitlets, which
                # warns about them; nothing a soilwave user can act on
                warnings.simplefilter("ignore", DeprecationWarning)
                FigureManager(canvas, next(_figure_numbers))
            canvas.header_visible = False
            canvas.footer_visible = False
            canvas.toolbar_position = "left"
            self.widget = canvas
        else:
            FigureCanvasAgg(fig)
            width_px = round(figsize[0] * self.dpi)
            self.widget = widgets.Image(
                format="png", layout=widgets.Layout(width=f"{width_px}px", height="auto")
            )
        self.figure = fig

    @property
    def canvas(self):
        """The figure's canvas (matplotlib events are connected here)."""
        return self.figure.canvas

    def refresh(self) -> None:
        """Show the figure's current state: redraw the canvas or re-render the PNG."""
        self.n_renders += 1
        if self.interactive:
            self.figure.canvas.draw_idle()
            return
        buf = io.BytesIO()
        self.figure.savefig(buf, format="png", dpi=self.dpi)
        self.widget.value = buf.getvalue()


# --- tool base ---------------------------------------------------------------------


def guarded(method):
    """Decorator for widget and mouse callbacks: show errors in the status line.

    ipywidgets and matplotlib callbacks have no caller to raise to, so an
    exception there would vanish into a log; instead it is written to the
    tool's status line and kept in ``tool.last_error``.
    """

    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        try:
            return method(self, *args, **kwargs)
        except Exception as exc:
            self._show_error(exc)
            return None

    return wrapper


class Tool:
    """Base of the notebook tools: a ``widget`` container, a status line, notebook display.

    Subclasses build ``self.widget`` (an ipywidgets container) and call
    :meth:`_init_status` before using the status line.
    """

    widget: widgets.Widget

    def _init_status(self) -> None:
        self.status = widgets.HTML(value="")
        self.last_error: str | None = None

    def _show_error(self, exc) -> None:
        kind = "" if isinstance(exc, SoilwaveError | OSError) else f"{type(exc).__name__}: "
        text = f"{kind}{exc}"
        self.last_error = text
        self.status.value = (
            f'<span style="color:#b00020"><b>not done:</b> {html.escape(text)}</span>'
        )

    def _show_message(self, text: str) -> None:
        self.last_error = None
        self.status.value = f"<span>{html.escape(text)}</span>"

    def _repr_mimebundle_(self, **kwargs):
        return self.widget._repr_mimebundle_(**kwargs)

    def _ipython_display_(self, **kwargs):
        from IPython.display import display

        display(self.widget)


# --- gather drawing ----------------------------------------------------------------


def _edges(centres: np.ndarray) -> np.ndarray:
    """Cell edges around strictly increasing centres (half-way points, extended at the ends)."""
    c = np.asarray(centres, dtype=float)
    if c.size == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[2 * c[0] - mid[0]], mid, [2 * c[-1] - mid[-1]]])


def clip_level(values, percentile: float) -> float:
    """Amplitude at the given percentile of ``|values|`` (1 if the data are all zero)."""
    a = np.abs(np.asarray(values, dtype=float))
    level = float(np.percentile(a, percentile)) if a.size else 0.0
    if not level > 0:
        level = float(a.max()) if a.size and a.max() > 0 else 1.0
    return level


def draw_gather(ax, gather, *, style="image", clip_percentile=99.0, cmap="gray"):
    """Draw a gather on ``ax``: greyscale image or wiggle traces, time increasing down.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Axes to draw on (cleared first).
    gather : xarray.DataArray
        Gather with dims (offset, time) or (position, time).
    style : {"image", "wiggle"}
        Image of amplitudes, or one line per trace with positive lobes filled.
    clip_percentile : float
        Amplitudes beyond this percentile of ``|amplitude|`` are clipped
        (0 < p <= 100).
    cmap : str
        Colour map of the image.

    Returns
    -------
    float
        The clip level used (amplitude units of the gather).
    """
    if style not in ("image", "wiggle"):
        msg = f"display style must be 'image' or 'wiggle'; got {style!r}"
        raise InputError(msg)
    p = float(clip_percentile)
    if not 0 < p <= 100:
        msg = f"clip percentile must be in (0, 100]; got {clip_percentile!r}"
        raise InputError(msg)
    dim = str(gather.dims[0])
    x = np.asarray(gather[dim].values, dtype=float)
    t = np.asarray(gather["time"].values, dtype=float)
    data = np.asarray(gather.values, dtype=float)
    level = clip_level(data, p)
    ax.clear()
    if style == "image":
        xe, te = _edges(x), _edges(t)
        if x.size < 2 or np.allclose(np.diff(x), x[1] - x[0], rtol=1e-6, atol=0.0):
            ax.imshow(
                data.T,
                cmap=cmap,
                vmin=-level,
                vmax=level,
                aspect="auto",
                interpolation="nearest",
                extent=(xe[0], xe[-1], te[-1], te[0]),
            )
        else:  # uneven trace spacing: one cell per trace
            ax.pcolormesh(
                xe, te, data.T, cmap=cmap, vmin=-level, vmax=level, shading="flat", rasterized=True
            )
    else:
        spacing = float(np.min(np.diff(x))) if x.size > 1 else 1.0
        scale = 0.5 * spacing / level
        for xi, trace in zip(x, data, strict=True):
            w = np.clip(trace, -level, level) * scale
            ax.plot(xi + w, t, color="k", lw=0.5)
            ax.fill_betweenx(t, xi, xi + w, where=w > 0, color="k", lw=0, interpolate=True)
        pad = 0.6 * spacing
        ax.set_xlim(x[0] - pad, x[-1] + pad)
    ax.set_ylim(t[-1], t[0])
    ax.set_xlabel(f"{dim} (m)")
    ax.set_ylabel("time (ns)")
    geometry = gather.attrs.get("geometry", "")
    freq = gather.attrs.get("frequency_mhz")
    label = f"{geometry} gather" if dim == "offset" else "fixed-offset profile"
    if freq:
        label += f", {float(freq):g} MHz"
    ax.set_title(label, fontsize="medium")
    return level


def curve_colour(phase: str, interface: int = 0) -> str:
    """Colour of a phase (and interface) shared by the tools' curves and picks.

    Reflections and refractions take the colour of their interface (tools draw
    refractions dashed and mark their picks differently).
    """
    if phase in ("reflection", "refraction") and interface >= 1:
        return INTERFACE_COLOURS[(interface - 1) % len(INTERFACE_COLOURS)]
    return PHASE_COLOURS.get(phase, "k")
