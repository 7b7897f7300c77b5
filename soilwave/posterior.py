"""Vectorised log-posterior of the layered-earth travel-time inversion.

One call evaluates a whole walker ensemble (``x`` of shape ``(n_walkers, ndim)``)
with one batched call of :class:`soilwave.traveltime.TravelTimeOperator`, as
emcee's ``vectorize=True`` expects.

Sampling parameterisation
-------------------------
The sampler does not move in the physical parameters directly. It uses
coordinates in which the posterior of a multi-offset gather is closer to an
uncorrelated Gaussian:

``log_permittivity`` (one per layer)
    ``a_l = ln eps_l`` (equivalently log slowness: ``ln(1/v) = a/2 - ln c``).
``log_vertical_time`` (one per layer above the half-space)
    ``b_l = ln tau_l`` with ``tau_l = 2 h_l / v_l`` the vertical two-way time
    through layer ``l`` in ns. Zero-offset reflection times pin ``tau`` down
    almost independently of velocity, which moveout constrains; sampling
    ``(ln eps, ln tau)`` removes most of the strong thickness-velocity
    correlation of ``(eps, h)``.
``time_zero``
    The common time shift, ns (unchanged).
``log_noise_scale``
    ``ln s`` of the pick-noise scale (only when the priors let it vary).

Priors are stated in physical units (:mod:`soilwave.priors`); the log
Jacobian of the map ``x -> (eps, h, t0, s)`` is added so that sampling in
``x`` targets exactly the posterior of the physical parameters:
``d eps_l / d a_l = eps_l``; ``h_l = c tau_l / (2 sqrt(eps_l))`` so, with
``eps`` held fixed, ``d h_l / d b_l = h_l`` (the matrix is triangular);
``d s / d ln s = s``. Hence ``log|J| = sum ln eps + sum ln h + ln s``.

Likelihood
----------
Independent Gaussian pick errors with standard deviation ``sigma_i * s``::

    ln L = -1/2 sum ((t_pred,i - t_obs,i) / (sigma_i s))^2 - sum ln(sigma_i s) - n/2 ln(2 pi)

A model in which an observed phase does not exist (NaN predicted time, such
as a head wave under a slower layer) has zero likelihood.

Extending the model
-------------------
Parameters are kept in a registry of :class:`ParameterBlock` objects (name,
size, labels, a transform to physical quantities with its log Jacobian), and
the likelihood is a list of terms, each a callable of the physical-parameter
dictionary. A later model (conductivity per layer, amplitude gains) adds
blocks and terms; positions in ``x`` always come from ``LogPosterior.slices``.

Examples
--------
>>> import numpy as np, xarray as xr
>>> from soilwave.posterior import LogPosterior
>>> from soilwave.priors import Priors
>>> picks = xr.Dataset({"offset": ("pick", [1.0, 2.0, 1.0, 2.0]),
...                     "time": ("pick", [10.0, 20.0, 22.4, 26.7]),
...                     "sigma": ("pick", [0.3] * 4),
...                     "phase": ("pick", ["ground", "ground", "reflection", "reflection"]),
...                     "interface": ("pick", [0, 0, 1, 1])})
>>> post = LogPosterior(picks, priors=Priors(time_zero_mean=0.0))
>>> post.names  # doctest: +NORMALIZE_WHITESPACE
['log_permittivity[1]', 'log_permittivity[2]', 'log_vertical_time[1]',
 'time_zero', 'log_noise_scale']
>>> x = post.from_physical({"permittivity": [[9.0, 16.0]], "thickness": [[1.0]],
...                         "time_zero": [0.0], "noise_scale": [1.0]})
>>> bool(np.isfinite(post(x)[0]))
True
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping

import numpy as np

from soilwave.errors import InputError
from soilwave.priors import Priors
from soilwave.traveltime import TravelTimeOperator
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["LogPosterior", "ParameterBlock", "TravelTimeLikelihood"]

_LOG_2PI = math.log(2.0 * math.pi)


@dataclasses.dataclass(frozen=True)
class ParameterBlock:
    """One named group of sampling coordinates.

    Attributes
    ----------
    name : str
        Block name, e.g. ``"log_permittivity"``.
    labels : tuple of str
        One label per coordinate, e.g. ``("log_permittivity[1]", ...)``.
    physical : str
        Name of the physical quantity it maps to.
    to_physical : callable
        ``f(z, phys) -> log_jacobian``: reads the block's coordinates ``z``
        (shape ``(..., size)``), writes its physical quantity into the dict
        ``phys`` (earlier blocks already there) and returns ``log|dphys/dz|``.
    from_physical : callable
        ``g(phys) -> z``, the inverse map.
    """

    name: str
    labels: tuple
    physical: str
    to_physical: Callable
    from_physical: Callable

    @property
    def size(self) -> int:
        return len(self.labels)


class TravelTimeLikelihood:
    """Gaussian likelihood of picked travel times (see the module docstring).

    Parameters
    ----------
    operator : soilwave.traveltime.TravelTimeOperator
        Forward operator of the picks.
    time, sigma : array_like
        Observed pick times and their 1-sigma uncertainties, ns, shape ``(n_pick,)``.
    """

    name = "traveltime"

    def __init__(self, operator: TravelTimeOperator, time, sigma):
        self.operator = operator
        self.time = np.asarray(time, dtype=float).copy()
        self.sigma = np.asarray(sigma, dtype=float).copy()
        self._sum_log_sigma = float(np.sum(np.log(self.sigma)))
        self.n = self.time.size

    def predict(self, phys: Mapping) -> np.ndarray:
        """Predicted pick times, ns, shape ``(..., n_pick)``."""
        return self.operator(phys["thickness"], phys["velocity"], phys["time_zero"])

    def normalised_residuals(self, phys: Mapping) -> np.ndarray:
        """``(t_pred - t_obs) / sigma``, without the noise scale; NaN where undefined."""
        return (self.predict(phys) - self.time) / self.sigma

    def __call__(self, phys: Mapping) -> np.ndarray:
        r = self.normalised_residuals(phys)
        s = np.asarray(phys["noise_scale"], dtype=float)
        chi2 = np.sum(r * r, axis=-1)
        ll = -0.5 * chi2 / (s * s) - self._sum_log_sigma - self.n * np.log(s)
        ll = ll - 0.5 * self.n * _LOG_2PI
        return np.where(np.isfinite(ll), ll, -np.inf)


class LogPosterior:
    """Log posterior density of a layered earth given a pick table.

    Parameters
    ----------
    picks : xarray.Dataset
        Pick table along ``pick`` with ``offset`` (m), ``time`` (ns),
        ``sigma`` (ns), ``phase``, ``interface``; only phases the forward
        model predicts (air, ground, reflection, refraction).
    n_interfaces : int, optional
        Number of interfaces; default the highest interface in the picks.
    priors : Priors, optional
        Priors in physical units; default :class:`soilwave.priors.Priors()`.

    Attributes
    ----------
    blocks : list of ParameterBlock
        Parameter registry in dependency order.
    names : list of str
        Labels of the sampling coordinates, in order.
    slices : dict
        Block name -> slice into the sampling vector.
    ndim : int
        Number of sampling coordinates.
    time_zero_mean : float
        Resolved centre of the time-zero prior, ns.
    terms : list
        Likelihood terms (callables of the physical-parameter dict).
    """

    def __init__(self, picks, *, n_interfaces: int | None = None, priors: Priors | None = None):
        self.priors = Priors() if priors is None else priors
        if not isinstance(self.priors, Priors):
            msg = f"priors must be a soilwave.priors.Priors; got {type(self.priors).__name__}"
            raise InputError(msg)
        for name in ("offset", "time", "sigma", "phase", "interface"):
            if name not in picks:
                msg = (
                    f"pick table has no variable {name!r}; expected offset, time, sigma, "
                    "phase, interface"
                )
                raise InputError(msg)
        op = TravelTimeOperator.from_picks(picks)
        k = op.n_interfaces if n_interfaces is None else int(n_interfaces)
        if k < op.n_interfaces:
            msg = (
                f"n_interfaces={k} but the picks reference interface {op.n_interfaces}; "
                f"expected n_interfaces >= {op.n_interfaces}"
            )
            raise InputError(msg)
        sigma = np.asarray(picks["sigma"].values, dtype=float)
        if np.any(~np.isfinite(sigma) | (sigma <= 0)):
            i = int(np.flatnonzero(~np.isfinite(sigma) | (sigma <= 0))[0])
            msg = f"pick {i}: sigma {sigma[i]!r} ns is not a positive finite number"
            raise InputError(msg)
        self.n_interfaces = k
        self.n_layers = k + 1
        self.operator = op
        self.time_zero_mean = self.priors.resolve_time_zero_mean(picks)
        self.terms = [TravelTimeLikelihood(op, picks["time"].values, sigma)]
        self.blocks = self._default_blocks()
        self._index()

    # --- parameter registry -----------------------------------------------------

    def _default_blocks(self) -> list[ParameterBlock]:
        n_l, n_i = self.n_layers, self.n_interfaces

        def eps_fwd(z, phys):
            eps = np.exp(z)
            phys["permittivity"] = eps
            phys["velocity"] = SPEED_OF_LIGHT / np.sqrt(eps)
            return np.sum(z, axis=-1)

        def eps_inv(phys):
            return np.log(np.asarray(phys["permittivity"], dtype=float))

        def tau_fwd(z, phys):
            tau = np.exp(z)
            h = 0.5 * tau * phys["velocity"][..., :n_i]
            phys["thickness"] = h
            phys["vertical_time"] = tau
            return np.sum(np.log(h), axis=-1) if n_i else np.zeros(z.shape[:-1])

        def tau_inv(phys):
            eps = np.asarray(phys["permittivity"], dtype=float)[..., :n_i]
            h = np.asarray(phys["thickness"], dtype=float)[..., :n_i]
            return np.log(2.0 * h * np.sqrt(eps) / SPEED_OF_LIGHT)

        def t0_fwd(z, phys):
            phys["time_zero"] = z[..., 0]
            return np.zeros(z.shape[:-1])

        def t0_inv(phys):
            return np.asarray(phys["time_zero"], dtype=float)[..., None]

        def s_fwd(z, phys):
            phys["noise_scale"] = np.exp(z[..., 0])
            return z[..., 0]

        def s_inv(phys):
            return np.log(np.asarray(phys["noise_scale"], dtype=float))[..., None]

        blocks = [
            ParameterBlock(
                "log_permittivity",
                tuple(f"log_permittivity[{i}]" for i in range(1, n_l + 1)),
                "permittivity",
                eps_fwd,
                eps_inv,
            ),
            ParameterBlock(
                "log_vertical_time",
                tuple(f"log_vertical_time[{i}]" for i in range(1, n_i + 1)),
                "thickness",
                tau_fwd,
                tau_inv,
            ),
            ParameterBlock("time_zero", ("time_zero",), "time_zero", t0_fwd, t0_inv),
        ]
        if self.priors.sample_noise_scale:
            blocks.append(
                ParameterBlock("log_noise_scale", ("log_noise_scale",), "noise_scale", s_fwd, s_inv)
            )
        return blocks

    def _index(self) -> None:
        self.slices = {}
        self.names = []
        start = 0
        for b in self.blocks:
            self.slices[b.name] = slice(start, start + b.size)
            self.names.extend(b.labels)
            start += b.size
        self.ndim = start

    def add_block(self, block: ParameterBlock, log_prior: Callable | None = None) -> None:
        """Append a parameter block (for model extensions); ``log_prior(phys)`` adds its prior."""
        if block.name in self.slices:
            msg = f"parameter block {block.name!r} already exists; names: {list(self.slices)}"
            raise InputError(msg)
        self.blocks.append(block)
        self._extra_priors = [*getattr(self, "_extra_priors", []), log_prior]
        self._index()

    # --- transforms -------------------------------------------------------------

    def _as_x(self, x) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        if x.shape[-1:] != (self.ndim,):
            msg = (
                f"parameter vector has shape {x.shape}; expected (..., {self.ndim}) ({self.names})"
            )
            raise InputError(msg)
        return x

    def to_physical(self, x) -> dict:
        """Physical parameters of sampling vectors ``x`` (shape ``(..., ndim)``).

        Returns a dict with ``permittivity`` (..., n_layers), ``velocity``
        (m/ns), ``thickness`` (..., n_interfaces) m, ``vertical_time`` ns,
        ``time_zero`` ns, ``noise_scale`` and ``log_jacobian``.
        """
        x = self._as_x(x)
        phys = {}
        logj = np.zeros(x.shape[:-1])
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for b in self.blocks:
                logj = logj + b.to_physical(x[..., self.slices[b.name]], phys)
        if "noise_scale" not in phys:
            phys["noise_scale"] = np.ones(x.shape[:-1])
        phys["log_jacobian"] = logj
        return phys

    def from_physical(self, params: Mapping) -> np.ndarray:
        """Sampling vectors of physical parameters (inverse of :meth:`to_physical`)."""
        params = dict(params)
        eps = np.asarray(params["permittivity"], dtype=float)
        batch = eps.shape[:-1]
        params.setdefault("noise_scale", np.ones(batch))
        parts = []
        for b in self.blocks:
            z = np.asarray(b.from_physical(params), dtype=float)
            parts.append(np.broadcast_to(z, (*batch, b.size)))
        return np.concatenate(parts, axis=-1)

    # --- densities --------------------------------------------------------------

    def log_prior(self, x, *, phys: dict | None = None) -> np.ndarray:
        """Log prior density of the sampling coordinates (physical prior + log Jacobian)."""
        phys = self.to_physical(x) if phys is None else phys
        lp = self.priors.log_prob(phys, time_zero_mean=self.time_zero_mean)
        for extra in getattr(self, "_extra_priors", []):
            if extra is not None:
                lp = lp + extra(phys)
        return lp + phys["log_jacobian"]

    def log_likelihood(self, x, *, phys: dict | None = None) -> np.ndarray:
        """Sum of the likelihood terms."""
        phys = self.to_physical(x) if phys is None else phys
        ll = 0.0
        for term in self.terms:
            ll = ll + term(phys)
        return ll

    def __call__(self, x) -> np.ndarray:
        """Log posterior (unnormalised) of a batch ``x`` of shape ``(n, ndim)``."""
        x = self._as_x(x)
        batch = x.shape[:-1]
        flat = x.reshape(-1, self.ndim)
        phys = self.to_physical(flat)
        lp = self.log_prior(flat, phys=phys)
        lp = np.where(np.isfinite(lp), lp, -np.inf)
        ok = np.flatnonzero(lp > -np.inf)
        out = np.full(flat.shape[0], -np.inf)
        if ok.size:
            sub = {k: v[ok] for k, v in phys.items()}
            ll = self.log_likelihood(flat[ok], phys=sub)
            out[ok] = np.where(np.isfinite(ll), lp[ok] + ll, -np.inf)
        return out.reshape(batch)

    def predicted_times(self, x) -> np.ndarray:
        """Predicted pick times (ns) of sampling vectors ``x``."""
        return self.terms[0].predict(self.to_physical(x))

    def residuals(self, x, *, fill: float = 1e3) -> np.ndarray:
        """Normalised pick residuals plus the time-zero prior, for least squares.

        NaN residuals (a phase that does not exist in the model) become ``fill``.
        """
        phys = self.to_physical(x)
        r = self.terms[0].normalised_residuals(phys)
        r = np.where(np.isfinite(r), r, fill)
        r0 = (phys["time_zero"] - self.time_zero_mean) / self.priors.time_zero_sd
        return np.concatenate([r, np.asarray(r0)[..., None]], axis=-1)

    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """Box bounds of the sampling coordinates implied by the priors (for least squares)."""
        p = self.priors
        lo = np.full(self.ndim, -np.inf)
        hi = np.full(self.ndim, np.inf)
        s = self.slices["log_permittivity"]
        lo[s], hi[s] = math.log(p.permittivity_min), math.log(p.permittivity_max)
        s = self.slices["log_vertical_time"]
        lo[s] = math.log(2 * p.min_thickness * math.sqrt(p.permittivity_min) / SPEED_OF_LIGHT)
        hi[s] = math.log(2 * p.max_thickness * math.sqrt(p.permittivity_max) / SPEED_OF_LIGHT)
        if "log_noise_scale" in self.slices:
            s = self.slices["log_noise_scale"]
            lo[s], hi[s] = -5 * p.noise_scale_sd, 5 * p.noise_scale_sd
        return lo, hi

    def prior_scales(self) -> np.ndarray:
        """Rough prior standard deviation of each sampling coordinate (for regularising starts)."""
        p = self.priors
        scale = np.ones(self.ndim)
        s = self.slices["log_permittivity"]
        scale[s] = math.log(p.permittivity_max / p.permittivity_min) / math.sqrt(12.0)
        s = self.slices["log_vertical_time"]
        scale[s] = 1.0
        scale[self.slices["time_zero"]] = p.time_zero_sd
        if "log_noise_scale" in self.slices:
            scale[self.slices["log_noise_scale"]] = p.noise_scale_sd
        return scale
