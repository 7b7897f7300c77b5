"""Gather viewer: look at a gather while switching processing steps on and off.

Internal module of :mod:`soilwave.widgets`; import from there::

    from soilwave.widgets import GatherViewer
"""

from __future__ import annotations

import contextlib
import html

import ipywidgets as widgets
import numpy as np

from soilwave import processing
from soilwave.gather import sample_interval, validate_gather
from soilwave.plot_gather import draw_gather
from soilwave.wave import SPEED_OF_LIGHT
from soilwave.widgets_figure import FigurePane, Tool, guarded

__all__ = ["GatherViewer"]

#: Choices of the gain control: (label, value).
GAIN_CHOICES = (
    ("none", "none"),
    ("AGC (running RMS)", "agc"),
    ("spreading + exponential", "spreading"),
)
#: Choices of the trace normalisation control: (label, value).
NORMALISATION_CHOICES = (("none", "none"), ("trace maximum", "max"), ("trace RMS", "rms"))

_STYLE = {"description_width": "initial"}


def _float_box(value, low, high, step, description, width="200px"):
    return widgets.BoundedFloatText(
        value=float(np.clip(value, low, high)),
        min=float(low),
        max=float(high),
        step=float(step),
        description=description,
        style=_STYLE,
        layout=widgets.Layout(width=width),
    )


class GatherViewer(Tool):
    """Interactive view of a gather with processing and display controls.

    The steps run in the usual order (see :mod:`soilwave.processing`): time
    zero from the air wave, dewow, band-pass, a gain (AGC or spreading and
    exponential compensation), mean-trace removal (fixed-offset profiles
    only) and trace normalisation. Every change of a control recomputes
    :attr:`processed` and redraws the figure.

    Parameters
    ----------
    gather : xarray.DataArray
        Gather with dims (offset, time) or (position, time) (see
        :mod:`soilwave.gather`); not modified.
    interactive : bool or None
        Clickable ipympl figure (True), static PNG (False) or automatic
        (None: clickable when the ipympl backend is active).
    figsize : tuple of float
        Figure size, inches.

    Attributes
    ----------
    widget : ipywidgets.VBox
        The whole tool; displayed when the object is the last line of a cell.
    processed : xarray.DataArray
        The gather after the selected steps; its ``history`` attr lists them.
    steps : list of str
        Names of the steps applied, in order.
    figure : matplotlib.figure.Figure
        The figure.
    time_zero, dewow, dewow_window_ns, bandpass, low_mhz, high_mhz, gain,
    agc_window_ns, gain_velocity, gain_attenuation_db, background,
    normalisation, style, clip_percentile : ipywidgets
        The controls (set ``.value`` to drive the tool from code).

    Examples
    --------
    >>> import soilwave as sw
    >>> from soilwave.synthetic import synthetic_gather
    >>> from soilwave.widgets import GatherViewer
    >>> g = synthetic_gather({"permittivity": [9.0, 16.0], "thickness": [0.6]},
    ...                      offsets=[0.5, 1.0, 1.5, 2.0], dt_ns=0.2, n_samples=300,
    ...                      frequency_mhz=250.0)
    >>> viewer = GatherViewer(g, interactive=False)
    >>> viewer.dewow.value = True
    >>> viewer.steps
    ['dewow']
    """

    def __init__(self, gather, *, interactive=None, figsize=(7.0, 5.0)):
        validate_gather(gather)
        self.gather = gather
        self._init_status()
        self._hold = 0
        freq = float(gather.attrs["frequency_mhz"])
        dt = sample_interval(gather)
        t = np.asarray(gather["time"].values, dtype=float)
        duration = float(t[-1] - t[0])
        nyquist = 500.0 / dt
        period = 1000.0 / freq
        self.trace_dim = str(gather.dims[0])

        self.time_zero = widgets.Checkbox(value=False, description="time zero from air wave")
        self.dewow = widgets.Checkbox(value=False, description="dewow")
        # common practice: dewow over 1-2 periods, AGC over a few periods,
        # band-pass from about a quarter to about twice the centre frequency
        self.dewow_window_ns = _float_box(
            2 * period, 3 * dt, duration, dt, "window (ns)", width="170px"
        )
        self.bandpass = widgets.Checkbox(value=False, description="band-pass")
        self.low_mhz = _float_box(0.25 * freq, 1e-3, 0.99 * nyquist, 5.0, "low (MHz)", "170px")
        self.high_mhz = _float_box(
            min(2.0 * freq, 0.8 * nyquist), 1e-3, 0.99 * nyquist, 5.0, "high (MHz)", "170px"
        )
        self.gain = widgets.Dropdown(
            options=GAIN_CHOICES, value="none", description="gain", style=_STYLE
        )
        self.agc_window_ns = _float_box(
            4 * period, 3 * dt, duration, dt, "AGC window (ns)", width="200px"
        )
        self.gain_velocity = _float_box(0.1, 0.01, SPEED_OF_LIGHT, 0.005, "velocity (m/ns)")
        self.gain_attenuation_db = _float_box(0.0, 0.0, 1000.0, 0.5, "attenuation (dB/m)")
        self.background = widgets.Checkbox(
            value=False,
            description="remove mean trace",
            disabled=self.trace_dim != "position",
        )
        self.normalisation = widgets.Dropdown(
            options=NORMALISATION_CHOICES, value="none", description="normalise", style=_STYLE
        )
        self.style = widgets.ToggleButtons(
            options=(("image", "image"), ("wiggle", "wiggle")),
            value="image",
            description="display",
            style={"button_width": "70px"},
        )
        self.clip_percentile = widgets.FloatSlider(
            value=99.0,
            min=50.0,
            max=100.0,
            step=0.5,
            description="clip percentile",
            style=_STYLE,
            continuous_update=False,
        )
        self.history_text = widgets.HTML(value="")

        self._pane = FigurePane(figsize=figsize, interactive=interactive)
        self.figure = self._pane.figure
        self.ax = self.figure.add_subplot()

        controls = [
            self.time_zero,
            self.dewow,
            self.dewow_window_ns,
            self.bandpass,
            self.low_mhz,
            self.high_mhz,
            self.gain,
            self.agc_window_ns,
            self.gain_velocity,
            self.gain_attenuation_db,
            self.background,
            self.normalisation,
        ]
        for c in controls:
            c.observe(self._on_processing, names="value")
        for c in (self.style, self.clip_percentile):
            c.observe(self._on_display, names="value")
        processing_box = widgets.VBox(
            [
                widgets.HTML("<b>processing</b>"),
                self.time_zero,
                widgets.HBox([self.dewow, self.dewow_window_ns]),
                widgets.HBox([self.bandpass, self.low_mhz, self.high_mhz]),
                self.gain,
                self.agc_window_ns,
                widgets.HBox([self.gain_velocity, self.gain_attenuation_db]),
                self.background,
                self.normalisation,
                widgets.HTML("<b>display</b>"),
                self.style,
                self.clip_percentile,
            ]
        )
        self.widget = widgets.VBox(
            [
                widgets.HBox([self._pane.widget, processing_box]),
                self.status,
                self.history_text,
            ]
        )
        self.processed = gather
        self.steps: list[str] = []
        self.clip_level = np.nan
        self._sync_enabled()
        self._process()
        self._draw()

    # --- public -----------------------------------------------------------------------

    @contextlib.contextmanager
    def hold_updates(self):
        """Change several controls at once; recompute and redraw once at the end.

        Use as ``with viewer.hold_updates(): viewer.dewow.value = True; ...``.
        """
        self._hold += 1
        try:
            yield self
        finally:
            self._hold -= 1
            if self._hold == 0:
                self._sync_enabled()
                self._update_all()

    @property
    def n_renders(self) -> int:
        """How many times the figure has been redrawn."""
        return self._pane.n_renders

    # --- internals -----------------------------------------------------------------------

    def _sync_enabled(self) -> None:
        self.dewow_window_ns.disabled = not self.dewow.value
        self.low_mhz.disabled = self.high_mhz.disabled = not self.bandpass.value
        self.agc_window_ns.disabled = self.gain.value != "agc"
        spreading = self.gain.value != "spreading"
        self.gain_velocity.disabled = self.gain_attenuation_db.disabled = spreading

    @guarded
    def _update_all(self) -> None:
        self._process()
        self._draw()

    def _on_processing(self, change) -> None:
        if self._hold:
            return
        self._sync_enabled()
        self._update_all()

    @guarded
    def _on_display(self, change) -> None:
        if self._hold:
            return
        self._draw()

    def _pipeline(self):
        """(step name, function, kwargs) of the selected steps, in processing order."""
        steps = []
        if self.time_zero.value:
            steps.append(("time_zero_correction", processing.time_zero_correction, {}))
        if self.dewow.value:
            steps.append(("dewow", processing.dewow, {"window_ns": self.dewow_window_ns.value}))
        if self.bandpass.value:
            steps.append(
                (
                    "bandpass",
                    processing.bandpass,
                    {"low_mhz": self.low_mhz.value, "high_mhz": self.high_mhz.value},
                )
            )
        if self.gain.value == "agc":
            steps.append(("agc", processing.agc, {"window_ns": self.agc_window_ns.value}))
        elif self.gain.value == "spreading":
            steps.append(
                (
                    "gain_spreading_exponential",
                    processing.gain_spreading_exponential,
                    {
                        "velocity": self.gain_velocity.value,
                        "attenuation_db_per_m": self.gain_attenuation_db.value,
                    },
                )
            )
        if self.background.value and self.trace_dim == "position":
            steps.append(("remove_background", processing.remove_background, {}))
        if self.normalisation.value != "none":
            steps.append(
                (
                    "normalize_traces",
                    processing.normalize_traces,
                    {"method": self.normalisation.value},
                )
            )
        return steps

    def _process(self) -> None:
        out = self.gather
        names = []
        for name, func, kwargs in self._pipeline():
            out = func(out, **kwargs)
            names.append(name)
        # only a complete run replaces the state (a failing step leaves the last good one)
        self.processed = out
        self.steps = names
        self._show_message("steps: " + (", ".join(names) if names else "none (recorded gather)"))
        lines = [ln for ln in (out.attrs.get("history") or "").splitlines() if ln.strip()]
        shown = "<br>".join(html.escape(ln) for ln in lines[-8:])
        self.history_text.value = (
            f"<details><summary>history ({len(lines)} lines)</summary>"
            f"<code style='font-size:smaller'>{shown}</code></details>"
        )

    def _draw(self) -> None:
        _, self.clip_level = draw_gather(
            self.ax,
            self.processed,
            kind=self.style.value,
            clip=self.clip_percentile.value / 100.0,
        )
        self._pane.refresh()
