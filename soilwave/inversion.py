"""Bayesian layered-earth inversion of multi-offset GPR travel-time picks.

:func:`invert` is the main entry point: picks in, :class:`~soilwave.result.InversionResult`
out. The model (see :mod:`soilwave.posterior` and :mod:`soilwave.priors`):
``n_interfaces`` horizontal interfaces over a half-space, each layer with a
relative permittivity, each layer above the half-space with a thickness, a
common time-zero shift and a pick-noise scale. The number of interfaces is the
highest interface referenced by the reflection and refraction picks. The
half-space's permittivity is constrained only by refractions along the deepest
interface; without them its posterior is its prior.
"""

from __future__ import annotations

import datetime as _dt
import warnings

import numpy as np
import xarray as xr

from soilwave.errors import InputError, SoilwaveError
from soilwave.posterior import LogPosterior
from soilwave.priors import Priors
from soilwave.result import _META, DIAGNOSTIC_META, InversionResult
from soilwave.sampling import run_inversion_sampler

__all__ = ["invert"]

_MODELLED = ("air", "ground", "reflection", "refraction")


def _select_modelled(picks: xr.Dataset) -> xr.Dataset:
    phase = np.asarray(picks["phase"].values).astype(str)
    keep = np.isin(phase, _MODELLED)
    if not np.all(keep):
        dropped = sorted(set(phase[~keep].tolist()))
        msg = (
            f"{int((~keep).sum())} pick(s) of phase(s) {dropped} are not used by the "
            f"travel-time inversion (it models {list(_MODELLED)})"
        )
        warnings.warn(msg, UserWarning, stacklevel=3)
        picks = picks.isel(pick=np.flatnonzero(keep))
    if picks.sizes.get("pick", 0) == 0:
        msg = "the pick table holds no air, ground, reflection or refraction picks to invert"
        raise InputError(msg)
    return picks


def _samples_dataset(posterior: LogPosterior, run, history: str) -> xr.Dataset:
    phys = posterior.to_physical(run.samples)
    n_s = run.samples.shape[0]
    n_l, n_i = posterior.n_layers, posterior.n_interfaces
    thickness = np.full((n_s, n_l), np.nan)
    thickness[:, :n_i] = phys["thickness"]
    depth = np.full((n_s, n_l), np.nan)
    depth[:, :n_i] = np.cumsum(phys["thickness"], axis=1)

    def var(name, values, dims, extra=None):
        units, long_name = _META[name]
        return (dims, values, {"units": units, "long_name": long_name, **(extra or {})})

    ds = xr.Dataset(
        {
            "permittivity": var("permittivity", phys["permittivity"], ("sample", "layer")),
            "velocity": var("velocity", phys["velocity"], ("sample", "layer")),
            "thickness": var(
                "thickness", thickness, ("sample", "layer"), {"comment": "NaN for the half-space"}
            ),
            "depth": var(
                "depth",
                depth,
                ("sample", "layer"),
                {"comment": "NaN for the half-space", "positive": "down"},
            ),
            "time_zero": var("time_zero", phys["time_zero"], ("sample",)),
            "noise_scale": var("noise_scale", phys["noise_scale"], ("sample",)),
            "log_posterior": (
                ("sample",),
                run.log_prob,
                {"units": "1", "long_name": "log posterior density (sampling coordinates)"},
            ),
        },
        coords={
            "layer": (
                "layer",
                np.arange(1, n_l + 1),
                {"units": "1", "long_name": "layer number (1 = top)"},
            ),
            "walker": ("sample", run.walker, {"units": "1", "long_name": "emcee walker"}),
            "step": ("sample", run.step, {"units": "1", "long_name": "chain step"}),
        },
    )
    ds.attrs = {
        "title": "soilwave layered-earth inversion: posterior draws",
        "n_interfaces": int(n_i),
        "history": history,
    }
    return ds


def invert(
    picks: xr.Dataset,
    *,
    seed: int | None = None,
    model=None,
    priors: Priors | None = None,
    n_walkers: int = 32,
    max_steps: int = 20000,
    tau_factor: float = 50.0,
    progress: bool = False,
) -> InversionResult:
    """Posterior of a layered earth from multi-offset travel-time picks.

    Parameters
    ----------
    picks : xarray.Dataset
        Pick table (:func:`soilwave.read_picks`, :func:`soilwave.make_picks`):
        ``offset`` m, ``time`` ns, ``sigma`` ns, ``phase``, ``interface``.
        Diffraction picks are ignored with a warning.
    seed : int, optional
        Seed of every random number of the run (least-squares starts, initial
        ensemble, emcee moves). ``None`` draws one from the operating system
        and records it in the result, so any run can be repeated.
    model : soilwave.petro.PetroModel, optional
        Water-content model used by :meth:`InversionResult.water_content`;
        default :class:`soilwave.Topp` (Topp et al. 1980).
    priors : Priors, optional
        Priors (default :class:`soilwave.Priors()`; see :mod:`soilwave.priors`).
    n_walkers : int
        emcee walkers (raised to at least ``2 * ndim + 2``).
    max_steps : int
        Step cap; a run stopped by it is flagged not converged with a
        :class:`~soilwave.errors.ConvergenceWarning`.
    tau_factor : float
        Chain length target in autocorrelation times (default 50).
    progress : bool
        Show a progress bar.

    Returns
    -------
    InversionResult

    Examples
    --------
    >>> import numpy as np, soilwave as sw
    >>> x = np.tile(np.linspace(0.5, 3.0, 8), 2)
    >>> ph = ["ground"] * 8 + ["reflection"] * 8
    >>> t = sw.TravelTimeOperator(x, ph, [0] * 8 + [1] * 8)([0.6], [0.1, 0.08], 0.0)
    >>> picks = sw.make_picks(x, t, ph, interface=[0] * 8 + [1] * 8, sigma=0.3)
    >>> res = sw.invert(picks, seed=0)
    >>> res.samples["thickness"].sizes["layer"]
    2
    """
    from soilwave import __version__
    from soilwave.initial_model import initial_model
    from soilwave.picks import validate_picks

    if not isinstance(picks, xr.Dataset):
        msg = f"picks must be an xarray.Dataset pick table; got {type(picks).__name__}"
        raise InputError(msg)
    if seed is not None and (
        isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0
    ):
        msg = f"seed={seed!r} must be a non-negative integer or None"
        raise InputError(msg)
    priors = Priors() if priors is None else priors
    if not isinstance(priors, Priors):
        msg = f"priors must be a soilwave.Priors; got {type(priors).__name__}"
        raise InputError(msg)
    if model is None:
        from soilwave.petro import Topp

        model = Topp()
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2**63))
    seed = int(seed)

    picks = validate_picks(picks)
    used = _select_modelled(picks)
    posterior = LogPosterior(used, priors=priors)

    starts = []
    try:
        start = initial_model(
            used,
            n_interfaces=posterior.n_interfaces,
            permittivity_bounds=(priors.permittivity_min, priors.permittivity_max),
            thickness_bounds=(priors.min_thickness, priors.max_thickness),
        )
        h = np.clip(start["thickness"], priors.min_thickness, priors.max_thickness)
        starts.append(
            posterior.from_physical(
                {
                    "permittivity": np.asarray(start["permittivity"], float),
                    "thickness": np.asarray(h, float),
                    "time_zero": float(start["time_zero"]),
                    "noise_scale": 1.0,
                }
            )
        )
    except SoilwaveError as exc:
        msg = f"NMO/Dix starting model failed ({exc}); starting from prior draws only"
        warnings.warn(msg, UserWarning, stacklevel=2)

    run = run_inversion_sampler(
        posterior,
        starts=starts,
        seed=seed,
        n_walkers=n_walkers,
        max_steps=max_steps,
        tau_factor=tau_factor,
        progress=progress,
    )
    stamp = _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()
    history = picks.attrs.get("history", "")
    line = (
        f"{stamp} soilwave {__version__} invert(seed={seed}, "
        f"n_walkers={run.diagnostics['n_walkers']}, "
        f"max_steps={max_steps}, tau_factor={tau_factor:g})"
    )
    history = f"{history}\n{line}" if history else line
    samples = _samples_dataset(posterior, run, history)
    diagnostics = dict(run.diagnostics)
    names = diagnostics["parameter"]
    for key in ("tau", "ess", "rhat"):
        diagnostics[key] = xr.DataArray(
            np.asarray(diagnostics[key], float),
            dims=("parameter",),
            coords={
                "parameter": (
                    "parameter",
                    np.asarray(names, dtype=str),
                    {"long_name": "sampling coordinate"},
                )
            },
            attrs={"units": DIAGNOSTIC_META[key][0], "long_name": DIAGNOSTIC_META[key][1]},
            name=key,
        )
    diagnostics["time_zero_prior_mean"] = float(posterior.time_zero_mean)
    diagnostics["n_pick"] = int(used.sizes["pick"])
    return InversionResult(
        samples,
        diagnostics,
        priors=priors,
        picks=picks,
        seed=seed,
        model=model,
        software_version=__version__,
    )
