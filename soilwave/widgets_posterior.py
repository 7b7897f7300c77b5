"""Posterior explorer: histograms and credible-band profiles of an inversion result.

Internal module of :mod:`soilwave.widgets`; import from there::

    from soilwave.widgets import PosteriorExplorer
"""

from __future__ import annotations

import html
import warnings

import ipywidgets as widgets
import numpy as np

from soilwave.errors import InputError, RangeWarning
from soilwave.widgets_figure import FigurePane, Tool, guarded

__all__ = ["PosteriorExplorer"]

#: Quantities the explorer offers: value -> (label, units).
QUANTITIES = {
    "permittivity": ("relative permittivity", "1"),
    "velocity": ("velocity", "m/ns"),
    "thickness": ("layer thickness", "m"),
    "depth": ("depth of the layer bottom", "m"),
    "water_content": ("water content", "m³/m³"),
}
_PROFILED = ("permittivity", "velocity", "water_content")
_INTERFACE_QUANTITIES = ("thickness", "depth")
_STYLE = {"description_width": "initial"}
_CAUTION = "Water content from GPR needs site calibration before decisions rest on it."


def _axis_label(quantity: str) -> str:
    label, units = QUANTITIES[quantity]
    return f"{label} ({units})"


class PosteriorExplorer(Tool):
    """Look through the posterior of a layered-earth inversion, one quantity at a time.

    Choose a quantity (permittivity, velocity, thickness, depth of the layer
    bottom and, with a petrophysical model, water content) and a layer: the
    left panel shows the histogram of its posterior draws with the median and
    the central 90 % interval; the right panel the depth profile of the
    quantity (permittivity for thickness and depth) with its 68 % and 90 %
    credible bands and the 90 % intervals of the interface depths. The text
    under the figure gives the selected quantity's statistics and the
    per-layer table of :meth:`InversionResult.table`.

    Parameters
    ----------
    result : soilwave.InversionResult
        Inversion result (:func:`soilwave.invert` or :func:`soilwave.read_result`).
    model : soilwave.petro.PetroModel, optional
        Water-content model (default the result's model; without one,
        water content is not offered).
    bins : int
        Histogram bins.
    interactive : bool or None
        Clickable ipympl figure (True), static PNG (False) or automatic (None).
    figsize : tuple of float
        Figure size, inches.

    Attributes
    ----------
    widget : ipywidgets.VBox
        The whole tool.
    quantity, layer : ipywidgets.Dropdown
        The controls.
    draws : numpy.ndarray
        Posterior draws of the selected quantity and layer (units of the
        quantity).
    stats : dict
        ``median``, ``mean``, ``sd``, ``q05``, ``q16``, ``q84``, ``q95`` and
        ``n`` of :attr:`draws`.
    profile : xarray.DataArray
        Quantiles (quantile, depth) of the profile drawn on the right.

    Examples
    --------
    >>> import numpy as np, soilwave as sw
    >>> from soilwave.widgets import PosteriorExplorer
    >>> x = np.tile(np.linspace(0.5, 3.0, 8), 2)
    >>> ph = ["ground"] * 8 + ["reflection"] * 8
    >>> t = sw.TravelTimeOperator(x, ph, [0] * 8 + [1] * 8)([0.6], [0.1, 0.08], 0.0)
    >>> res = sw.invert(sw.make_picks(x, t, ph, interface=[0] * 8 + [1] * 8, sigma=0.3),
    ...                 seed=0, n_walkers=16, max_steps=300)
    >>> ex = PosteriorExplorer(res, interactive=False)
    >>> ex.quantity.value = "depth"
    >>> ex.stats["n"] == res.samples.sizes["sample"]
    True
    """

    def __init__(self, result, *, model=None, bins=40, interactive=None, figsize=(9.0, 4.5)):
        if not hasattr(result, "samples") or not hasattr(result, "summary"):
            msg = f"expected a soilwave InversionResult; got {type(result).__name__}"
            raise InputError(msg)
        if isinstance(bins, bool) or not isinstance(bins, int | np.integer) or bins < 2:
            msg = f"bins must be an integer >= 2; got {bins!r}"
            raise InputError(msg)
        self.result = result
        self.model = model if model is not None else getattr(result, "model", None)
        if self.model is not None and not hasattr(self.model, "water_content_draws"):
            msg = f"model must be a soilwave petrophysical model; got {self.model!r}"
            raise InputError(msg)
        self.bins = int(bins)
        self._init_status()
        self._depth = result.default_depth()
        self._water_draws = None
        self._water_profile = None
        self._water_notes: list[str] = []
        self._table = None
        self._summary = result.summary(self._depth)

        options = [(QUANTITIES[q][0], q) for q in ("permittivity", "velocity")]
        if result.n_interfaces > 0:
            options += [(QUANTITIES[q][0], q) for q in _INTERFACE_QUANTITIES]
        if self.model is not None:
            options.append((QUANTITIES["water_content"][0], "water_content"))
        self.quantity = widgets.Dropdown(
            options=options, value="permittivity", description="quantity", style=_STYLE
        )
        self.layer = widgets.Dropdown(
            options=self._layer_options("permittivity"), value=1, description="layer", style=_STYLE
        )
        self.summary_text = widgets.HTML(value="")
        self._syncing = False
        self.quantity.observe(self._on_quantity, names="value")
        self.layer.observe(self._on_layer, names="value")

        self._pane = FigurePane(figsize=figsize, interactive=interactive)
        self.figure = self._pane.figure
        self.ax_hist, self.ax_profile = self.figure.subplots(1, 2)
        self.widget = widgets.VBox(
            [
                widgets.HBox([self.quantity, self.layer]),
                self._pane.widget,
                self.status,
                self.summary_text,
            ]
        )
        self.draws = np.array([])
        self.stats: dict = {}
        self.profile = None
        self._update()

    # --- data ------------------------------------------------------------------------

    def _layer_options(self, quantity: str):
        layers = [int(k) for k in self.result.samples["layer"].values]
        if quantity in _INTERFACE_QUANTITIES:
            layers = layers[: self.result.n_interfaces]
        return [(f"{k} (half-space)" if k == self.result.n_layers else str(k), k) for k in layers]

    def _water(self):
        """Water-content draws (sample, layer) and depth profile, computed once."""
        if self._water_draws is None:
            eps = self.result.samples["permittivity"].values
            # the same random stream as InversionResult.water_content, so the
            # histogram and the result's summary agree draw for draw
            rng = np.random.default_rng(np.random.SeedSequence([self.result.seed, 7211]))
            self._water_draws = self.model.water_content_draws(eps, rng=rng, on_range="ignore")
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always", RangeWarning)
                self._water_profile = self.result.water_content(self.model, depth=self._depth)
            self._water_notes = [str(w.message) for w in caught]
        return self._water_draws, self._water_profile

    def layer_draws(self, quantity: str, layer: int) -> np.ndarray:
        """Posterior draws of ``quantity`` for ``layer`` (1 = top), shape (n_sample,).

        Units are those of the quantity (:data:`QUANTITIES`); water content
        draws use the same random stream as :meth:`InversionResult.water_content`.
        """
        if quantity not in QUANTITIES:
            msg = f"quantity must be one of {list(QUANTITIES)}; got {quantity!r}"
            raise InputError(msg)
        layers = self.result.samples["layer"].values
        if int(layer) not in layers:
            msg = f"layer {layer!r} is not one of {layers.tolist()}"
            raise InputError(msg)
        col = int(np.flatnonzero(layers == int(layer))[0])
        if quantity == "water_content":
            if self.model is None:
                msg = "water content needs a petrophysical model (model=)"
                raise InputError(msg)
            return np.asarray(self._water()[0][:, col], dtype=float)
        values = np.asarray(self.result.samples[quantity].values[:, col], dtype=float)
        if quantity in _INTERFACE_QUANTITIES and col >= self.result.n_interfaces:
            msg = f"layer {layer} is the half-space: it has no {QUANTITIES[quantity][0]}"
            raise InputError(msg)
        return values

    # --- callbacks -------------------------------------------------------------------

    @guarded
    def _on_quantity(self, change) -> None:
        options = self._layer_options(self.quantity.value)
        current = self.layer.value
        self._syncing = True
        try:
            self.layer.options = options
            values = [v for _, v in options]
            self.layer.value = current if current in values else values[-1]
        finally:
            self._syncing = False
        self._update()

    @guarded
    def _on_layer(self, change) -> None:
        if not self._syncing:
            self._update()

    # --- drawing ---------------------------------------------------------------------

    @guarded
    def _update(self) -> None:
        q = self.quantity.value
        layer = int(self.layer.value)
        draws = self.layer_draws(q, layer)
        draws = draws[np.isfinite(draws)]
        self.draws = draws
        qs = np.quantile(draws, [0.05, 0.16, 0.5, 0.84, 0.95])
        self.stats = {
            "median": float(qs[2]),
            "mean": float(np.mean(draws)),
            "sd": float(np.std(draws, ddof=1)) if draws.size > 1 else np.nan,
            "q05": float(qs[0]),
            "q16": float(qs[1]),
            "q84": float(qs[3]),
            "q95": float(qs[4]),
            "n": int(draws.size),
        }
        self._draw_histogram(q, layer)
        self._draw_profile(q, layer)
        self._pane.refresh()
        self._write_summary(q, layer)

    def _draw_histogram(self, q: str, layer: int) -> None:
        ax = self.ax_hist
        ax.clear()
        ax.hist(self.draws, bins=self.bins, color="tab:blue", alpha=0.6, density=True)
        s = self.stats
        ax.axvline(s["median"], color="k", lw=1.2, label="median")
        for key in ("q05", "q95"):
            ax.axvline(
                s[key], color="k", lw=0.8, ls="--", label="5 %, 95 %" if key == "q05" else None
            )
        ax.set_xlabel(_axis_label(q))
        ax.set_ylabel("posterior density")
        name = "half-space" if layer == self.result.n_layers else f"layer {layer}"
        ax.set_title(f"{QUANTITIES[q][0]}, {name}", fontsize="medium")
        ax.legend(fontsize="x-small")

    def _draw_profile(self, q: str, layer: int) -> None:
        ax = self.ax_profile
        ax.clear()
        shown = q if q in _PROFILED else "permittivity"
        if shown == "water_content":
            prof = self._water()[1]["water_content"]
        else:
            prof = self._summary[shown]
        self.profile = prof
        z = prof["depth"].values
        ax.fill_betweenx(
            z,
            prof.sel(quantile=0.05),
            prof.sel(quantile=0.95),
            color="tab:blue",
            alpha=0.2,
            lw=0,
            label="90 %",
        )
        ax.fill_betweenx(
            z,
            prof.sel(quantile=0.16),
            prof.sel(quantile=0.84),
            color="tab:blue",
            alpha=0.35,
            lw=0,
            label="68 %",
        )
        ax.plot(prof.sel(quantile=0.5), z, color="tab:blue", lw=1.2, label="median")
        depth = self._summary["layer_depth"]
        for k in range(1, self.result.n_interfaces + 1):
            lo = float(depth.sel(layer=k, quantile=0.05))
            hi = float(depth.sel(layer=k, quantile=0.95))
            mid = float(depth.sel(layer=k, quantile=0.5))
            chosen = q in _INTERFACE_QUANTITIES and k == layer
            colour = "tab:red" if chosen else "0.4"
            ax.axhspan(lo, hi, color=colour, alpha=0.25 if chosen else 0.15, lw=0)
            ax.axhline(mid, color=colour, lw=0.8, ls=":")
        ax.set_ylim(float(z[-1]), float(z[0]))
        ax.set_xlabel(_axis_label(shown))
        ax.set_ylabel("depth (m)")
        ax.set_title("profile; shaded: interface depths (90 %)", fontsize="medium")
        ax.grid(alpha=0.3)
        ax.legend(fontsize="x-small", loc="best")

    def _write_summary(self, q: str, layer: int) -> None:
        s = self.stats
        units = QUANTITIES[q][1]
        fmt = ".3f" if q != "permittivity" else ".2f"
        if q == "velocity":
            fmt = ".4f"
        name = "half-space" if layer == self.result.n_layers else f"layer {layer}"
        head = (
            f"<b>{html.escape(QUANTITIES[q][0])}, {name}</b>: median {s['median']:{fmt}} "
            f"{units}; mean {s['mean']:{fmt}} ± {s['sd']:{fmt}} (sd); "
            f"68 % [{s['q16']:{fmt}}, {s['q84']:{fmt}}]; 90 % [{s['q05']:{fmt}}, "
            f"{s['q95']:{fmt}}]; {s['n']} draws"
        )
        notes = []
        if not self.result.converged:
            reason = self.result.diagnostics.get("reason", "")
            notes.append(f"the sampler did not converge ({reason}); treat the intervals with care")
        if q == "water_content":
            notes.extend(self._water_notes)
            notes.append(_CAUTION)
        if self._table is None:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RangeWarning)
                self._table = self.result.table(self.model) if self.model is not None else ""
        table = self._table
        body = "".join(f"<div>{html.escape(n)}</div>" for n in notes)
        pre = f"<pre style='font-size:smaller'>{html.escape(table)}</pre>" if table else ""
        self.summary_text.value = f"<div>{head}</div>{body}{pre}"
        self._show_message(f"showing {QUANTITIES[q][0]} of {name}")

    @property
    def n_renders(self) -> int:
        """How many times the figure has been redrawn."""
        return self._pane.n_renders
