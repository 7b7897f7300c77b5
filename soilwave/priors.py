"""Prior distributions of the layered-earth travel-time inversion.

The layered earth has ``n_interfaces`` interfaces and ``n_interfaces + 1``
layers (the last one is a half-space). Its physical parameters, each with a
documented, configurable prior:

``permittivity`` (per layer, dimensionless)
    Relative permittivity. Default **log-uniform** on ``[1, 90]``: 1 is the
    vacuum (a physical lower bound) and 90 lies just above liquid water near
    0 C (about 88; IAPWS R8-97), an upper bound for any soil. Log-uniform
    (uniform in ``log eps``, hence in log velocity) spreads prior mass evenly
    over the orders of magnitude between dry sand (about 3-5) and saturated
    clay (about 25-40) (common practice) instead of putting 2/3 of it above 30
    as a uniform prior would. ``permittivity_prior="uniform"`` selects the
    uniform prior on the same bounds.
``thickness`` (per interface = per layer above the half-space, m)
    Uniform on ``[min_thickness, max_thickness]``, default ``[0.02, 5.0]`` m.
    The lower bound keeps layers thicker than about a tenth of a 1 GHz
    wavelength in wet soil; layers thinner than that are not resolved by
    travel times (common practice). Raise ``max_thickness`` for deep water
    tables.
``time_zero`` (ns)
    A common shift added to every pick time (trigger delay, cable length).
    Normal with mean ``time_zero_mean`` and standard deviation
    ``time_zero_sd`` (default 2 ns, about the spread of a hand-picked first
    break on a 100-500 MHz gather; common practice). ``time_zero_mean=None``
    (the default) centres the prior on the air-wave estimate
    ``mean(t_air - x / c)`` from the picks, or on 0 ns when the picks hold no
    air wave; give a number to make the prior independent of the data (as
    simulation-based calibration needs).
``noise_scale`` (dimensionless)
    A common factor on every pick's ``sigma``: the likelihood uses
    ``sigma * noise_scale``. Log-normal with median 1 and log-space standard
    deviation ``noise_scale_sd`` (default 0.5, so the central 95 % lies in
    about [0.38, 2.7]); it lets the data widen or narrow over-confident or
    over-cautious pick uncertainties. ``noise_scale_sd=None`` fixes it to 1.
``conductivity`` (per layer, mS/m; only when the picks carry amplitudes)
    Electrical conductivity. Default **log-uniform** on ``[0.1, 1000]`` mS/m:
    positive, and spreading prior mass evenly over the four decades from
    very resistive dry sand (below 1 mS/m) to saline clay (hundreds of
    mS/m; clays 2-1000 mS/m after Davis & Annan 1989). Amplitudes constrain
    only the layers their rays cross; the others keep this prior.
``amplitude_noise_scale`` (dimensionless; only with amplitudes)
    A common factor on the log-amplitude uncertainties, like
    ``noise_scale`` for times. Log-normal with median 1 and log-space
    standard deviation ``amplitude_noise_scale_sd`` (default 1.0, wider than
    for times because amplitude errors are harder to state: antenna
    coupling and interference of arrivals are not modelled); ``None`` fixes
    it to 1.

All densities are normalised, in physical units; :mod:`soilwave.posterior`
adds the Jacobian of its sampling parameterisation so these stay the priors
on the physical quantities.

Examples
--------
>>> import numpy as np
>>> from soilwave.priors import Priors
>>> p = Priors(max_thickness=3.0)
>>> draws = p.sample(4, n_interfaces=1, rng=np.random.default_rng(0), time_zero_mean=0.0)
>>> draws["permittivity"].shape, draws["thickness"].shape
((4, 2), (4, 1))
>>> bool(np.all(np.isfinite(p.log_prob(draws, time_zero_mean=0.0))))
True
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Mapping

import numpy as np

from soilwave.errors import InputError

__all__ = ["Priors"]

_PERMITTIVITY_PRIORS = ("loguniform", "uniform")
_LOG_2PI = math.log(2.0 * math.pi)


@dataclasses.dataclass(frozen=True)
class Priors:
    """Priors of the layered-earth inversion (immutable; see the module docstring).

    Parameters
    ----------
    permittivity_prior : {"loguniform", "uniform"}
        Shape of the relative-permittivity prior on ``[permittivity_min, permittivity_max]``.
    permittivity_min, permittivity_max : float
        Bounds of relative permittivity, dimensionless (default 1 and 90).
    min_thickness, max_thickness : float
        Bounds of the uniform layer-thickness prior, m (default 0.02 and 5.0).
    time_zero_mean : float or None
        Mean of the normal time-zero prior, ns; ``None`` centres it on the
        air-wave estimate from the picks (0 ns without air-wave picks).
    time_zero_sd : float
        Standard deviation of the time-zero prior, ns (default 2).
    noise_scale_sd : float or None
        Log-space standard deviation of the log-normal (median 1) prior of the
        pick-noise scale (default 0.5); ``None`` fixes the scale at 1.
    conductivity_min, conductivity_max : float
        Bounds of the log-uniform conductivity prior, mS/m (default 0.1 and 1000).
    amplitude_noise_scale_sd : float or None
        Log-space standard deviation of the log-normal (median 1) prior of the
        amplitude-noise scale (default 1.0); ``None`` fixes it at 1.

    Examples
    --------
    >>> from soilwave.priors import Priors
    >>> Priors().with_(max_thickness=2.0).max_thickness
    2.0
    """

    permittivity_prior: str = "loguniform"
    permittivity_min: float = 1.0
    permittivity_max: float = 90.0
    min_thickness: float = 0.02
    max_thickness: float = 5.0
    time_zero_mean: float | None = None
    time_zero_sd: float = 2.0
    noise_scale_sd: float | None = 0.5
    conductivity_min: float = 0.1
    conductivity_max: float = 1000.0
    amplitude_noise_scale_sd: float | None = 1.0

    def __post_init__(self):
        if self.permittivity_prior not in _PERMITTIVITY_PRIORS:
            msg = (
                f"Priors: permittivity_prior={self.permittivity_prior!r} is not known; "
                f"expected one of {list(_PERMITTIVITY_PRIORS)}"
            )
            raise InputError(msg)
        for name in ("permittivity_min", "permittivity_max", "min_thickness", "max_thickness"):
            _check_positive_finite(name, getattr(self, name))
        if self.permittivity_min < 1.0:
            msg = (
                f"Priors: permittivity_min={self.permittivity_min!r} is below 1 (vacuum); "
                "expected a relative permittivity >= 1"
            )
            raise InputError(msg)
        if not self.permittivity_min < self.permittivity_max:
            msg = (
                f"Priors: permittivity bounds ({self.permittivity_min!r}, "
                f"{self.permittivity_max!r}) are not increasing; expected min < max"
            )
            raise InputError(msg)
        if not self.min_thickness < self.max_thickness:
            msg = (
                f"Priors: thickness bounds ({self.min_thickness!r}, {self.max_thickness!r}) m "
                "are not increasing; expected min_thickness < max_thickness"
            )
            raise InputError(msg)
        if self.time_zero_mean is not None and not math.isfinite(self.time_zero_mean):
            msg = f"Priors: time_zero_mean={self.time_zero_mean!r} ns is not finite"
            raise InputError(msg)
        _check_positive_finite("time_zero_sd", self.time_zero_sd)
        if self.noise_scale_sd is not None:
            _check_positive_finite("noise_scale_sd", self.noise_scale_sd)
        for name in ("conductivity_min", "conductivity_max"):
            _check_positive_finite(name, getattr(self, name))
        if not self.conductivity_min < self.conductivity_max:
            msg = (
                f"Priors: conductivity bounds ({self.conductivity_min!r}, "
                f"{self.conductivity_max!r}) mS/m are not increasing; expected min < max"
            )
            raise InputError(msg)
        if self.amplitude_noise_scale_sd is not None:
            _check_positive_finite("amplitude_noise_scale_sd", self.amplitude_noise_scale_sd)

    # --- construction and serialisation ----------------------------------------

    def with_(self, **changes) -> Priors:
        """Return a copy with some fields changed (the original is not modified).

        Examples
        --------
        >>> from soilwave.priors import Priors
        >>> Priors().with_(permittivity_prior="uniform").permittivity_prior
        'uniform'
        """
        names = {f.name for f in dataclasses.fields(self)}
        unknown = sorted(set(changes) - names)
        if unknown:
            msg = f"Priors.with_: unknown field(s) {unknown}; expected some of {sorted(names)}"
            raise InputError(msg)
        return dataclasses.replace(self, **changes)

    @property
    def sample_noise_scale(self) -> bool:
        """True when the pick-noise scale is a free parameter."""
        return self.noise_scale_sd is not None

    @property
    def sample_amplitude_noise_scale(self) -> bool:
        """True when the amplitude-noise scale is a free parameter (with amplitudes)."""
        return self.amplitude_noise_scale_sd is not None

    def to_attrs(self) -> dict:
        """Return the priors as NetCDF-safe attributes (``prior_*`` keys, JSON for ``None``).

        Examples
        --------
        >>> from soilwave.priors import Priors
        >>> Priors.from_attrs(Priors().to_attrs()) == Priors()
        True
        """
        attrs = {}
        for f in dataclasses.fields(self):
            attrs[f"prior_{f.name}"] = json.dumps(getattr(self, f.name))
        attrs["prior_description"] = self.describe()
        return attrs

    @classmethod
    def from_attrs(cls, attrs: Mapping) -> Priors:
        """Rebuild priors written by :meth:`to_attrs`."""
        kw = {}
        for f in dataclasses.fields(cls):
            key = f"prior_{f.name}"
            if key in attrs:
                value = attrs[key]
                if isinstance(value, bytes):
                    value = value.decode()
                kw[f.name] = json.loads(value) if isinstance(value, str) else value
        return cls(**kw)

    def describe(self) -> str:
        """Return a one-paragraph, human-readable statement of the priors."""
        t0 = (
            "air-wave estimate from the picks"
            if self.time_zero_mean is None
            else f"{self.time_zero_mean:g} ns"
        )
        noise = (
            "fixed at 1"
            if self.noise_scale_sd is None
            else f"log-normal, median 1, log-sd {self.noise_scale_sd:g}"
        )
        amp = (
            "fixed at 1"
            if self.amplitude_noise_scale_sd is None
            else f"log-normal, median 1, log-sd {self.amplitude_noise_scale_sd:g}"
        )
        return (
            f"relative permittivity per layer: {self.permittivity_prior} on "
            f"[{self.permittivity_min:g}, {self.permittivity_max:g}]; "
            f"thickness per layer above the half-space: uniform on "
            f"[{self.min_thickness:g}, {self.max_thickness:g}] m; "
            f"time zero: normal, mean {t0}, sd {self.time_zero_sd:g} ns; "
            f"pick-noise scale: {noise}; "
            f"with amplitudes, conductivity per layer: log-uniform on "
            f"[{self.conductivity_min:g}, {self.conductivity_max:g}] mS/m, "
            f"amplitude-noise scale: {amp}"
        )

    # --- densities --------------------------------------------------------------

    def resolve_time_zero_mean(self, picks=None) -> float:
        """Return the time-zero prior mean, ns, estimating it from air-wave picks if unset.

        Parameters
        ----------
        picks : xarray.Dataset, optional
            Pick table (``offset`` m, ``time`` ns, ``phase``).

        Returns
        -------
        float
            ``time_zero_mean`` when set; else ``mean(t_air - offset / c)`` over
            the air-wave picks; else 0 ns.
        """
        if self.time_zero_mean is not None:
            return float(self.time_zero_mean)
        if picks is None:
            return 0.0
        from soilwave.wave import SPEED_OF_LIGHT

        phase = np.asarray(picks["phase"].values).astype(str)
        air = phase == "air"
        if not np.any(air):
            return 0.0
        offset = np.asarray(picks["offset"].values, dtype=float)[air]
        time = np.asarray(picks["time"].values, dtype=float)[air]
        return float(np.mean(time - offset / SPEED_OF_LIGHT))

    def log_prob_permittivity(self, permittivity) -> np.ndarray:
        """Log prior density of relative permittivity, summed over the last axis (layers)."""
        eps = np.asarray(permittivity, dtype=float)
        lo, hi = self.permittivity_min, self.permittivity_max
        inside = np.all((eps >= lo) & (eps <= hi), axis=-1)
        n = eps.shape[-1]
        if self.permittivity_prior == "uniform":
            lp = np.full(eps.shape[:-1], -n * math.log(hi - lo))
        else:
            with np.errstate(divide="ignore", invalid="ignore"):
                lp = -np.sum(np.log(eps), axis=-1) - n * math.log(math.log(hi / lo))
        return np.where(inside, lp, -np.inf)

    def log_prob_thickness(self, thickness) -> np.ndarray:
        """Log prior density of thickness (m), summed over the last axis (interfaces)."""
        h = np.asarray(thickness, dtype=float)
        lo, hi = self.min_thickness, self.max_thickness
        inside = np.all((h >= lo) & (h <= hi), axis=-1)
        lp = -h.shape[-1] * math.log(hi - lo)
        return np.where(inside, lp, -np.inf)

    def log_prob_time_zero(self, time_zero, *, time_zero_mean: float) -> np.ndarray:
        """Log prior density of time zero (ns)."""
        z = (np.asarray(time_zero, dtype=float) - time_zero_mean) / self.time_zero_sd
        return -0.5 * z * z - math.log(self.time_zero_sd) - 0.5 * _LOG_2PI

    def log_prob_noise_scale(self, noise_scale) -> np.ndarray:
        """Log prior density of the pick-noise scale (log-normal, median 1)."""
        s = np.asarray(noise_scale, dtype=float)
        if self.noise_scale_sd is None:
            return np.where(s == 1.0, 0.0, -np.inf)
        with np.errstate(divide="ignore", invalid="ignore"):
            logs = np.log(s)
            z = logs / self.noise_scale_sd
            lp = -0.5 * z * z - logs - math.log(self.noise_scale_sd) - 0.5 * _LOG_2PI
        return np.where(s > 0, lp, -np.inf)

    def log_prob_conductivity(self, conductivity) -> np.ndarray:
        """Log prior density of conductivity (mS/m, log-uniform), summed over the last axis."""
        sig = np.asarray(conductivity, dtype=float)
        lo, hi = self.conductivity_min, self.conductivity_max
        inside = np.all((sig >= lo) & (sig <= hi), axis=-1)
        with np.errstate(divide="ignore", invalid="ignore"):
            lp = -np.sum(np.log(sig), axis=-1) - sig.shape[-1] * math.log(math.log(hi / lo))
        return np.where(inside, lp, -np.inf)

    def log_prob_amplitude_noise_scale(self, scale) -> np.ndarray:
        """Log prior density of the amplitude-noise scale (log-normal, median 1)."""
        s = np.asarray(scale, dtype=float)
        if self.amplitude_noise_scale_sd is None:
            return np.where(s == 1.0, 0.0, -np.inf)
        sd = self.amplitude_noise_scale_sd
        with np.errstate(divide="ignore", invalid="ignore"):
            logs = np.log(s)
            lp = -0.5 * (logs / sd) ** 2 - logs - math.log(sd) - 0.5 * _LOG_2PI
        return np.where(s > 0, lp, -np.inf)

    def log_prob(self, params: Mapping, *, time_zero_mean: float) -> np.ndarray:
        """Joint log prior density in physical units, vectorised over leading axes.

        Parameters
        ----------
        params : mapping
            ``permittivity`` (..., n_layers), ``thickness`` (..., n_interfaces) m,
            ``time_zero`` (...) ns and, optionally, ``noise_scale`` (...),
            ``conductivity`` (..., n) mS/m and ``amplitude_noise_scale`` (...).
        time_zero_mean : float
            Resolved time-zero prior mean, ns (see :meth:`resolve_time_zero_mean`).

        Returns
        -------
        numpy.ndarray
            Log density, shape of the leading axes; ``-inf`` outside the bounds.

        Examples
        --------
        >>> import numpy as np
        >>> from soilwave.priors import Priors
        >>> p = Priors(permittivity_prior="uniform", noise_scale_sd=None)
        >>> lp = p.log_prob({"permittivity": np.array([[4.0, 9.0]]),
        ...                  "thickness": np.array([[0.5]]), "time_zero": np.array([0.0])},
        ...                 time_zero_mean=0.0)
        >>> bool(np.isclose(lp[0], -2 * np.log(89) - np.log(4.98) - np.log(2 * np.sqrt(2 * np.pi))))
        True
        """
        lp = self.log_prob_permittivity(params["permittivity"])
        lp = lp + self.log_prob_thickness(params["thickness"])
        lp = lp + self.log_prob_time_zero(params["time_zero"], time_zero_mean=time_zero_mean)
        if "noise_scale" in params and self.noise_scale_sd is not None:
            lp = lp + self.log_prob_noise_scale(params["noise_scale"])
        if "conductivity" in params:
            lp = lp + self.log_prob_conductivity(params["conductivity"])
        if "amplitude_noise_scale" in params and self.amplitude_noise_scale_sd is not None:
            lp = lp + self.log_prob_amplitude_noise_scale(params["amplitude_noise_scale"])
        return lp

    def sample(
        self,
        n: int,
        *,
        n_interfaces: int,
        rng: np.random.Generator,
        time_zero_mean: float,
        amplitudes: bool = False,
    ) -> dict:
        """Draw ``n`` layered earths from the prior (for simulation-based calibration).

        Parameters
        ----------
        n : int
            Number of draws.
        n_interfaces : int
            Number of interfaces (``n_interfaces + 1`` layers).
        rng : numpy.random.Generator
            Random generator.
        time_zero_mean : float
            Resolved time-zero prior mean, ns.
        amplitudes : bool, optional
            Also draw the parameters of the amplitude model (after the others,
            so the travel-time draws do not depend on this switch).

        Returns
        -------
        dict
            ``permittivity`` (n, n_interfaces + 1), ``velocity`` m/ns,
            ``thickness`` (n, n_interfaces) m, ``time_zero`` (n,) ns,
            ``noise_scale`` (n,) (ones when fixed); with ``amplitudes=True``
            also ``conductivity`` (n, n_interfaces + 1) mS/m and
            ``amplitude_noise_scale`` (n,).
        """
        from soilwave.wave import SPEED_OF_LIGHT

        n = int(n)
        n_layers = int(n_interfaces) + 1
        lo, hi = self.permittivity_min, self.permittivity_max
        if self.permittivity_prior == "uniform":
            eps = rng.uniform(lo, hi, size=(n, n_layers))
        else:
            eps = np.exp(rng.uniform(math.log(lo), math.log(hi), size=(n, n_layers)))
        thickness = rng.uniform(self.min_thickness, self.max_thickness, size=(n, n_interfaces))
        time_zero = rng.normal(time_zero_mean, self.time_zero_sd, size=n)
        if self.noise_scale_sd is None:
            noise = np.ones(n)
        else:
            noise = np.exp(rng.normal(0.0, self.noise_scale_sd, size=n))
        out = {
            "permittivity": eps,
            "velocity": SPEED_OF_LIGHT / np.sqrt(eps),
            "thickness": thickness,
            "time_zero": time_zero,
            "noise_scale": noise,
        }
        if amplitudes:
            sig_lo, sig_hi = math.log(self.conductivity_min), math.log(self.conductivity_max)
            out["conductivity"] = np.exp(rng.uniform(sig_lo, sig_hi, size=(n, n_layers)))
            if self.amplitude_noise_scale_sd is None:
                out["amplitude_noise_scale"] = np.ones(n)
            else:
                sd = self.amplitude_noise_scale_sd
                out["amplitude_noise_scale"] = np.exp(rng.normal(0.0, sd, size=n))
        return out


def _check_positive_finite(name: str, value) -> None:
    try:
        ok = math.isfinite(float(value)) and float(value) > 0
    except (TypeError, ValueError):
        ok = False
    if not ok:
        msg = f"Priors: {name}={value!r} is not a positive finite number"
        raise InputError(msg)
