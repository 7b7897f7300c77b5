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
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from soilwave.errors import InputError, SoilwaveError

__all__ = ["FigurePane", "interactive_backend_active"]

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


def curve_colour(phase: str, interface: int = 0) -> str:
    """Colour of a phase (and interface) shared by the tools' curves and picks.

    Reflections and refractions take the colour of their interface (tools draw
    refractions dashed and mark their picks differently).
    """
    if phase in ("reflection", "refraction") and interface >= 1:
        return INTERFACE_COLOURS[(interface - 1) % len(INTERFACE_COLOURS)]
    return PHASE_COLOURS.get(phase, "k")
