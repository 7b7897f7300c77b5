"""Pick editor: add, move and delete travel-time picks on a gather, then save them.

Internal module of :mod:`soilwave.widgets`; import from there::

    from soilwave.widgets import PickEditor
"""

from __future__ import annotations

import warnings

import ipywidgets as widgets
import numpy as np

from soilwave.errors import InputError, SoilwaveError
from soilwave.gather import validate_gather
from soilwave.picks import (
    PHASES,
    default_sigma,
    drop_picks,
    edit_pick,
    make_picks,
    merge_picks,
    validate_picks,
    write_picks,
)
from soilwave.plot_gather import draw_gather
from soilwave.provenance import history_line
from soilwave.widgets_figure import FigurePane, Tool, curve_colour, guarded

__all__ = ["PickEditor"]

#: Click actions of the editor.
MODES = ("add", "move", "delete")
_LAYERED = ("reflection", "refraction")
_MARKERS = {"air": "o", "ground": "o", "reflection": "o", "refraction": "s", "diffraction": "^"}
_STYLE = {"description_width": "initial"}


def _pick_label(i: int, phase: str, interface: int, offset: float, time: float) -> str:
    name = f"{phase} {interface}" if phase in _LAYERED else phase
    return f"{i}: {name} at {offset:.3f} m, {time:.2f} ns"


class PickEditor(Tool):
    """Pick travel times on a gather by clicking, with form controls as a fallback.

    With a clickable figure (ipympl; ``%matplotlib widget``) a left click
    acts according to the *click to* buttons: **add** puts a pick of the
    chosen phase and interface where you click; **move** grabs the nearest
    pick (within ``pick_radius_px`` pixels) and drops it where the button is
    released; **delete** removes the nearest pick. Without an interactive
    backend the figure is a static image and the form below it does the same
    work: type an offset and a time and press *add pick*, or choose a pick in
    the list and press *update pick* or *delete pick*.

    Picks are kept as a soilwave pick table (:func:`soilwave.make_picks`):
    every edit is validated (a pick implying a permittivity below 1, or a
    reflection before the ground wave, is refused with a message) and
    recorded in the table's ``history``. *save* writes the table with
    :func:`soilwave.write_picks` (atomic; an existing file is replaced only
    when *replace existing file* is ticked). Problems are shown in the status
    line under the figure.

    Parameters
    ----------
    gather : xarray.DataArray, optional
        Multi-offset gather (dims offset, time) drawn under the picks.
    picks : xarray.Dataset, optional
        Pick table to start from (copied, never modified).
    frequency_mhz : float, optional
        Antenna centre frequency, MHz, for the default pick uncertainty
        (default: the gather's or the pick table's).
    path : str or path-like
        Initial content of the *file* box.
    snap_to_traces : bool
        Put picks at the offset of the nearest trace of the gather.
    pick_radius_px : float
        How close (pixels) a click must be to a pick to move or delete it.
    offset_range, time_range : (float, float), optional
        Axis limits (m, ns) when there is no gather (default from the picks).
    interactive : bool or None
        Clickable ipympl figure (True), static PNG (False) or automatic (None).
    figsize : tuple of float
        Figure size, inches.

    Attributes
    ----------
    widget : ipywidgets.VBox
        The whole tool.
    picks : xarray.Dataset or None
        The current pick table (None while it is empty).
    selected : int or None
        Index of the selected pick.
    saved_path : pathlib.Path or None
        Where the table was last saved.
    mode, phase, interface, sigma, offset_box, time_box, selector, path, replace :
        ipywidgets controls (set ``.value`` to drive the tool from code).
    add_button, update_button, delete_button, save_button : ipywidgets.Button

    Examples
    --------
    >>> from soilwave.widgets import PickEditor
    >>> ed = PickEditor(offset_range=(0, 3), time_range=(0, 60), frequency_mhz=250.0,
    ...                 interactive=False)
    >>> ed.phase.value = "ground"
    >>> ed.add_pick(1.0, 10.0)
    >>> ed.picks["phase"].values.tolist(), ed.picks["sigma"].values.tolist()
    (['ground'], [0.4])
    """

    def __init__(
        self,
        gather=None,
        *,
        picks=None,
        frequency_mhz=None,
        path="picks.csv",
        snap_to_traces=True,
        pick_radius_px=10.0,
        offset_range=None,
        time_range=None,
        interactive=None,
        figsize=(7.0, 5.0),
    ):
        if gather is not None:
            validate_gather(gather)
            if gather.dims[0] != "offset":
                msg = (
                    "the pick editor works on multi-offset gathers (dims offset, time); got "
                    f"dims {gather.dims}"
                )
                raise InputError(msg)
        if picks is not None:
            picks = validate_picks(picks).copy(deep=True)
        self.gather = gather
        self.picks = picks
        self.selected: int | None = None
        self.saved_path = None
        self.snap_to_traces = bool(snap_to_traces)
        self.pick_radius_px = float(pick_radius_px)
        self._init_status()
        f = frequency_mhz
        if f is None and gather is not None:
            f = gather.attrs.get("frequency_mhz")
        if f is None and picks is not None:
            f = picks.attrs.get("frequency_mhz")
        self.frequency_mhz = None if f is None else float(f)
        self._syncing = False
        self._drag: int | None = None
        self._drag_xy = None

        max_itf = 5
        if picks is not None and picks.sizes["pick"]:
            max_itf = max(max_itf, int(np.max(picks["interface"].values)) + 1)
        self.mode = widgets.ToggleButtons(
            options=MODES, value="add", description="click to", style={"button_width": "70px"}
        )
        self.phase = widgets.Dropdown(
            options=PHASES, value="reflection", description="phase", style=_STYLE
        )
        self.interface = widgets.Dropdown(
            options=list(range(1, max_itf + 1)), value=1, description="interface", style=_STYLE
        )
        self.sigma = widgets.BoundedFloatText(
            value=default_sigma(self.frequency_mhz) if self.frequency_mhz else 0.0,
            min=0.0,
            max=1e4,
            step=0.05,
            description="sigma (ns; 0 = default)",
            style=_STYLE,
            layout=widgets.Layout(width="220px"),
        )
        self.offset_box = widgets.FloatText(
            value=0.0, description="offset (m)", style=_STYLE, layout=widgets.Layout(width="170px")
        )
        self.time_box = widgets.FloatText(
            value=0.0, description="time (ns)", style=_STYLE, layout=widgets.Layout(width="170px")
        )
        self.add_button = widgets.Button(description="add pick", icon="plus")
        self.update_button = widgets.Button(description="update pick", icon="pencil")
        self.delete_button = widgets.Button(description="delete pick", icon="trash")
        self.selector = widgets.Dropdown(
            options=[("(none)", None)],
            value=None,
            description="pick",
            style=_STYLE,
            layout=widgets.Layout(width="340px"),
        )
        self.path = widgets.Text(
            value=str(path), description="file", style=_STYLE, layout=widgets.Layout(width="340px")
        )
        self.replace = widgets.Checkbox(value=False, description="replace existing file")
        self.save_button = widgets.Button(description="save picks", icon="save")

        self.phase.observe(self._on_phase, names="value")
        self.selector.observe(self._on_select, names="value")
        self.add_button.on_click(self._on_add_button)
        self.update_button.on_click(self._on_update_button)
        self.delete_button.on_click(self._on_delete_button)
        self.save_button.on_click(self._on_save_button)

        self._pane = FigurePane(figsize=figsize, interactive=interactive)
        self.figure = self._pane.figure
        self.ax = self.figure.add_subplot()
        self._pick_artists: list = []
        self._draw_background(offset_range, time_range)
        canvas = self._pane.canvas
        self._cids = [
            canvas.mpl_connect("button_press_event", self._on_press),
            canvas.mpl_connect("motion_notify_event", self._on_motion),
            canvas.mpl_connect("button_release_event", self._on_release),
        ]

        form = widgets.VBox(
            [
                widgets.HTML("<b>picking</b>"),
                self.mode,
                self.phase,
                self.interface,
                self.sigma,
                widgets.HTML("<b>by value</b>"),
                widgets.HBox([self.offset_box, self.time_box]),
                self.selector,
                widgets.HBox([self.add_button, self.update_button, self.delete_button]),
                widgets.HTML("<b>save</b>"),
                self.path,
                widgets.HBox([self.replace, self.save_button]),
            ]
        )
        self.widget = widgets.VBox([widgets.HBox([self._pane.widget, form]), self.status])
        self._on_phase(None)
        self._refresh()

    # --- public editing API (raises on bad input) ---------------------------------------

    @property
    def n_picks(self) -> int:
        """Number of picks in the table."""
        return 0 if self.picks is None else int(self.picks.sizes["pick"])

    def add_pick(self, offset, time, *, phase=None, interface=None, sigma=None) -> None:
        """Add one pick (phase, interface and sigma default to the controls).

        Raises
        ------
        PickTableError
            If the pick is not valid or contradicts the table (see
            :func:`soilwave.validate_picks`).
        """
        phase = self.phase.value if phase is None else str(phase)
        if interface is None:
            interface = self.interface.value if phase in _LAYERED else 0
        s = float(self.sigma.value) if sigma is None else float(sigma)
        x = self._snap(float(offset))
        t = float(time)
        new = make_picks(
            [x],
            [t],
            phase,
            interface=[int(interface)],
            sigma=None if s == 0 else s,
            frequency_mhz=self.frequency_mhz,
        )
        step = history_line("add_pick", offset=x, time=t, phase=phase, interface=int(interface))
        if self.picks is None:
            out = new
            out.attrs["source"] = "pick editor"
            out.attrs["history"] = step
            caught = []
        else:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                out = merge_picks(self.picks, new)
            old = self.picks.attrs
            out.attrs["source"] = old.get("source", "pick editor")
            if self.frequency_mhz is not None:
                out.attrs["frequency_mhz"] = self.frequency_mhz
            hist = old.get("history") or ""
            out.attrs["history"] = f"{hist}\n{step}" if hist else step
        self.picks = out
        self.selected = self.n_picks - 1
        self._after_edit(f"added {_pick_label(self.selected, phase, int(interface), x, t)}")
        if caught:
            self._show_message(f"added; note: {caught[0].message}")

    def move_pick(self, index: int, offset, time) -> None:
        """Move pick ``index`` to a new offset (m) and time (ns)."""
        if self.picks is None:
            msg = "there are no picks to move"
            raise InputError(msg)
        x = self._snap(float(offset))
        self.picks = edit_pick(self.picks, int(index), offset=x, time=float(time))
        self.selected = int(index) % self.n_picks
        self._after_edit(f"moved pick {self.selected} to {x:.3f} m, {float(time):.2f} ns")

    def delete_pick(self, index: int) -> None:
        """Delete pick ``index``."""
        if self.picks is None:
            msg = "there are no picks to delete"
            raise InputError(msg)
        i = int(index)
        if self.n_picks == 1 and i in (0, -1):
            self.picks = None
        else:
            self.picks = drop_picks(self.picks, i)
        self.selected = None
        self._after_edit(f"deleted pick {i}")

    def save(self, path=None, *, overwrite=None):
        """Write the pick table as CSV (:func:`soilwave.write_picks`); return the path.

        ``path`` and ``overwrite`` default to the *file* box and the *replace
        existing file* checkbox.

        Raises
        ------
        OutputExistsError
            If the file exists and overwriting is off.
        """
        if self.picks is None:
            msg = "there are no picks to save; add some first"
            raise InputError(msg)
        path = self.path.value if path is None else path
        if not str(path).strip():
            msg = "the file name is empty; type a path such as picks.csv"
            raise InputError(msg)
        overwrite = self.replace.value if overwrite is None else bool(overwrite)
        written = write_picks(self.picks, path, overwrite=overwrite)
        self.saved_path = written
        self._show_message(f"saved {self.n_picks} picks to {written}")
        return written

    def nearest_pick(self, x_px: float, y_px: float):
        """Index of the pick nearest to display point (x_px, y_px), or None beyond the radius."""
        if self.picks is None:
            return None
        xy = np.column_stack([self.picks["offset"].values, self.picks["time"].values])
        disp = self.ax.transData.transform(xy)
        d = np.hypot(disp[:, 0] - x_px, disp[:, 1] - y_px)
        i = int(np.argmin(d))
        return i if d[i] <= self.pick_radius_px else None

    @property
    def n_renders(self) -> int:
        """How many times the figure has been redrawn."""
        return self._pane.n_renders

    # --- helpers ---------------------------------------------------------------------------

    def _snap(self, x: float) -> float:
        if self.gather is None or not self.snap_to_traces:
            return x
        offsets = np.asarray(self.gather["offset"].values, dtype=float)
        return float(offsets[int(np.argmin(np.abs(offsets - x)))])

    def _after_edit(self, message: str) -> None:
        self._refresh()
        self._show_message(message)

    def _draw_background(self, offset_range, time_range) -> None:
        ax = self.ax
        if self.gather is not None:
            draw_gather(ax, self.gather)
        else:
            if self.picks is not None:
                x = self.picks["offset"].values
                t = self.picks["time"].values
                pad_x = 0.1 * max(float(np.ptp(x)), 1.0)
                default_x = (max(0.0, float(x.min()) - pad_x), float(x.max()) + pad_x)
                default_t = (0.0, 1.2 * float(t.max()))
            else:
                default_x = default_t = None
            xr_ = offset_range if offset_range is not None else default_x
            tr_ = time_range if time_range is not None else default_t
            if xr_ is None or tr_ is None:
                msg = (
                    "give a gather, a pick table, or offset_range=(min, max) m and "
                    "time_range=(min, max) ns for the empty figure"
                )
                raise InputError(msg)
            ax.set_xlim(float(xr_[0]), float(xr_[1]))
            ax.set_ylim(float(tr_[1]), float(tr_[0]))
            ax.set_xlabel("offset (m)")
            ax.set_ylabel("time (ns)")
            ax.grid(alpha=0.3)
            ax.set_title("picks", fontsize="medium")
        ax.set_autoscale_on(False)  # picking must not move the axes under the pointer
        (self._drag_marker,) = ax.plot([], [], "x", color="red", ms=10, mew=2)

    def _interface_of(self, phase: str) -> int:
        return int(self.interface.value) if phase in _LAYERED else 0

    def _refresh(self) -> None:
        """Redraw the pick markers and refill the selector."""
        for artist in self._pick_artists:
            artist.remove()
        self._pick_artists = []
        ax = self.ax
        options = [("(none)", None)]
        if self.picks is not None:
            ph = np.asarray(self.picks["phase"].values).astype(str)
            itf = np.asarray(self.picks["interface"].values).astype(int)
            x = np.asarray(self.picks["offset"].values, float)
            t = np.asarray(self.picks["time"].values, float)
            for p, k in sorted({(a, int(b)) for a, b in zip(ph, itf, strict=True)}):
                sel = (ph == p) & (itf == k)
                (line,) = ax.plot(
                    x[sel],
                    t[sel],
                    ls="none",
                    marker=_MARKERS.get(p, "o"),
                    ms=5,
                    color=curve_colour(p, k),
                    mec="white",
                    mew=0.5,
                    label=p if p not in _LAYERED else f"{p} {k}",
                )
                self._pick_artists.append(line)
            if self.selected is not None and 0 <= self.selected < x.size:
                i = self.selected
                (ring,) = ax.plot([x[i]], [t[i]], "o", ms=12, mfc="none", mec="red", mew=1.5)
                self._pick_artists.append(ring)
            self._pick_artists.append(ax.legend(fontsize="x-small", loc="lower left"))
            options += [(_pick_label(i, ph[i], int(itf[i]), x[i], t[i]), i) for i in range(x.size)]
        self._syncing = True
        try:
            self.selector.options = options
            self.selector.value = self.selected
        finally:
            self._syncing = False
        self._fill_boxes()
        self._pane.refresh()

    def _fill_boxes(self) -> None:
        if self.picks is None or self.selected is None:
            return
        i = self.selected
        self.offset_box.value = float(self.picks["offset"].values[i])
        self.time_box.value = float(self.picks["time"].values[i])

    # --- widget callbacks -----------------------------------------------------------------

    def _on_phase(self, change) -> None:
        self.interface.disabled = self.phase.value not in _LAYERED

    @guarded
    def _on_select(self, change) -> None:
        if self._syncing:
            return
        self.selected = change["new"]
        self._refresh()

    @guarded
    def _on_add_button(self, button) -> None:
        self.add_pick(self.offset_box.value, self.time_box.value)

    @guarded
    def _on_update_button(self, button) -> None:
        if self.selected is None:
            msg = "choose a pick in the list first"
            raise InputError(msg)
        self.move_pick(self.selected, self.offset_box.value, self.time_box.value)

    @guarded
    def _on_delete_button(self, button) -> None:
        if self.selected is None:
            msg = "choose a pick in the list first"
            raise InputError(msg)
        self.delete_pick(self.selected)

    @guarded
    def _on_save_button(self, button) -> None:
        self.save()

    # --- mouse callbacks -------------------------------------------------------------------

    def _navigating(self) -> bool:
        toolbar = getattr(self._pane.canvas, "toolbar", None)
        return bool(str(getattr(toolbar, "mode", "") or ""))

    @guarded
    def _on_press(self, event) -> None:
        if event.inaxes is not self.ax or event.button != 1 or self._navigating():
            return
        if event.xdata is None or event.ydata is None:
            return
        mode = self.mode.value
        if mode == "add":
            self.add_pick(event.xdata, event.ydata)
            return
        i = self.nearest_pick(event.x, event.y)
        if i is None:
            self._show_message(f"no pick within {self.pick_radius_px:g} pixels of the click")
            return
        if mode == "delete":
            self.delete_pick(i)
        else:
            self._drag = i
            self._drag_xy = (event.xdata, event.ydata)
            self.selected = i
            self._show_message(f"moving pick {i}: release the button at the new place")

    @guarded
    def _on_motion(self, event) -> None:
        if self._drag is None or event.inaxes is not self.ax or event.xdata is None:
            return
        self._drag_xy = (self._snap(event.xdata), event.ydata)
        self._drag_marker.set_data([self._drag_xy[0]], [self._drag_xy[1]])
        if self._pane.interactive:
            self._pane.canvas.draw_idle()

    @guarded
    def _on_release(self, event) -> None:
        if self._drag is None:
            return
        i, self._drag = self._drag, None
        if event.inaxes is self.ax and event.xdata is not None:
            self._drag_xy = (event.xdata, event.ydata)
        x, t = self._drag_xy
        self._drag_marker.set_data([], [])
        try:
            self.move_pick(i, x, t)
        except SoilwaveError:
            self._refresh()
            raise
