"""Bayesian layered-earth inversion of multi-offset GPR travel-time picks.

:func:`invert` is the main entry point: picks in, :class:`~soilwave.result.InversionResult`
out. The model (see :mod:`soilwave.posterior` and :mod:`soilwave.priors`):
``n_interfaces`` horizontal interfaces over a half-space, each layer with a
relative permittivity, each layer above the half-space with a thickness, a
common time-zero shift and a pick-noise scale. The number of interfaces is the
highest interface referenced by the reflection and refraction picks. The
half-space's permittivity is constrained only by refractions along the deepest
interface; without them its posterior is its prior.

When the picks carry amplitudes (``amplitude`` column, e.g. from
:func:`soilwave.auto_pick`), travel times and log-amplitudes are inverted
jointly (see :mod:`soilwave.posterior`): each layer gains a conductivity
(mS/m, log-uniform prior) and each wave family a log gain. Layers no
amplitude ray crosses keep their prior; the result flags every layer whose
conductivity the data constrain (:meth:`InversionResult.conductivity_constraint`).
"""

from __future__ import annotations

import datetime as _dt
import warnings

import numpy as np
import xarray as xr

from soilwave.errors import InputError, SoilwaveError
from soilwave.posterior import AMPLITUDE_ERROR_FLOOR, AMPLITUDE_RELATIVE_ERROR, LogPosterior
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


def _conductivity_start(posterior: LogPosterior, permittivity_1: float) -> float:
    """Starting conductivity (mS/m) from the decay of the ground-wave amplitudes.

    ``ln(A x^2) = g - alpha_1 x`` (:mod:`soilwave.amplitude`) is fitted by
    weighted least squares and ``alpha_1`` converted with the low-loss
    attenuation of layer 1; without two ground-wave amplitudes, or for a
    non-positive slope, the geometric middle of the prior bounds.
    """
    from soilwave.wave import attenuation

    p = posterior.priors
    default = float(np.sqrt(p.conductivity_min * p.conductivity_max))
    term = posterior.amplitude_term
    op = term.operator
    ground = op.phase == "ground"
    if np.unique(op.offset[ground]).size < 2:
        return default
    x = op.offset[ground]
    y = term.log_amplitude[ground] + 2.0 * np.log(x)
    w = 1.0 / term.error[ground] ** 2
    slope = np.polyfit(x, y, 1, w=np.sqrt(w))[0]
    eps1 = float(np.clip(permittivity_1, 1.0, None))
    per_ms = float(attenuation(eps1, 1.0, op.frequency_mhz, low_loss=True))  # Np/m per mS/m
    sigma = -slope / per_ms if np.isfinite(slope) and slope < 0 else default
    lo, hi = p.conductivity_min, p.conductivity_max
    return float(np.clip(sigma, lo * 1.01, hi / 1.01))


def _half_space_starts(posterior: LogPosterior, params: dict) -> list:
    """Starting vectors on both sides of the deepest reflector's contrast.

    Travel times say nothing about the half-space permittivity (without
    refractions) and the NMO/Dix model copies the layer above, a zero
    reflection coefficient. Picked amplitudes are envelopes without polarity,
    so a wetter and a drier half-space can both explain them: start least
    squares from each (2.5 times and 1 / 2.5 times the layer above, inside the
    prior) and let the better fit win.
    """
    p = posterior.priors
    k = posterior.n_interfaces
    op = posterior.amplitude_term.operator
    reached = k > 0 and np.any((op.phase == "reflection") & (op.interface == k))
    if not reached:
        return [posterior.from_physical(params)]
    out = []
    for factor in (2.5, 1.0 / 2.5):
        eps = np.array(params["permittivity"], dtype=float)
        eps[k] = np.clip(eps[k - 1] * factor, p.permittivity_min * 1.01, p.permittivity_max / 1.01)
        out.append(posterior.from_physical({**params, "permittivity": eps}))
    return out


def _amplitude_variables(posterior: LogPosterior, phys: dict, seed: int, n_s: int) -> dict:
    """Conductivity (all layers), amplitude-noise scale and gain draws for the samples."""
    p = posterior.priors
    n_l, n_c = posterior.n_layers, posterior.n_conductivity
    rng = np.random.default_rng(np.random.SeedSequence([seed, 5150]))
    sigma = np.empty((n_s, n_l))
    sigma[:, :n_c] = phys["conductivity"]
    lo, hi = np.log(p.conductivity_min), np.log(p.conductivity_max)
    # layers no amplitude ray crosses: their posterior is the prior (independent draws)
    sigma[:, n_c:] = np.exp(rng.uniform(lo, hi, size=(n_s, n_l - n_c)))
    term = posterior.amplitude_term
    gains = term.gain_draws(phys, rng)
    out = {
        "conductivity": (
            ("sample", "layer"),
            sigma,
            {
                "units": "mS/m",
                "long_name": "electrical conductivity",
                "comment": (
                    f"layers 1-{n_c} from the joint travel-time and amplitude posterior; "
                    f"deeper layers are not reached by any amplitude ray and are draws "
                    f"from the prior (log-uniform {p.conductivity_min:g}-"
                    f"{p.conductivity_max:g} mS/m)"
                    if n_c < n_l
                    else "joint travel-time and amplitude posterior"
                ),
            },
        ),
        "amplitude_noise_scale": (
            ("sample",),
            np.asarray(phys["amplitude_noise_scale"], float),
            {"units": "1", "long_name": "scale factor on the log-amplitude uncertainties"},
        ),
    }
    for j, fam in enumerate(term.families):
        out[f"log_gain_{fam}"] = (
            ("sample",),
            gains[:, j],
            {
                "units": "1",
                "long_name": f"natural-log amplitude gain of the {fam} wave",
                "comment": "drawn from its Gaussian conditional posterior given the sample",
            },
        )
    return out


def _samples_dataset(
    posterior: LogPosterior, run, history: str, seed: int = 0, extra_attrs=None
) -> xr.Dataset:
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
    if posterior.amplitude_term is not None:
        for name, value in _amplitude_variables(posterior, phys, seed, n_s).items():
            ds[name] = value
    ds.attrs = {
        "title": "soilwave layered-earth inversion: posterior draws",
        "n_interfaces": int(n_i),
        **(extra_attrs or {}),
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
    amplitudes: bool | None = None,
    amplitude_relative_error: float = AMPLITUDE_RELATIVE_ERROR,
    amplitude_error_floor: float = AMPLITUDE_ERROR_FLOOR,
    low_loss: bool = False,
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
    amplitudes : bool or None
        Joint inversion of amplitudes for conductivity: ``None`` (default)
        when the picks carry amplitudes of ground or reflected waves,
        ``True`` to require them, ``False`` for travel times only.
    amplitude_relative_error : float
        Relative error of amplitudes without ``amplitude_sigma`` (default 0.1).
    amplitude_error_floor : float
        Relative error added in quadrature to every amplitude (default 0.05).
    low_loss : bool
        Use the low-loss attenuation limit in the amplitude model (default:
        exact plane-wave attenuation at the picks' ``frequency_mhz``).

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
    posterior = LogPosterior(
        used,
        priors=priors,
        amplitudes=amplitudes,
        amplitude_relative_error=amplitude_relative_error,
        amplitude_error_floor=amplitude_error_floor,
        low_loss=low_loss,
    )

    starts = []
    try:
        start = initial_model(
            used,
            n_interfaces=posterior.n_interfaces,
            permittivity_bounds=(priors.permittivity_min, priors.permittivity_max),
            thickness_bounds=(priors.min_thickness, priors.max_thickness),
        )
        h = np.clip(start["thickness"], priors.min_thickness, priors.max_thickness)
        eps0 = np.asarray(start["permittivity"], float)
        params = {
            "permittivity": eps0,
            "thickness": np.asarray(h, float),
            "time_zero": float(start["time_zero"]),
            "noise_scale": 1.0,
        }
        if posterior.amplitude_term is None:
            starts.append(posterior.from_physical(params))
        else:
            sigma0 = _conductivity_start(posterior, float(eps0[0]))
            params["conductivity"] = np.full(posterior.n_conductivity, sigma0)
            params["amplitude_noise_scale"] = 1.0
            starts.extend(_half_space_starts(posterior, params))
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
    extra_attrs = {}
    if posterior.amplitude_term is not None:
        line = line[:-1] + (
            f", amplitudes=True, amplitude_relative_error={amplitude_relative_error:g}, "
            f"amplitude_error_floor={amplitude_error_floor:g}, low_loss={bool(low_loss)})"
        )
        extra_attrs = {
            "conductivity_sampled_layers": int(posterior.n_conductivity),
            "amplitude_frequency_mhz": float(posterior.amplitude_term.operator.frequency_mhz),
            "amplitude_relative_error": float(amplitude_relative_error),
            "amplitude_error_floor": float(amplitude_error_floor),
            "attenuation_model": "low-loss" if low_loss else "exact plane wave",
        }
    history = f"{history}\n{line}" if history else line
    samples = _samples_dataset(posterior, run, history, seed, extra_attrs)
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
    diagnostics["n_amplitude_pick"] = (
        0 if posterior.amplitude_term is None else int(posterior.amplitude_term.n)
    )
    return InversionResult(
        samples,
        diagnostics,
        priors=priors,
        picks=picks,
        seed=seed,
        model=model,
        software_version=__version__,
    )
