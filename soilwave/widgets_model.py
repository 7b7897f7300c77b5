"""Layer-model explorer: move layer sliders and watch predicted arrivals on a gather.

Internal module of :mod:`soilwave.widgets`; import from there::

    from soilwave.widgets import LayerModelExplorer
"""

from __future__ import annotations

import html
import warnings

import ipywidgets as widgets
import numpy as np

from soilwave.earth import LayeredEarth
from soilwave.errors import InputError
from soilwave.gather import validate_gather
from soilwave.layered import vertical_twt
from soilwave.picks import validate_picks
from soilwave.plot_gather import draw_gather
from soilwave.traveltime import (
    PHASES_MODELLED,
    TravelTimeOperator,
    air_wave_time,
    ground_wave_time,
    head_wave_time,
    reflection_time,
)
from soilwave.wave import wave_velocity
from soilwave.widgets_figure import FigurePane, Tool, curve_colour, guarded

__all__ = ["LayerModelExplorer"]

_STYLE = {"description_width": "initial"}
_N_GRID = 201


def _curve_label(phase: str, interface: int) -> str:
    return phase if interface == 0 else f"{phase} {interface}"


class LayerModelExplorer(Tool):
    """Sliders for a layered earth with its predicted travel-time curves over a gather.

    One slider per layer permittivity, one per layer thickness (the last layer
    is a half-space) and one for time zero. For every setting the predicted
    arrival times (two-way for reflections; :mod:`soilwave.traveltime`) are
    drawn over the gather: air wave, direct ground wave, the reflection from
    each interface and the head wave (refraction) along each interface where
    one exists (the layer below faster than every layer above, beyond the
    critical distance). A table gives each layer's velocity, depth, two-way
    vertical time and, with a petrophysical model, water content; with picks,
    the misfit of the model to them.

    Parameters
    ----------
    gather : xarray.DataArray, optional
        Multi-offset gather (dims offset, time) drawn under the curves.
    permittivity : sequence of float
        Starting relative permittivity of each layer (layer 1 at the surface,
        the last is the half-space), each >= 1.
    thickness : sequence of float
        Starting thickness of each layer above the half-space, m, > 0
        (one fewer than ``permittivity``).
    time_zero : float
        Starting time-zero shift added to every predicted time, ns (as in
        :func:`soilwave.invert`).
    picks : xarray.Dataset, optional
        Pick table drawn as markers; the readout gives the misfit.
    offsets : array_like, optional
        Offsets at which to evaluate the curves, m (default: 201 points over
        the gather's or the picks' offsets).
    petro_model : soilwave.petro.PetroModel, optional
        Permittivity to water content relation for the readout (e.g.
        ``soilwave.Topp()``).
    max_permittivity : float
        Upper end of the permittivity sliders (water is about 80).
    max_thickness : float, optional
        Upper end of the thickness sliders, m (default the larger of 3 m and
        twice the largest starting thickness).
    interactive : bool or None
        Clickable ipympl figure (True), static PNG (False) or automatic (None).
    figsize : tuple of float
        Figure size, inches.

    Attributes
    ----------
    widget : ipywidgets.VBox
        The whole tool.
    model : dict
        Current model: ``permittivity`` (1), ``thickness`` (m) arrays and
        ``time_zero`` (ns).
    layers : dict
        Derived per-layer values: ``velocity`` (m/ns), ``depth`` (m, bottom
        of each layer above the half-space), ``vertical_twt`` (ns, two-way
        vertical time to each interface, without time zero) and, with a
        petrophysical model, ``water_content`` (m3/m3).
    offsets : numpy.ndarray
        Offsets of the curves, m.
    curves : dict
        ``{(phase, interface): times}``, ns, on :attr:`offsets`, time zero
        included; ``interface`` is 0 for the air and ground waves. Head waves
        appear only where they exist (NaN before the critical distance).
    misfit : dict or None
        With picks: ``rms_ns`` (root mean square of pick minus predicted
        time), ``chi2_per_pick`` (mean squared residual over sigma^2),
        ``n_used`` and ``n_unpredicted`` (picks whose phase does not exist for
        the model, e.g. a head wave before its critical distance).
    permittivity_sliders, thickness_sliders : list of ipywidgets.FloatSlider
    time_zero : ipywidgets.FloatSlider

    Examples
    --------
    >>> from soilwave.widgets import LayerModelExplorer
    >>> ex = LayerModelExplorer(offsets=[0.0, 1.0], permittivity=[9.0, 25.0],
    ...                         thickness=[1.0], interactive=False)
    >>> round(float(ex.curves[("reflection", 1)][0]), 3)
    20.014
    >>> ex.permittivity_sliders[0].value = 4.0
    >>> round(float(ex.curves[("reflection", 1)][0]), 3)
    13.343
    """

    def __init__(
        self,
        gather=None,
        *,
        permittivity=(9.0, 16.0),
        thickness=(0.5,),
        time_zero=0.0,
        picks=None,
        offsets=None,
        petro_model=None,
        max_permittivity=81.0,
        max_thickness=None,
        interactive=None,
        figsize=(7.0, 5.0),
    ):
        start = LayeredEarth(permittivity=permittivity, thickness=thickness)
        self._init_status()
        if gather is not None:
            validate_gather(gather)
            if gather.dims[0] != "offset":
                msg = (
                    "the layer-model explorer needs a multi-offset gather (dims offset, time); "
                    f"got dims {gather.dims}"
                )
                raise InputError(msg)
        if picks is not None:
            picks = validate_picks(picks)
        self.gather = gather
        self.picks = picks
        self.petro_model = petro_model
        if petro_model is not None and not hasattr(petro_model, "water_content"):
            msg = f"petro_model must be a soilwave petrophysical model; got {petro_model!r}"
            raise InputError(msg)
        self.offsets = self._offset_grid(offsets)
        try:
            t0 = float(time_zero)
        except (TypeError, ValueError):
            msg = f"time_zero must be a number in ns; got {time_zero!r}"
            raise InputError(msg) from None
        max_eps = float(max_permittivity)
        if not max_eps > float(np.max(start.permittivity)):
            msg = (
                f"max_permittivity={max_permittivity!r} must exceed the starting "
                f"permittivities {start.permittivity.tolist()}"
            )
            raise InputError(msg)
        h_max = (
            max(3.0, 2.0 * float(np.max(start.thickness, initial=0.0)))
            if max_thickness is None
            else float(max_thickness)
        )
        if start.thickness.size and not h_max > float(np.max(start.thickness)):
            msg = (
                f"max_thickness={max_thickness!r} m must exceed the starting thicknesses "
                f"{start.thickness.tolist()} m"
            )
            raise InputError(msg)
        if gather is not None:
            t = gather["time"].values
            t0_span = max(10.0, 0.25 * float(t[-1] - t[0]))
        else:
            t0_span = 20.0
        t0_span = max(t0_span, 2 * abs(t0))

        self.permittivity_sliders = [
            widgets.FloatSlider(
                value=float(e),
                min=1.0,
                max=max_eps,
                step=0.1,
                description=f"layer {i + 1} permittivity"
                if i < start.n_layers - 1
                else "half-space permittivity",
                style=_STYLE,
                readout_format=".1f",
                layout=widgets.Layout(width="380px"),
            )
            for i, e in enumerate(start.permittivity)
        ]
        self.thickness_sliders = [
            widgets.FloatSlider(
                value=float(h),
                min=0.01,
                max=h_max,
                step=0.01,
                description=f"layer {i + 1} thickness (m)",
                style=_STYLE,
                readout_format=".2f",
                layout=widgets.Layout(width="380px"),
            )
            for i, h in enumerate(start.thickness)
        ]
        self.time_zero = widgets.FloatSlider(
            value=t0,
            min=-t0_span,
            max=t0_span,
            step=0.1,
            description="time zero (ns)",
            style=_STYLE,
            readout_format=".1f",
            layout=widgets.Layout(width="380px"),
        )
        self.readout = widgets.HTML(value="")

        self._pane = FigurePane(figsize=figsize, interactive=interactive)
        live = self._pane.interactive
        for s in (*self.permittivity_sliders, *self.thickness_sliders, self.time_zero):
            s.continuous_update = live
            s.observe(self._on_change, names="value")
        self.figure = self._pane.figure
        self.ax = self.figure.add_subplot()
        self._curve_artists: list = []
        self._draw_background()

        sliders = widgets.VBox(
            [
                widgets.HTML("<b>layers</b>"),
                *self.permittivity_sliders,
                *self.thickness_sliders,
                self.time_zero,
                self.readout,
            ]
        )
        self.widget = widgets.VBox([widgets.HBox([self._pane.widget, sliders]), self.status])
        self.model: dict = {}
        self.layers: dict = {}
        self.curves: dict = {}
        self.misfit: dict | None = None
        self._holding = False
        self._update()

    def set_model(self, *, permittivity=None, thickness=None, time_zero=None) -> None:
        """Move several sliders at once (one recomputation and redraw).

        Values outside a slider's range are clipped to it, as when dragging.

        Parameters
        ----------
        permittivity : sequence of float, optional
            One value per layer.
        thickness : sequence of float, optional
            One value per layer above the half-space, m.
        time_zero : float, optional
            Time-zero shift, ns.
        """
        for name, values, sliders in (
            ("permittivity", permittivity, self.permittivity_sliders),
            ("thickness", thickness, self.thickness_sliders),
        ):
            if values is not None and len(values) != len(sliders):
                msg = f"{name} needs {len(sliders)} value(s); got {list(values)!r}"
                raise InputError(msg)
        self._holding = True
        try:
            for values, sliders in (
                (permittivity, self.permittivity_sliders),
                (thickness, self.thickness_sliders),
            ):
                if values is not None:
                    for slider, value in zip(sliders, values, strict=True):
                        slider.value = float(value)
            if time_zero is not None:
                self.time_zero.value = float(time_zero)
        finally:
            self._holding = False
        self._update()

    # --- setup -----------------------------------------------------------------------

    def _offset_grid(self, offsets) -> np.ndarray:
        if offsets is not None:
            x = np.atleast_1d(np.asarray(offsets, dtype=float))
            if x.ndim != 1 or x.size == 0 or not np.all(np.isfinite(x)) or np.any(x < 0):
                msg = f"offsets must be a 1-D array of finite offsets >= 0 m; got {offsets!r}"
                raise InputError(msg)
            return np.sort(x)
        if self.gather is not None:
            x = np.asarray(self.gather["offset"].values, dtype=float)
        elif self.picks is not None:
            x = np.asarray(self.picks["offset"].values, dtype=float)
        else:
            msg = "give a gather, picks or offsets= (m) to evaluate the travel-time curves at"
            raise InputError(msg)
        lo, hi = float(x.min()), float(x.max())
        if hi <= lo:
            return np.array([lo])
        return np.linspace(lo, hi, _N_GRID)

    def _draw_background(self) -> None:
        ax = self.ax
        if self.gather is not None:
            draw_gather(ax, self.gather)
        else:
            ax.set_xlabel("offset (m)")
            ax.set_ylabel("time (ns)")
            ax.set_title("predicted arrivals", fontsize="medium")
        if self.picks is not None:
            ph = np.asarray(self.picks["phase"].values).astype(str)
            itf = np.asarray(self.picks["interface"].values).astype(int)
            x = np.asarray(self.picks["offset"].values, float)
            t = np.asarray(self.picks["time"].values, float)
            for p, k in sorted({(a, int(b)) for a, b in zip(ph, itf, strict=True)}):
                sel = (ph == p) & (itf == k)
                ax.plot(
                    x[sel],
                    t[sel],
                    ls="none",
                    marker="s" if p == "refraction" else "o",
                    ms=4,
                    mfc="none",
                    color=curve_colour(p, k),
                    label=f"{_curve_label(p, k)} picks",
                )

    # --- state -----------------------------------------------------------------------

    def _on_change(self, change) -> None:
        if not self._holding:
            self._update()

    @guarded
    def _update(self) -> None:
        eps = np.array([s.value for s in self.permittivity_sliders], dtype=float)
        h = np.array([s.value for s in self.thickness_sliders], dtype=float)
        t0 = float(self.time_zero.value)
        self.model = {"permittivity": eps, "thickness": h, "time_zero": t0}
        v = np.asarray(wave_velocity(eps), dtype=float)
        layers = {
            "velocity": v,
            "depth": np.cumsum(h),
            "vertical_twt": vertical_twt(h, v[: h.size]) if h.size else h.copy(),
        }
        if self.petro_model is not None:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                layers["water_content"] = np.asarray(
                    self.petro_model.water_content(eps, on_range="ignore"), dtype=float
                )
        self.layers = layers
        self.curves = self._compute_curves(h, v, t0)
        self.misfit = self._compute_misfit(h, v, t0)
        self._draw_curves()
        self._write_readout()

    def _compute_curves(self, h, v, t0) -> dict:
        x = self.offsets
        curves = {
            ("air", 0): air_wave_time(x) + t0,
            ("ground", 0): ground_wave_time(x, v) + t0,
        }
        for k in range(1, h.size + 1):
            curves[("reflection", k)] = reflection_time(x, h, v, interface=k) + t0
        for k in range(1, h.size + 1):
            t = head_wave_time(x, h, v, interface=k)
            if np.any(np.isfinite(t)):
                curves[("refraction", k)] = t + t0
        return curves

    def _compute_misfit(self, h, v, t0):
        if self.picks is None:
            return None
        ph = np.asarray(self.picks["phase"].values).astype(str)
        keep = np.isin(ph, PHASES_MODELLED)
        used = self.picks.isel(pick=np.flatnonzero(keep))
        if used.sizes["pick"] == 0:
            return None
        op = TravelTimeOperator.from_picks(used)
        if op.n_interfaces > h.size:
            msg = (
                f"the picks reference interface {op.n_interfaces} but the model has "
                f"{h.size} interface(s); no misfit"
            )
            return {"message": msg}
        pred = op(h, v, t0)
        t = np.asarray(used["time"].values, float)
        s = np.asarray(used["sigma"].values, float)
        ok = np.isfinite(pred)
        r = t[ok] - pred[ok]
        return {
            "rms_ns": float(np.sqrt(np.mean(r**2))) if r.size else np.nan,
            "chi2_per_pick": float(np.mean((r / s[ok]) ** 2)) if r.size else np.nan,
            "n_used": int(ok.sum()),
            "n_unpredicted": int((~ok).sum()),
        }

    # --- display ---------------------------------------------------------------------

    def _draw_curves(self) -> None:
        ax = self.ax
        for artist in self._curve_artists:
            artist.remove()
        self._curve_artists = []
        x = self.offsets
        for (phase, k), t in self.curves.items():
            (line,) = ax.plot(
                x,
                t,
                color=curve_colour(phase, k),
                lw=1.6,
                ls="--" if phase == "refraction" else "-",
                label=_curve_label(phase, k),
            )
            self._curve_artists.append(line)
        if self.gather is None:
            finite = np.concatenate([t[np.isfinite(t)] for t in self.curves.values()])
            if self.picks is not None:
                finite = np.concatenate([finite, self.picks["time"].values])
            top = float(np.max(finite)) if finite.size else 1.0
            low = min(0.0, float(np.min(finite))) if finite.size else 0.0
            ax.set_ylim(1.1 * top, low)
            ax.set_xlim(float(x.min()) - 0.05, float(x.max()) + 0.05)
        legend = ax.legend(fontsize="x-small", loc="lower left", framealpha=0.7)
        self._curve_artists.append(legend)
        self._pane.refresh()

    def _write_readout(self) -> None:
        eps = self.model["permittivity"]
        v = self.layers["velocity"]
        depth = self.layers["depth"]
        twt = self.layers["vertical_twt"]
        wc = self.layers.get("water_content")
        head = [
            "layer",
            "permittivity",
            "velocity (m/ns)",
            "bottom depth (m)",
            "vertical two-way time (ns)",
        ]
        if wc is not None:
            head.append("water content (m³/m³)")
        rows = []
        for i in range(eps.size):
            last = i == eps.size - 1
            cells = [
                "half-space" if last else str(i + 1),
                f"{eps[i]:.1f}",
                f"{v[i]:.4f}",
                "–" if last else f"{depth[i]:.2f}",
                "–" if last else f"{twt[i]:.2f}",
            ]
            if wc is not None:
                cells.append(f"{wc[i]:.3f}")
            rows.append(cells)
        table = "<table style='font-size:smaller'><tr>"
        table += "".join(f"<th>{html.escape(c)}</th>" for c in head) + "</tr>"
        for cells in rows:
            table += "<tr>" + "".join(f"<td>{html.escape(c)}</td>" for c in cells) + "</tr>"
        table += "</table>"
        notes = []
        if wc is not None:
            lo, hi = self.petro_model.valid_eps
            outside = (eps < lo) | (eps > hi)
            if np.any(outside):
                notes.append(
                    f"permittivity outside {getattr(self.petro_model, 'name', 'the model')}'s "
                    f"calibrated range {lo:g}-{hi:g}: water content is an extrapolation"
                )
            notes.append("water content needs site calibration before decisions rest on it")
        m = self.misfit
        if m is not None:
            if "message" in m:
                notes.append(m["message"])
            else:
                notes.append(
                    f"misfit to {m['n_used']} picks: RMS {m['rms_ns']:.2f} ns, "
                    f"mean (residual/sigma)² {m['chi2_per_pick']:.2f}"
                    + (
                        f"; {m['n_unpredicted']} pick(s) with no predicted arrival"
                        if m["n_unpredicted"]
                        else ""
                    )
                )
        self.readout.value = table + "".join(
            f"<div style='font-size:smaller'>{html.escape(n)}</div>" for n in notes
        )
        self._show_message("model updated")

    @property
    def n_renders(self) -> int:
        """How many times the figure has been redrawn."""
        return self._pane.n_renders
