"""The result of a layered-earth inversion: posterior draws, summaries, NetCDF round trip.

:class:`InversionResult` holds

``samples``
    ``xarray.Dataset`` of posterior draws along ``sample`` (flattened walker x
    kept step; ``walker`` and ``step`` coordinates say where each came from)
    and ``layer`` (1 = top; the last layer is the half-space below the deepest
    interface): ``permittivity`` (1), ``velocity`` (m/ns), ``thickness`` (m)
    and ``depth`` (m, bottom of each layer) — both NaN for the half-space,
    which has neither — plus ``time_zero`` (ns), ``noise_scale`` (1) and
    ``log_posterior``. A joint travel-time and amplitude inversion adds
    ``conductivity`` (mS/m, over ``layer``), ``amplitude_noise_scale`` (1)
    and ``log_gain_<family>`` (natural-log gain of each wave family).
``diagnostics``
    dict: ``tau``, ``ess``, ``rhat`` (``xarray.DataArray`` over ``parameter``,
    the sampling coordinates), ``acceptance``, ``converged``, ``reason``,
    ``n_steps``, ``n_walkers``, ``burn_in``, ``thin`` and more (see
    :func:`soilwave.sampling.run_inversion_sampler`).
``priors``, ``picks``, ``seed``, ``software_version``
    Everything needed to reproduce the run.

On disk (:meth:`InversionResult.to_netcdf`, :func:`read_result`) a result is
one NetCDF-4 file (h5netcdf engine) with groups ``/samples``, ``/summary``,
``/water_content``, ``/diagnostics`` and ``/picks``; the root carries the
priors (``prior_*`` attributes), seed, software version and CF conventions.

A reminder that travels with every water-content product: estimates from
GPR need site calibration (cores or probes) before decisions rest on them.
"""

from __future__ import annotations

import json
import os
import tempfile
import warnings
from pathlib import Path

import numpy as np
import xarray as xr

from soilwave.errors import FileFormatError, InputError, OutputExistsError, RangeWarning
from soilwave.priors import Priors

__all__ = ["CONDUCTIVITY_CONSTRAINED_RATIO", "QUANTILES", "InversionResult", "read_result"]

#: Quantiles reported by summaries: the central 68 % and 90 % intervals and the median.
QUANTILES = (0.05, 0.16, 0.5, 0.84, 0.95)

_WC_STANDARD_NAME = "volume_fraction_of_condensed_water_in_soil"
_CAUTION = (
    "Water content from GPR permittivity needs site calibration (cores or probes) "
    "before decisions rest on it."
)
_FORMAT = "soilwave-inversion-result/1"

#: units and long names of the per-parameter sampler diagnostics
DIAGNOSTIC_META = {
    "tau": ("steps", "integrated autocorrelation time (emcee, tol=0)"),
    "ess": ("1", "bulk effective sample size (arviz-stats, walkers as chains)"),
    "rhat": ("1", "rank-normalised split R-hat across walker groups (arviz-stats)"),
}

_META = {
    "permittivity": ("1", "relative permittivity"),
    "velocity": ("m/ns", "radar wave velocity"),
    "thickness": ("m", "layer thickness"),
    "depth": ("m", "depth of the bottom of the layer"),
    "time_zero": ("ns", "time-zero shift added to every pick"),
    "noise_scale": ("1", "scale factor on the pick uncertainties"),
    "water_content": ("1", "volumetric water content"),
    "conductivity": ("mS/m", "electrical conductivity"),
    "attenuation": ("dB/m", "amplitude attenuation at the antenna frequency"),
    "amplitude_noise_scale": ("1", "scale factor on the log-amplitude uncertainties"),
}

#: A layer's conductivity counts as constrained by the data when the central 90 %
#: interval of its posterior (in ln sigma) is narrower than this fraction of the
#: prior's (our choice: half the prior width).
CONDUCTIVITY_CONSTRAINED_RATIO = 0.5


def _quantile_stats(draws: np.ndarray, name: str, dim: str | None, coord) -> dict:
    """Quantiles, mean and sd of ``draws`` (sample first) as DataArrays."""
    units, long_name = _META[name.removeprefix("layer_")]
    q = np.asarray(QUANTILES)
    dims_q = ("quantile",) if dim is None else ("quantile", dim)
    dims_m = () if dim is None else (dim,)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN slices (half-space)
        quant = np.nanquantile(draws, q, axis=0)
        mean = np.nanmean(draws, axis=0)
        sd = np.nanstd(draws, axis=0, ddof=1)
    base = {"units": units}
    if name.endswith("water_content"):
        base["standard_name"] = _WC_STANDARD_NAME
    return {
        name: xr.DataArray(
            quant, dims=dims_q, attrs={**base, "long_name": f"{long_name}, posterior quantiles"}
        ),
        f"{name}_mean": xr.DataArray(
            mean, dims=dims_m, attrs={**base, "long_name": f"{long_name}, posterior mean"}
        ),
        f"{name}_sd": xr.DataArray(
            sd,
            dims=dims_m,
            attrs={**base, "long_name": f"{long_name}, posterior standard deviation"},
        ),
    }


def _layer_index(depth_bottom: np.ndarray, z: np.ndarray) -> np.ndarray:
    """0-based layer of each depth ``z`` (D,) for each sample's interface depths (S, K)."""
    if depth_bottom.shape[1] == 0:
        return np.zeros((depth_bottom.shape[0], z.size), dtype=int)
    return np.sum(depth_bottom[:, :, None] <= z[None, None, :], axis=1)


def _coords(depth=None, layer=None) -> dict:
    out = {
        "quantile": (
            "quantile",
            np.asarray(QUANTILES),
            {"units": "1", "long_name": "posterior quantile"},
        )
    }
    if depth is not None:
        out["depth"] = (
            "depth",
            np.asarray(depth, float),
            {"units": "m", "long_name": "depth below the surface", "positive": "down"},
        )
    if layer is not None:
        out["layer"] = (
            "layer",
            np.asarray(layer),
            {"units": "1", "long_name": "layer number (1 = top)"},
        )
    return out


class InversionResult:
    """Posterior of a layered-earth travel-time inversion (see the module docstring).

    Normally built by :func:`soilwave.invert` or :func:`read_result`.

    Examples
    --------
    >>> import numpy as np, soilwave as sw
    >>> x = np.tile(np.linspace(0.5, 3.0, 8), 2)
    >>> ph = ["ground"] * 8 + ["reflection"] * 8
    >>> t = sw.TravelTimeOperator(x, ph, [0] * 8 + [1] * 8)([0.8], [0.1, 0.07], 0.0)
    >>> picks = sw.make_picks(x, t, ph, interface=[0] * 8 + [1] * 8, sigma=0.3)
    >>> res = sw.invert(picks, seed=1, priors=sw.Priors(time_zero_mean=0.0))
    >>> res.samples["permittivity"].dims
    ('sample', 'layer')
    >>> s = res.summary()
    >>> 8.0 < float(s["layer_permittivity"].sel(quantile=0.5, layer=1)) < 10.0
    True
    """

    def __init__(
        self,
        samples: xr.Dataset,
        diagnostics: dict,
        *,
        priors: Priors,
        picks: xr.Dataset,
        seed: int,
        model=None,
        software_version: str | None = None,
        stored: dict | None = None,
    ):
        from soilwave import __version__

        self.samples = samples
        self.diagnostics = diagnostics
        self.priors = priors
        self.picks = picks
        self.seed = int(seed)
        self.model = model
        self.software_version = __version__ if software_version is None else software_version
        self._stored = dict(stored or {})

    # --- basic views ----------------------------------------------------------------

    @property
    def n_layers(self) -> int:
        return int(self.samples.sizes["layer"])

    @property
    def n_interfaces(self) -> int:
        return self.n_layers - 1

    @property
    def converged(self) -> bool:
        return bool(self.diagnostics.get("converged", False))

    def __repr__(self) -> str:
        d = self.diagnostics
        return (
            f"InversionResult(n_layers={self.n_layers}, n_sample={self.samples.sizes['sample']}, "
            f"converged={self.converged}, n_steps={d.get('n_steps')}, seed={self.seed})"
        )

    def default_depth(self, n: int = 201) -> np.ndarray:
        """Default depth grid, m: 0 to 1.25 x the 95th percentile of the deepest interface."""
        if self.n_interfaces == 0:
            return np.linspace(0.0, 1.0, n)
        deepest = self.samples["depth"].isel(layer=self.n_interfaces - 1).values
        z_max = 1.25 * float(np.nanquantile(deepest, 0.95))
        return np.linspace(0.0, z_max, n)

    def _check_depth(self, depth):
        depth = self.default_depth() if depth is None else np.atleast_1d(np.asarray(depth, float))
        if depth.ndim != 1 or np.any(~np.isfinite(depth)) or np.any(depth < 0):
            msg = f"depth grid must be a 1-D array of finite depths >= 0 m; got {depth!r}"
            raise InputError(msg)
        return depth

    def _profile(self, layer_values: np.ndarray, depth: np.ndarray) -> np.ndarray:
        """Per-sample layer values (S, L) mapped onto the depth grid -> (S, D)."""
        bottoms = self.samples["depth"].values[:, : self.n_interfaces]
        idx = _layer_index(bottoms, depth)
        return np.take_along_axis(layer_values, idx, axis=1)

    # --- summaries ------------------------------------------------------------------

    def summary(self, depth=None) -> xr.Dataset:
        """Posterior summary on a depth grid and per layer.

        Parameters
        ----------
        depth : array_like, optional
            Depths, m (default :meth:`default_depth`).

        Returns
        -------
        xarray.Dataset
            On ``(quantile, depth)``: ``permittivity`` and ``velocity`` quantiles
            (0.05, 0.16, 0.5, 0.84, 0.95) plus ``*_mean`` and ``*_sd`` on
            ``depth``; per layer: ``layer_permittivity``, ``layer_velocity``,
            ``layer_thickness``, ``layer_depth`` (NaN for the half-space) with
            their ``_mean`` and ``_sd``; ``time_zero`` and ``noise_scale``
            quantiles. With conductivity (joint amplitude inversion) also
            ``conductivity`` on ``(quantile, depth)``, ``layer_conductivity``
            and ``layer_attenuation`` (dB/m at the antenna frequency) per
            layer with ``_mean``/``_sd``, and the per-layer flags of
            :meth:`conductivity_constraint`.
        """
        if depth is None and "summary" in self._stored:
            return self._stored["summary"].copy()
        depth = self._check_depth(depth)
        s = self.samples
        eps = s["permittivity"].values
        vel = s["velocity"].values
        data = {}
        data.update(_quantile_stats(self._profile(eps, depth), "permittivity", "depth", depth))
        data.update(_quantile_stats(self._profile(vel, depth), "velocity", "depth", depth))
        for name in ("permittivity", "velocity", "thickness", "depth"):
            data.update(_quantile_stats(s[name].values, f"layer_{name}", "layer", None))
        for name in ("time_zero", "noise_scale"):
            stats = _quantile_stats(s[name].values, name, None, None)
            data[name] = stats[name]
        note_sigma = None
        if "conductivity" in s:
            sig = s["conductivity"].values
            data.update(_quantile_stats(self._profile(sig, depth), "conductivity", "depth", depth))
            data.update(_quantile_stats(sig, "layer_conductivity", "layer", None))
            freq = s.attrs.get("amplitude_frequency_mhz")
            if freq is not None:
                from soilwave.wave import attenuation

                att = attenuation(eps, sig, float(freq), unit="dB/m", low_loss=False)
                data.update(_quantile_stats(np.asarray(att), "layer_attenuation", "layer", None))
            for name, da in self.conductivity_constraint().data_vars.items():
                data[name] = da.drop_vars("layer")
            data["amplitude_noise_scale"] = _quantile_stats(
                s["amplitude_noise_scale"].values, "amplitude_noise_scale", None, None
            )["amplitude_noise_scale"]
        else:
            note_sigma = "conductivity not estimated: the picks carry no usable amplitudes"
        out = xr.Dataset(data, coords=_coords(depth, s["layer"].values))
        out.attrs = {
            "title": "soilwave layered-earth inversion: posterior summary",
            "n_sample": int(s.sizes["sample"]),
            "note": (
                "layer rows with NaN thickness/depth are the half-space below the deepest interface"
            ),
            "history": self.samples.attrs.get("history", ""),
        }
        if note_sigma is not None:
            out.attrs["conductivity_note"] = note_sigma
        return out

    def penetration_depth(
        self, *, noise_level=None, reflection_coefficient=0.1, quantiles=QUANTILES
    ) -> xr.DataArray:
        """Posterior penetration-depth estimate of a joint amplitude inversion.

        Each posterior draw (permittivity, conductivity, thickness and the
        reflection gain ``exp(log_gain_reflection)`` as source amplitude) goes
        through :func:`soilwave.penetration_depth` at the antenna frequency;
        see there for the assumptions (zero-offset reflection from a reference
        reflector, spreading, attenuation, transmission losses).

        Parameters
        ----------
        noise_level : float, optional
            Noise amplitude (1 sigma) in the picks' amplitude unit; default the
            pick table's ``noise_level`` attribute (set by :func:`soilwave.auto_pick`).
        reflection_coefficient : float, optional
            ``|R|`` of the reference reflector (default 0.1).
        quantiles : sequence of float or None, optional
            Posterior quantiles to return; ``None`` returns one depth per draw.

        Returns
        -------
        xarray.DataArray
            Depth, m, over ``quantile`` (or ``sample``).
        """
        from soilwave.conductivity import penetration_depth

        s = self.samples
        if "conductivity" not in s or "log_gain_reflection" not in s:
            msg = (
                "penetration_depth needs a joint inversion with reflection amplitudes "
                "(samples 'conductivity' and 'log_gain_reflection')"
            )
            raise InputError(msg)
        if noise_level is None:
            noise_level = self.picks.attrs.get("noise_level")
            if noise_level is None:
                msg = (
                    "the pick table has no 'noise_level' attribute; pass noise_level= "
                    "(noise amplitude in the picks' amplitude unit)"
                )
                raise InputError(msg)
        return penetration_depth(
            s["permittivity"],
            s["conductivity"],
            s["thickness"],
            frequency_mhz=float(s.attrs["amplitude_frequency_mhz"]),
            noise_level=float(noise_level),
            source_amplitude=np.exp(s["log_gain_reflection"]),
            reflection_coefficient=reflection_coefficient,
            low_loss=s.attrs.get("attenuation_model") == "low-loss",
            quantiles=quantiles,
        )

    def conductivity_constraint(self) -> xr.Dataset:
        """Which layers' conductivity the amplitudes constrain.

        For each layer, ``conductivity_width_ratio`` is the width of the
        central 90 % posterior interval of ``ln sigma`` over the prior's
        (``0.9 ln(max / min)`` for the log-uniform prior); a layer is
        ``conductivity_constrained`` when the ratio is below
        :data:`CONDUCTIVITY_CONSTRAINED_RATIO` (0.5). An upper bound alone
        (a nearly lossless layer whose posterior piles up at the prior's low
        end) counts as a constraint. Layers no amplitude ray reaches keep
        their prior, with a ratio near 1.

        Returns
        -------
        xarray.Dataset
            ``conductivity_width_ratio`` (layer) and ``conductivity_constrained``
            (layer, 1 = constrained, 0 = the posterior stays near the prior).

        Raises
        ------
        InputError
            When the result has no conductivity (no amplitudes were inverted).
        """
        s = self.samples
        if "conductivity" not in s:
            msg = (
                "this result has no conductivity: the picks carried no usable amplitudes "
                "(auto_pick fills the 'amplitude' column)"
            )
            raise InputError(msg)
        logs = np.log(s["conductivity"].values)
        lo, hi = np.quantile(logs, [0.05, 0.95], axis=0)
        p = self.priors
        prior_width = 0.9 * np.log(p.conductivity_max / p.conductivity_min)
        ratio = (hi - lo) / prior_width
        layer = s["layer"].values
        coords = {"layer": ("layer", layer, {"units": "1", "long_name": "layer number (1 = top)"})}
        return xr.Dataset(
            {
                "conductivity_width_ratio": (
                    "layer",
                    ratio,
                    {
                        "units": "1",
                        "long_name": (
                            "width of the 90 % posterior interval of ln(conductivity) over "
                            "the prior's"
                        ),
                    },
                ),
                "conductivity_constrained": (
                    "layer",
                    (ratio < CONDUCTIVITY_CONSTRAINED_RATIO).astype(np.int8),
                    {
                        "units": "1",
                        "long_name": "conductivity constrained by the amplitudes",
                        "flag_values": np.array([0, 1], dtype=np.int8),
                        "flag_meanings": "near_prior constrained",
                        "comment": (
                            f"constrained when conductivity_width_ratio < "
                            f"{CONDUCTIVITY_CONSTRAINED_RATIO:g}"
                        ),
                    },
                ),
            },
            coords=coords,
        )

    def water_content(self, model=None, *, depth=None) -> xr.Dataset:
        """Posterior volumetric water content per layer and on a depth grid.

        Each posterior permittivity draw goes through ``model``'s
        ``water_content_draws`` with one draw of the model's own (uncertain)
        parameters per sample, so the quantiles carry both uncertainties.

        Parameters
        ----------
        model : soilwave.petro.PetroModel, optional
            Petrophysical model; default the one given to :func:`soilwave.invert`
            (Topp et al. 1980 unless chosen otherwise).
        depth : array_like, optional
            Depth grid, m (default :meth:`default_depth`).

        Returns
        -------
        xarray.Dataset
            ``water_content`` (quantile, depth), ``water_content_mean``/``_sd``
            (depth), ``layer_water_content`` (quantile, layer) and its mean/sd,
            ``fraction_outside_valid_range`` (layer); units "1", CF standard
            name ``volume_fraction_of_condensed_water_in_soil``.
        """
        if model is None and depth is None and "water_content" in self._stored:
            return self._stored["water_content"].copy()
        if model is None:
            model = self.model
        if model is None:
            from soilwave.petro import Topp

            model = Topp()
        for attr in ("water_content_draws", "to_attrs", "valid_eps"):
            if not hasattr(model, attr):
                msg = f"model {model!r} is not a soilwave petrophysical model (no {attr!r})"
                raise InputError(msg)
        depth = self._check_depth(depth)
        eps = self.samples["permittivity"].values
        rng = np.random.default_rng(np.random.SeedSequence([self.seed, 7211]))
        theta = model.water_content_draws(eps, rng=rng, on_range="ignore")
        lo, hi = model.valid_eps
        outside = np.mean((eps < lo) | (eps > hi), axis=0)
        layers = self.samples["layer"].values
        flagged = [int(layers[i]) for i in np.flatnonzero(outside > 0.05)]
        if flagged:
            msg = (
                f"{getattr(model, 'name', type(model).__name__)}: more than 5 % of the posterior "
                f"permittivity of layer(s) {flagged} lies outside the model's valid range "
                f"{lo:g}-{hi:g}; water content there is an extrapolation"
            )
            warnings.warn(msg, RangeWarning, stacklevel=2)
        data = {}
        data.update(_quantile_stats(self._profile(theta, depth), "water_content", "depth", depth))
        data.update(_quantile_stats(theta, "layer_water_content", "layer", None))
        data["fraction_outside_valid_range"] = xr.DataArray(
            outside,
            dims=("layer",),
            attrs={
                "units": "1",
                "long_name": "fraction of permittivity draws outside the model's valid range",
            },
        )
        out = xr.Dataset(data, coords=_coords(depth, layers))
        attrs = {str(k): v for k, v in model.to_attrs().items()}
        out.attrs = {
            "title": "soilwave layered-earth inversion: posterior water content",
            **attrs,
            "caution": _CAUTION,
            "history": self.samples.attrs.get("history", ""),
        }
        return out

    def predicted_times(self, offset, phase, interface=0, *, max_draws: int = 400) -> xr.DataArray:
        """Posterior-predicted pick times (ns) of one phase at given offsets.

        Parameters
        ----------
        offset : array_like
            Offsets, m.
        phase : str
            ``'air'``, ``'ground'``, ``'reflection'`` or ``'refraction'``.
        interface : int
            Interface of a reflection or refraction.
        max_draws : int
            Posterior draws used (evenly spaced through the samples).

        Returns
        -------
        xarray.DataArray
            Times (sample, offset), ns, NaN where the phase does not exist.
        """
        from soilwave.traveltime import TravelTimeOperator

        x = np.atleast_1d(np.asarray(offset, float))
        op = TravelTimeOperator(x, [phase] * x.size, [interface] * x.size)
        n = self.samples.sizes["sample"]
        take = np.unique(np.linspace(0, n - 1, min(n, max_draws)).astype(int))
        s = self.samples.isel(sample=take)
        h = s["thickness"].values[:, : self.n_interfaces]
        t = op(h, s["velocity"].values, s["time_zero"].values)
        return xr.DataArray(
            t,
            dims=("sample", "offset"),
            coords={"offset": ("offset", x, {"units": "m"})},
            attrs={"units": "ns", "long_name": f"posterior-predicted {phase} time"},
        )

    def table(self, model=None) -> str:
        """Short text table per layer: median and central 90 % interval.

        Columns: permittivity, thickness (m), depth of the bottom (m), water
        content (m3/m3) and, after a joint amplitude inversion, conductivity
        (mS/m; "prior only" where the amplitudes do not constrain it).
        """
        s = self.summary()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RangeWarning)
            wc = self.water_content(model)

        def cell(da, layer, fmt):
            v = da.sel(layer=layer).sel(quantile=[0.05, 0.5, 0.95]).values
            if not np.all(np.isfinite(v)):
                return "half-space"
            return f"{v[1]:{fmt}} [{v[0]:{fmt}}, {v[2]:{fmt}}]"

        head = ("layer", "permittivity", "thickness m", "depth m", "water content")
        with_sigma = "layer_conductivity" in s
        if with_sigma:
            head = (*head, "conductivity mS/m")
        rows = [head]
        for layer in s["layer"].values:
            row = (
                str(int(layer)),
                cell(s["layer_permittivity"], layer, ".2f"),
                cell(s["layer_thickness"], layer, ".3f"),
                cell(s["layer_depth"], layer, ".3f"),
                cell(wc["layer_water_content"], layer, ".3f"),
            )
            if with_sigma:
                constrained = int(s["conductivity_constrained"].sel(layer=layer)) == 1
                row = (
                    *row,
                    cell(s["layer_conductivity"], layer, ".3g") if constrained else "prior only",
                )
            rows.append(row)
        widths = [max(len(r[i]) for r in rows) for i in range(len(head))]
        lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
        lines.insert(1, "  ".join("-" * w for w in widths))
        lines.append("median [5 %, 95 %] of the posterior; " + _CAUTION)
        return "\n".join(lines)

    # --- NetCDF ---------------------------------------------------------------------

    def _diagnostics_dataset(self) -> xr.Dataset:
        d = self.diagnostics
        arrays = {}
        scalars = {}
        for key, value in d.items():
            if isinstance(value, xr.DataArray):
                arrays[key] = value.drop_vars("parameter", errors="ignore").values
            elif key == "parameter":
                continue
            else:
                scalars[key] = value
        names = list(d["tau"]["parameter"].values) if isinstance(d.get("tau"), xr.DataArray) else []
        ds = xr.Dataset(
            {
                k: (
                    "parameter",
                    v,
                    {
                        "units": DIAGNOSTIC_META.get(k, ("1", k))[0],
                        "long_name": DIAGNOSTIC_META.get(k, ("1", k))[1],
                    },
                )
                for k, v in arrays.items()
            },
            coords={
                "parameter": (
                    "parameter",
                    np.asarray(names, dtype=str),
                    {"long_name": "sampling coordinate"},
                )
            },
        )
        ds.attrs = {"scalars_json": json.dumps(scalars), "title": "sampler diagnostics"}
        return ds

    def to_netcdf(self, path, *, overwrite: bool = False) -> Path:
        """Write the result to one NetCDF-4 file, atomically.

        Parameters
        ----------
        path : str or path-like
            Output file (``.nc``).
        overwrite : bool
            Replace an existing file (default False: raise
            :class:`~soilwave.errors.OutputExistsError`).

        Returns
        -------
        pathlib.Path
            The written path.
        """
        path = Path(path)
        if path.exists() and not overwrite:
            msg = (
                f"output file {str(path)!r} exists; pass overwrite=True (CLI: --overwrite) "
                "to replace it"
            )
            raise OutputExistsError(msg)
        if not path.parent.exists():
            msg = f"output folder {str(path.parent)!r} does not exist"
            raise InputError(msg)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RangeWarning)
            water = self.water_content()
        root = xr.Dataset(
            attrs={
                "title": "soilwave layered-earth inversion result",
                "Conventions": "CF-1.10",
                "format": _FORMAT,
                "software": "soilwave",
                "software_version": self.software_version,
                "seed": str(self.seed),
                "caution": _CAUTION,
                **self.priors.to_attrs(),
                "history": self.samples.attrs.get("history", ""),
            }
        )
        tree = xr.DataTree.from_dict(
            {
                "/": root,
                "/samples": self.samples,
                "/summary": self.summary(),
                "/water_content": water,
                "/diagnostics": self._diagnostics_dataset(),
                "/picks": _netcdf_safe(self.picks),
            }
        )
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
        os.close(fd)
        try:
            tree.to_netcdf(tmp, engine="h5netcdf", mode="w")
            os.replace(tmp, path)
        finally:
            if os.path.exists(tmp):
                os.remove(tmp)
        return path


def _netcdf_safe(ds: xr.Dataset) -> xr.Dataset:
    """Copy with attributes NetCDF can hold (bool -> int, None -> '', others -> str)."""
    out = ds.copy()

    def fix(attrs):
        clean = {}
        for k, v in attrs.items():
            if isinstance(v, bool):
                clean[k] = int(v)
            elif v is None:
                clean[k] = ""
            elif isinstance(v, str | int | float | np.number | np.ndarray):
                clean[k] = v
            else:
                clean[k] = json.dumps(v, default=str)
        return clean

    out.attrs = fix(out.attrs)
    for name in out.variables:
        out[name].attrs = fix(out[name].attrs)
    return out


def read_result(path) -> InversionResult:
    """Read a result written by :meth:`InversionResult.to_netcdf`.

    Parameters
    ----------
    path : str or path-like
        NetCDF file.

    Returns
    -------
    InversionResult
        With samples, summary, water content, diagnostics, priors, picks,
        seed and software version as written.
    """
    path = Path(path)
    if not path.is_file():
        msg = f"result file {str(path)!r} does not exist"
        raise InputError(msg)
    try:
        tree = xr.open_datatree(path, engine="h5netcdf")
    except (OSError, ValueError) as exc:
        msg = f"{path}: not a readable NetCDF-4 file ({exc}); expected a soilwave inversion result"
        raise FileFormatError(msg) from None
    try:
        attrs = dict(tree.attrs)
        if attrs.get("format") != _FORMAT:
            msg = (
                f"{path}: attribute 'format' is {attrs.get('format')!r}; expected {_FORMAT!r} "
                "(a file written by InversionResult.to_netcdf)"
            )
            raise FileFormatError(msg)
        groups = {}
        for name in ("samples", "summary", "water_content", "diagnostics", "picks"):
            if name not in tree.children:
                msg = f"{path}: group '/{name}' is missing; expected a soilwave inversion result"
                raise FileFormatError(msg)
            groups[name] = tree[name].to_dataset().load()
    finally:
        tree.close()
    diag_ds = groups["diagnostics"]
    diagnostics = json.loads(diag_ds.attrs["scalars_json"])
    names = [str(n) for n in diag_ds["parameter"].values]
    for key in diag_ds.data_vars:
        diagnostics[key] = diag_ds[key].copy()
    diagnostics["parameter"] = names
    return InversionResult(
        groups["samples"],
        diagnostics,
        priors=Priors.from_attrs(attrs),
        picks=groups["picks"],
        seed=int(attrs["seed"]),
        model=None,
        software_version=str(attrs.get("software_version")),
        stored={"summary": groups["summary"], "water_content": groups["water_content"]},
    )
