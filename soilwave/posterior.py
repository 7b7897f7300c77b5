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

Amplitudes (joint inversion)
----------------------------
When the picks carry amplitudes (column ``amplitude``, for air, ground and
reflection picks, air and ground picks at zero offset excepted; see
:mod:`soilwave.amplitude` for the forward model), the posterior adds

``log_conductivity`` (one per layer the amplitude rays cross)
    ``c_l = ln sigma_l`` (mS/m); the log-uniform prior of
    :mod:`soilwave.priors` is flat in ``c_l``. Layers no amplitude ray reaches
    (the half-space below the deepest reflector with amplitudes, or every
    layer below layer 1 with only ground-wave amplitudes) are not sampled:
    their posterior is their prior (:func:`soilwave.invert` draws them
    from it).
``log_amplitude_noise_scale``
    ``ln s_A`` of a common factor on the log-amplitude uncertainties.

and a Gaussian likelihood of the natural-log amplitudes ``y_i = ln A_i``
with standard deviation ``s_A e_i``, where
``e_i = sqrt((amplitude_sigma_i / A_i)^2 + floor^2)`` (first-order error of a
logarithm, plus an error floor for what the model leaves out, default
0.05; without ``amplitude_sigma`` a default relative error, 0.1, replaces the
first term). Each wave family ``f`` (air, ground, reflection) has an unknown
log gain ``g_f`` (source strength, coupling, receiver gain) with a flat
(improper) prior. The gains enter linearly, so they are integrated out
exactly: with ``r_i = y_i - m_i`` (``m_i`` the modelled log amplitude
without gain), weights ``w_i = 1 / e_i^2``, ``W_f = sum_f w_i`` and the
weighted mean ``g_f* = sum_f w_i r_i / W_f``::

    ln L_A = -1/2 sum_i w_i (r_i - g*_f(i))^2 / s_A^2 - (n - F) ln s_A
             - sum ln e_i - (n - F)/2 ln(2 pi) - 1/2 sum_f ln W_f

(``n`` amplitude picks, ``F`` families). Given the other parameters each gain
is Gaussian, ``g_f ~ N(g*_f, s_A^2 / W_f)``; :func:`soilwave.invert` draws it
for every posterior sample, so the gains are reported as posterior draws too.
The posterior is proper because every family present has at least one pick.

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

from soilwave.amplitude import AMPLITUDE_FAMILIES, AmplitudeOperator
from soilwave.errors import InputError
from soilwave.priors import Priors
from soilwave.traveltime import TravelTimeOperator, reflection_rays
from soilwave.wave import SPEED_OF_LIGHT

__all__ = [
    "AMPLITUDE_ERROR_FLOOR",
    "AMPLITUDE_RELATIVE_ERROR",
    "AmplitudeLikelihood",
    "LogPosterior",
    "ParameterBlock",
    "TravelTimeLikelihood",
]

#: Relative amplitude error added in quadrature to every pick's own error: what the
#: amplitude model leaves out (antenna coupling changes, interfering arrivals, the
#: radiation pattern). Our choice, of the size of the amplitude errors of a careful
#: survey (common practice: about 5 %); the amplitude-noise scale can widen it.
AMPLITUDE_ERROR_FLOOR = 0.05

#: Relative amplitude error used for picks without ``amplitude_sigma`` (our choice).
AMPLITUDE_RELATIVE_ERROR = 0.1

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
        # reflections by interface, and an operator for the other picks, so that rays
        # traced once (trace_reflections) can serve the amplitude model as well
        ph, itf = operator.phase, operator.interface
        refl = ph == "reflection"
        self.reflection_index = {
            int(k): np.flatnonzero(refl & (itf == k)) for k in np.unique(itf[refl])
        }
        self._other = np.flatnonzero(~refl)
        self._other_op = (
            TravelTimeOperator(operator.offset[self._other], ph[self._other], itf[self._other])
            if self._other.size
            else None
        )

    def trace_reflections(self, phys: Mapping) -> dict:
        """Exact two-way times and ray parameters of the reflection picks.

        Returns ``{k: (time, p)}`` (each ``(..., n_k)``, picks
        ``reflection_index[k]``), without the time-zero shift.
        """
        x = self.operator.offset
        return {
            k: reflection_rays(x[idx], phys["thickness"], phys["velocity"], interface=k)
            for k, idx in self.reflection_index.items()
        }

    def predict(self, phys: Mapping) -> np.ndarray:
        """Predicted pick times, ns, shape ``(..., n_pick)``.

        Uses the rays in ``phys["_rays"]`` (from :meth:`trace_reflections`) when present.
        """
        rays = phys.get("_rays")
        if rays is None:
            return self.operator(phys["thickness"], phys["velocity"], phys["time_zero"])
        t0 = np.asarray(phys["time_zero"], dtype=float)
        batch = t0.shape
        out = np.empty((*batch, self.n))
        if self._other_op is not None:
            out[..., self._other] = self._other_op(phys["thickness"], phys["velocity"], t0)
        for k, idx in self.reflection_index.items():
            out[..., idx] = rays[k][0] + t0[..., None]
        return out

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


class AmplitudeLikelihood:
    """Gaussian likelihood of log-amplitudes with the family gains integrated out.

    See the module docstring for the formula.

    Parameters
    ----------
    operator : soilwave.amplitude.AmplitudeOperator
        Forward operator of the amplitude picks.
    amplitude : array_like
        Observed amplitudes (> 0), shape ``(n,)``.
    error : array_like
        Relative (log) uncertainty ``e_i`` of each amplitude, shape ``(n,)``.
    n_conductivity : int
        Number of layers whose conductivity is sampled (the operator needs
        ``operator.n_layers``; deeper entries are padded with zero, which does
        not change any prediction).
    """

    name = "amplitude"

    def __init__(self, operator: AmplitudeOperator, amplitude, error, *, n_conductivity: int):
        self.operator = operator
        self.log_amplitude = np.log(np.asarray(amplitude, dtype=float)).copy()
        self.error = np.asarray(error, dtype=float).copy()
        self.n = self.log_amplitude.size
        self.n_conductivity = int(n_conductivity)
        self.families = operator.families
        f = len(self.families)
        self._onehot = np.zeros((self.n, f))
        self._onehot[np.arange(self.n), operator.family_index] = 1.0
        self._w = 1.0 / self.error**2
        self._wsum = self._w @ self._onehot  # W_f
        self._const = (
            -float(np.sum(np.log(self.error)))
            - 0.5 * (self.n - f) * _LOG_2PI
            - 0.5 * float(np.sum(np.log(self._wsum)))
        )
        self.ray_map = {}  # interface -> positions of our reflection picks among traced rays

    def _conductivity(self, phys) -> np.ndarray:
        sig = np.asarray(phys["conductivity"], dtype=float)
        pad = self.operator.n_layers - sig.shape[-1]
        if pad > 0:
            sig = np.concatenate([sig, np.zeros((*sig.shape[:-1], pad))], axis=-1)
        return sig

    def predict(self, phys: Mapping, log_gain=0.0) -> np.ndarray:
        """Modelled ``ln|A|`` of the picks, shape ``(..., n)`` (gains 0 unless given)."""
        rays = None
        traced = phys.get("_rays")
        if traced is not None and self.ray_map:
            rays = {k: traced[k][1][..., pos] for k, pos in self.ray_map.items()}
        return self.operator(
            phys["thickness"], phys["permittivity"], self._conductivity(phys), log_gain, rays=rays
        )

    def profile(self, phys: Mapping):
        """Residuals with the best gains removed, and those gains.

        Returns
        -------
        z : numpy.ndarray
            ``(r_i - g*_f) / e_i``, shape ``(..., n)`` (no noise scale).
        g : numpy.ndarray
            ``g*_f``, shape ``(..., F)``.
        """
        r = self.log_amplitude - self.predict(phys)
        with np.errstate(invalid="ignore"):  # NaN rows: unphysical models
            g = ((r * self._w) @ self._onehot) / self._wsum
            z = (r - g[..., self.operator.family_index]) / self.error
        return z, g

    def normalised_residuals(self, phys: Mapping) -> np.ndarray:
        """Gain-profiled residuals ``(r_i - g*_f) / e_i``; NaN where undefined."""
        return self.profile(phys)[0]

    def gain_draws(self, phys: Mapping, rng: np.random.Generator) -> np.ndarray:
        """One draw of each family's log gain per model, ``g ~ N(g*, s_A^2 / W_f)``."""
        _, g = self.profile(phys)
        s = np.asarray(phys.get("amplitude_noise_scale", 1.0), dtype=float)
        sd = np.asarray(s)[..., None] / np.sqrt(self._wsum)
        return g + sd * rng.standard_normal(g.shape)

    def __call__(self, phys: Mapping) -> np.ndarray:
        z, _ = self.profile(phys)
        s = np.asarray(phys.get("amplitude_noise_scale", 1.0), dtype=float)
        q = np.sum(z * z, axis=-1)
        f = len(self.families)
        ll = -0.5 * q / (s * s) - (self.n - f) * np.log(s) + self._const
        return np.where(np.isfinite(ll), ll, -np.inf)


def _amplitude_picks(picks, amplitudes, relative_error, floor, low_loss):
    """Select amplitude picks; return (operator, amplitude, error, n_conductivity) or None."""
    if amplitudes is False or "amplitude" not in picks:
        if amplitudes is True:
            msg = "amplitudes=True but the pick table has no 'amplitude' column"
            raise InputError(msg)
        return None
    phase = np.asarray(picks["phase"].values).astype(str)
    amp = np.asarray(picks["amplitude"].values, dtype=float)
    interface = np.asarray(picks["interface"].values)
    offset = np.asarray(picks["offset"].values, dtype=float)
    use = np.isin(phase, AMPLITUDE_FAMILIES) & np.isfinite(amp)
    # 1/x^2 spreading has no value at zero offset: such air/ground amplitudes are left out
    use &= ~(np.isin(phase, ("air", "ground")) & (offset <= 0))
    bad = use & ~(amp > 0)
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        msg = f"pick {i}: amplitude {amp[i]!r} must be > 0 (the absolute picked amplitude)"
        raise InputError(msg)
    reach = 0
    if np.any(use & (phase == "ground")):
        reach = 1
    refl = use & (phase == "reflection")
    if np.any(refl):
        reach = max(reach, int(np.max(interface[refl])))
    if reach == 0:
        if amplitudes is True:
            msg = (
                "amplitudes=True but no ground or reflection pick has an amplitude; "
                "conductivity needs the amplitudes of waves that travel through the soil"
            )
            raise InputError(msg)
        return None
    if "frequency_mhz" not in picks.attrs:
        msg = (
            "the picks carry amplitudes but the table has no 'frequency_mhz' attribute "
            "(antenna centre frequency, MHz, needed for attenuation); set it, or pass "
            "amplitudes=False to invert travel times only"
        )
        raise InputError(msg)
    idx = np.flatnonzero(use)
    rel = np.full(idx.size, float(relative_error))
    if "amplitude_sigma" in picks:
        a_sig = np.asarray(picks["amplitude_sigma"].values, dtype=float)[idx]
        have = np.isfinite(a_sig)
        rel[have] = a_sig[have] / amp[idx][have]
    error = np.sqrt(rel**2 + float(floor) ** 2)
    op = AmplitudeOperator(
        offset[idx],
        phase[idx],
        interface[idx],
        frequency_mhz=picks.attrs["frequency_mhz"],
        low_loss=low_loss,
    )
    return op, amp[idx], error, reach, idx


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
    amplitudes : bool or None, optional
        Add the amplitude likelihood and conductivity (module docstring):
        ``None`` (default) when the picks carry usable amplitudes, ``True``
        to require them, ``False`` to ignore them.
    amplitude_relative_error : float, optional
        Relative amplitude error of picks without ``amplitude_sigma``
        (default :data:`AMPLITUDE_RELATIVE_ERROR`).
    amplitude_error_floor : float, optional
        Relative error added in quadrature to every amplitude
        (default :data:`AMPLITUDE_ERROR_FLOOR`).
    low_loss : bool, optional
        Low-loss instead of exact plane-wave attenuation in the amplitude model.

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
    amplitude_term : AmplitudeLikelihood or None
        The amplitude term, when amplitudes are used.
    n_conductivity : int
        Layers whose conductivity is sampled (0 without amplitudes).
    noise_scale_terms : dict
        Name of each noise-scale block -> the likelihood term it scales.
    """

    def __init__(
        self,
        picks,
        *,
        n_interfaces: int | None = None,
        priors: Priors | None = None,
        amplitudes: bool | None = None,
        amplitude_relative_error: float = AMPLITUDE_RELATIVE_ERROR,
        amplitude_error_floor: float = AMPLITUDE_ERROR_FLOOR,
        low_loss: bool = False,
    ):
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
        self.noise_scale_terms = {}
        if "log_noise_scale" in (b.name for b in self.blocks):
            self.noise_scale_terms["log_noise_scale"] = self.terms[0]
        self.amplitude_term = None
        self.amplitude_pick_index = np.zeros(0, dtype=int)
        self.n_conductivity = 0
        for name, value in (
            ("amplitude_relative_error", amplitude_relative_error),
            ("amplitude_error_floor", amplitude_error_floor),
        ):
            if not (math.isfinite(float(value)) and float(value) > 0):
                msg = f"{name}={value!r} must be a positive relative error (e.g. 0.05 for 5 %)"
                raise InputError(msg)
        if amplitudes not in (None, True, False):
            msg = f"amplitudes must be None, True or False; got {amplitudes!r}"
            raise InputError(msg)
        sel = _amplitude_picks(
            picks, amplitudes, amplitude_relative_error, amplitude_error_floor, low_loss
        )
        if sel is not None:
            op_a, amp, error, reach, idx = sel
            if op_a.n_interfaces > k:  # pragma: no cover - picks share the interfaces
                msg = f"amplitude picks reference interface {op_a.n_interfaces} > {k}"
                raise InputError(msg)
            self.n_conductivity = reach
            self.amplitude_pick_index = idx
            self.amplitude_term = AmplitudeLikelihood(op_a, amp, error, n_conductivity=reach)
            tt = self.terms[0]
            for kk, idx_a in op_a.reflection_groups().items():
                rows = idx[idx_a]  # rows of the pick table, as in the travel-time operator
                self.amplitude_term.ray_map[kk] = np.searchsorted(tt.reflection_index[kk], rows)
            self.terms.append(self.amplitude_term)
            self.blocks.extend(self._amplitude_blocks())
            if "log_amplitude_noise_scale" in (b.name for b in self.blocks):
                self.noise_scale_terms["log_amplitude_noise_scale"] = self.amplitude_term
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

    def _amplitude_blocks(self) -> list[ParameterBlock]:
        n_c = self.n_conductivity
        p = self.priors
        default = math.sqrt(p.conductivity_min * p.conductivity_max)

        def sig_fwd(z, phys):
            phys["conductivity"] = np.exp(z)
            return np.sum(z, axis=-1)

        def sig_inv(phys):
            eps = np.asarray(phys["permittivity"], dtype=float)
            if "conductivity" not in phys:
                return np.full((*eps.shape[:-1], n_c), math.log(default))
            return np.log(np.asarray(phys["conductivity"], dtype=float)[..., :n_c])

        def a_fwd(z, phys):
            phys["amplitude_noise_scale"] = np.exp(z[..., 0])
            return z[..., 0]

        def a_inv(phys):
            eps = np.asarray(phys["permittivity"], dtype=float)
            s = np.asarray(phys.get("amplitude_noise_scale", np.ones(eps.shape[:-1])), float)
            return np.log(s)[..., None]

        blocks = [
            ParameterBlock(
                "log_conductivity",
                tuple(f"log_conductivity[{i}]" for i in range(1, n_c + 1)),
                "conductivity",
                sig_fwd,
                sig_inv,
            )
        ]
        if p.sample_amplitude_noise_scale:
            blocks.append(
                ParameterBlock(
                    "log_amplitude_noise_scale",
                    ("log_amplitude_noise_scale",),
                    "amplitude_noise_scale",
                    a_fwd,
                    a_inv,
                )
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
        ``time_zero`` ns, ``noise_scale`` and ``log_jacobian``; with
        amplitudes also ``conductivity`` (..., n_conductivity) mS/m and
        ``amplitude_noise_scale``.
        """
        x = self._as_x(x)
        phys = {}
        logj = np.zeros(x.shape[:-1])
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for b in self.blocks:
                logj = logj + b.to_physical(x[..., self.slices[b.name]], phys)
        if "noise_scale" not in phys:
            phys["noise_scale"] = np.ones(x.shape[:-1])
        if self.amplitude_term is not None and "amplitude_noise_scale" not in phys:
            phys["amplitude_noise_scale"] = np.ones(x.shape[:-1])
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

    def _share_rays(self, phys: dict) -> dict:
        """With amplitudes, trace the reflections once for both likelihood terms."""
        if self.amplitude_term is None or not self.amplitude_term.ray_map:
            return phys
        phys = dict(phys)
        phys["_rays"] = self.terms[0].trace_reflections(phys)
        return phys

    def log_likelihood(self, x, *, phys: dict | None = None) -> np.ndarray:
        """Sum of the likelihood terms."""
        phys = self.to_physical(x) if phys is None else phys
        phys = self._share_rays(phys)
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

        With amplitudes the gain-profiled log-amplitude residuals follow.
        NaN residuals (a phase that does not exist in the model) become ``fill``.
        """
        phys = self._share_rays(self.to_physical(x))
        r = self.terms[0].normalised_residuals(phys)
        r = np.where(np.isfinite(r), r, fill)
        r0 = (phys["time_zero"] - self.time_zero_mean) / self.priors.time_zero_sd
        parts = [r, np.asarray(r0)[..., None]]
        if self.amplitude_term is not None:
            ra = self.amplitude_term.normalised_residuals(phys)
            parts.append(np.where(np.isfinite(ra), ra, fill))
        return np.concatenate(parts, axis=-1)

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
        if "log_conductivity" in self.slices:
            s = self.slices["log_conductivity"]
            lo[s], hi[s] = math.log(p.conductivity_min), math.log(p.conductivity_max)
        if "log_amplitude_noise_scale" in self.slices:
            s = self.slices["log_amplitude_noise_scale"]
            sd = p.amplitude_noise_scale_sd
            lo[s], hi[s] = -5 * sd, 5 * sd
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
        if "log_conductivity" in self.slices:
            span = math.log(p.conductivity_max / p.conductivity_min)
            scale[self.slices["log_conductivity"]] = span / math.sqrt(12.0)
        if "log_amplitude_noise_scale" in self.slices:
            scale[self.slices["log_amplitude_noise_scale"]] = p.amplitude_noise_scale_sd
        return scale
