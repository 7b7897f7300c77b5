"""Base class of petrophysical models: relative permittivity <-> volumetric water content.

A :class:`PetroModel` maps bulk relative permittivity ``eps`` (dimensionless, ``1``)
to volumetric water content ``theta`` (m3/m3) and back. Its parameters are either
fixed floats or :class:`Uncertain` normal distributions; posterior draws of
permittivity are turned into draws of water content with one parameter set drawn
per sample (:meth:`PetroModel.water_content_draws`), so that the uncertainty of
the relation itself is carried by Monte Carlo into the water content.

This module is layer 1 of soilwave: pure numpy/scipy, no xarray.

Examples
--------
>>> import numpy as np
>>> from soilwave.petro import CRIM, Uncertain
>>> m = CRIM(porosity=Uncertain(0.40, 0.02), eps_solid=4.7, eps_water=80.0)
>>> round(float(m.water_content(10.0)), 4)
0.184
>>> eps = np.full((1000, 2), 10.0)
>>> m.water_content_draws(eps, rng=np.random.default_rng(1)).shape
(1000, 2)
"""

from __future__ import annotations

import copy
import json
import math
import warnings
from dataclasses import dataclass
from typing import ClassVar

import numpy as np
from scipy import stats

from soilwave.errors import InputError, RangeWarning, ValidRangeError

__all__ = ["PetroModel", "Uncertain"]

_ON_RANGE = ("warn", "raise", "ignore")
# Upper end of the bracket searched by the numeric inverse: well above liquid water
# at 0 deg C (about 88, Malmberg & Maryott 1956).
_EPS_SEARCH_MAX = 200.0
# Physical permittivity range used when a model declares no calibrated range:
# air (1) to liquid water at 0 deg C (about 88, Malmberg & Maryott 1956).
_EPS_PHYSICAL = (1.0, 88.0)


@dataclass(frozen=True)
class Uncertain:
    """A model parameter known as a (optionally truncated) normal distribution.

    Parameters
    ----------
    mean : float
        Mean (best estimate) of the parameter, in the parameter's unit.
    sd : float
        Standard deviation, >= 0 (0 means the value is known exactly).
    low, high : float, optional
        Truncation bounds; draws outside them are never returned. Default: none.

    Examples
    --------
    >>> import numpy as np
    >>> p = Uncertain(0.40, 0.02, low=0.0, high=1.0)
    >>> p.draw(3, rng=np.random.default_rng(0)).shape
    (3,)
    """

    mean: float
    sd: float
    low: float = -math.inf
    high: float = math.inf

    def __post_init__(self):
        for field in ("mean", "sd", "low", "high"):
            value = getattr(self, field)
            try:
                value = float(value)
            except (TypeError, ValueError):
                msg = f"Uncertain.{field} must be a number, got {value!r}"
                raise InputError(msg) from None
            object.__setattr__(self, field, value)
        if not math.isfinite(self.mean):
            msg = f"Uncertain.mean must be finite, got {self.mean!r}"
            raise InputError(msg)
        if not (math.isfinite(self.sd) and self.sd >= 0.0):
            msg = f"Uncertain.sd must be finite and >= 0, got {self.sd!r}"
            raise InputError(msg)
        if not self.low < self.high:
            msg = f"Uncertain bounds must satisfy low < high, got low={self.low}, high={self.high}"
            raise InputError(msg)
        if not self.low <= self.mean <= self.high:
            msg = (
                f"Uncertain.mean {self.mean} lies outside its bounds "
                f"[{self.low}, {self.high}]; expected low <= mean <= high"
            )
            raise InputError(msg)

    def __repr__(self):
        parts = [f"mean={self.mean!r}", f"sd={self.sd!r}"]
        if math.isfinite(self.low):
            parts.append(f"low={self.low!r}")
        if math.isfinite(self.high):
            parts.append(f"high={self.high!r}")
        return f"Uncertain({', '.join(parts)})"

    def draw(self, n, *, rng, low=-math.inf, high=math.inf):
        """Draw ``n`` values, truncated to the bounds (intersected with ``low``, ``high``).

        Parameters
        ----------
        n : int
            Number of draws.
        rng : numpy.random.Generator or int
            Random generator or seed.
        low, high : float, optional
            Extra bounds (for example the physical range of the parameter).

        Returns
        -------
        numpy.ndarray
            Shape ``(n,)``.
        """
        rng = np.random.default_rng(rng)
        lo, hi = max(self.low, low), min(self.high, high)
        if self.sd == 0.0:
            return np.full(n, self.mean)
        if math.isinf(lo) and math.isinf(hi):
            return rng.normal(self.mean, self.sd, size=n)
        a, b = (lo - self.mean) / self.sd, (hi - self.mean) / self.sd
        return stats.truncnorm.rvs(a, b, loc=self.mean, scale=self.sd, size=n, random_state=rng)


def _as_param(name, value, bounds):
    """Validate one parameter value: a finite float or an :class:`Uncertain`."""
    lo, hi = bounds
    if isinstance(value, Uncertain):
        mean = value.mean
    else:
        try:
            mean = float(value)
        except (TypeError, ValueError):
            msg = f"parameter {name!r} must be a number or Uncertain(mean, sd), got {value!r}"
            raise InputError(msg) from None
        value = mean
    if not (math.isfinite(mean) and lo <= mean <= hi):
        msg = f"parameter {name!r} = {mean!r} is outside its physical range [{lo}, {hi}]"
        raise InputError(msg)
    return value


def _format_value(v):
    return f"{v:.6g}"


def _where(bad):
    """Describe where a boolean mask is true: count and the first index."""
    idx = np.argwhere(bad)[0]
    first = tuple(int(i) for i in idx) if idx.size > 1 else int(idx[0]) if idx.size else 0
    return int(np.count_nonzero(bad)), first


class PetroModel:
    """Base class of permittivity <-> water content relations.

    Subclasses set :attr:`name`, :attr:`reference`, ``_bounds`` (physical range of
    each parameter), implement ``_theta(eps, **params)`` and, when there is a closed
    form, ``_eps(theta, **params)``; otherwise :meth:`permittivity` inverts
    ``_theta`` numerically (vectorised bisection; the relation must increase with
    permittivity). They declare either ``_valid_eps_decl`` or ``_valid_theta_decl``;
    the other range is derived through the relation at the parameter means.

    Parameters
    ----------
    params : dict
        Parameter name -> float (fixed) or :class:`Uncertain`.
    model_error : float, optional
        Standard deviation (m3/m3) of the relation's scatter about the fitted curve,
        added as independent normal noise in :meth:`water_content_draws`. Default 0.

    Attributes
    ----------
    name : str
        Short model name.
    reference : str
        Citation of the published relation.
    """

    name = "PetroModel"
    reference = ""
    _bounds: ClassVar[dict] = {}
    _default_free: ClassVar[tuple] = ()
    _valid_eps_decl = None
    _valid_theta_decl = None

    def __init__(self, params, *, model_error=0.0):
        unknown = set(params) - set(self._bounds)
        if unknown:
            msg = (
                f"{self.name}: unknown parameter(s) {sorted(unknown)}; "
                f"expected {list(self._bounds)}"
            )
            raise InputError(msg)
        self._params = {k: _as_param(k, v, self._bounds[k]) for k, v in params.items()}
        self._model_error = self._check_model_error(model_error)
        # Joint normal distribution of some parameters: (names, mean vector, covariance).
        self._joint = None

    # ----- parameters -------------------------------------------------------------
    @staticmethod
    def _check_model_error(model_error):
        try:
            value = float(model_error)
        except (TypeError, ValueError):
            msg = f"model_error must be a number (m3/m3), got {model_error!r}"
            raise InputError(msg) from None
        if not (math.isfinite(value) and value >= 0.0):
            msg = f"model_error must be finite and >= 0 (m3/m3), got {model_error!r}"
            raise InputError(msg)
        return value

    @property
    def params(self):
        """dict: parameter name -> float (fixed) or :class:`Uncertain` (a copy)."""
        return dict(self._params)

    @property
    def means(self):
        """dict: parameter name -> mean value (float)."""
        return {
            k: (v.mean if isinstance(v, Uncertain) else float(v)) for k, v in self._params.items()
        }

    @property
    def model_error(self):
        """float: standard deviation (m3/m3) of the scatter about the relation."""
        return self._model_error

    @property
    def covariance(self):
        """tuple or None: ``(names, covariance matrix)`` of jointly drawn parameters."""
        if self._joint is None:
            return None
        names, _, cov = self._joint
        return names, cov.copy()

    def with_params(self, **kw):
        """Return a new model with some parameters (or ``model_error``) replaced.

        Replacing a parameter that belongs to a joint covariance (from
        :func:`soilwave.petro.calibrate`) drops that joint distribution; the
        parameters then keep their marginal :class:`Uncertain` values.

        Examples
        --------
        >>> from soilwave.petro import Ledieu
        >>> Ledieu().with_params(intercept=-0.17).params["intercept"]
        -0.17
        """
        new = copy.copy(self)
        new._params = dict(self._params)
        for key, value in kw.items():
            if key == "model_error":
                new._model_error = self._check_model_error(value)
                continue
            if key not in self._bounds:
                msg = (
                    f"{self.name}: unknown parameter {key!r}; expected one of {list(self._bounds)}"
                )
                raise InputError(msg)
            new._params[key] = _as_param(key, value, self._bounds[key])
        if new._joint is not None and set(new._joint[0]) & (set(kw) - {"model_error"}):
            new._joint = None
        new._after_params_changed()
        return new

    def _after_params_changed(self):
        """Hook for subclasses that cache values derived from parameters."""

    def _with_joint(self, names, mean, cov):
        """Return a copy whose parameters ``names`` are drawn jointly (multivariate normal)."""
        names = tuple(names)
        mean = np.asarray(mean, dtype=float)
        cov = np.array(cov, dtype=float)
        if cov.shape != (len(names), len(names)) or mean.shape != (len(names),):
            msg = f"covariance shape {cov.shape} does not match {len(names)} parameters {names}"
            raise InputError(msg)
        new = copy.copy(self)
        new._params = dict(self._params)
        new._joint = (names, mean, cov)
        return new

    def _param_bounds(self, name):
        lo, hi = self._bounds[name]
        value = self._params[name]
        if isinstance(value, Uncertain):
            lo, hi = max(lo, value.low), min(hi, value.high)
        return lo, hi

    def draw_params(self, n, *, rng):
        """Draw ``n`` parameter sets.

        Fixed parameters are repeated; :class:`Uncertain` ones are drawn from their
        (truncated) normal distribution intersected with the parameter's physical
        range; parameters with a joint covariance are drawn from a multivariate
        normal (rejecting draws outside the bounds).

        Parameters
        ----------
        n : int
            Number of parameter sets.
        rng : numpy.random.Generator or int
            Random generator or seed.

        Returns
        -------
        dict
            Parameter name -> array of shape ``(n,)``.

        Examples
        --------
        >>> from soilwave.petro import CRIM, Uncertain
        >>> m = CRIM(porosity=Uncertain(0.4, 0.02), eps_solid=4.7, eps_water=80.0)
        >>> m.draw_params(5, rng=1)["porosity"].shape
        (5,)
        """
        n = int(n)
        if n < 1:
            msg = f"number of parameter draws must be >= 1, got {n}"
            raise InputError(msg)
        rng = np.random.default_rng(rng)
        out = {}
        joint_names = ()
        if self._joint is not None:
            joint_names, mean, cov = self._joint
            bounds = np.array([self._param_bounds(k) for k in joint_names])
            draws = np.empty((0, len(joint_names)))
            for _ in range(100):
                d = rng.multivariate_normal(mean, cov, size=n)
                ok = np.all((d >= bounds[:, 0]) & (d <= bounds[:, 1]), axis=1)
                draws = np.concatenate([draws, d[ok]])
                if len(draws) >= n:
                    break
            else:
                msg = (
                    f"{self.name}: could not draw parameters {joint_names} within their "
                    f"bounds {bounds.tolist()}; the covariance is too wide for the bounds"
                )
                raise ValidRangeError(msg)
            for j, k in enumerate(joint_names):
                out[k] = draws[:n, j]
        for k, v in self._params.items():
            if k in joint_names:
                continue
            if isinstance(v, Uncertain):
                lo, hi = self._bounds[k]
                out[k] = v.draw(n, rng=rng, low=lo, high=hi)
            else:
                out[k] = np.full(n, float(v))
        return out

    # ----- ranges -----------------------------------------------------------------
    @property
    def valid_eps(self):
        """tuple of float: (low, high) permittivity range where the relation was calibrated."""
        if self._valid_eps_decl is not None:
            return tuple(float(x) for x in self._valid_eps_decl)
        lo, hi = self.valid_theta
        p = self.means
        e = self._inverse(np.array([lo, hi]), p)
        return float(max(e[0], 1.0)), float(e[1])

    @property
    def valid_theta(self):
        """tuple of float: (low, high) water-content range (m3/m3) of the calibration."""
        if self._valid_theta_decl is not None:
            return tuple(float(x) for x in self._valid_theta_decl)
        lo, hi = self.valid_eps
        t = self._theta(np.array([lo, hi]), **self.means)
        return float(max(t[0], 0.0)), float(min(t[1], 1.0))

    # ----- relation ---------------------------------------------------------------
    def _theta(self, eps, **params):  # pragma: no cover - abstract
        raise NotImplementedError

    def _eps(self, theta, **params):  # pragma: no cover - abstract
        raise NotImplementedError

    def _has_closed_inverse(self):
        return type(self)._eps is not PetroModel._eps

    def _inverse(self, theta, params):
        if self._has_closed_inverse():
            return self._eps(theta, **params)
        return self._eps_numeric(theta, params)

    def _eps_numeric(self, theta, params):
        """Invert ``_theta`` by vectorised bisection on eps in [1, 200].

        Converges to 1e-12 relative in permittivity (about 60 halvings). Values of
        theta outside [theta(1), theta(200)] raise :class:`ValidRangeError`.
        """
        theta = np.asarray(theta, dtype=float)
        lo = np.ones(1)
        hi = np.full(1, _EPS_SEARCH_MAX)
        t_lo = self._theta(lo, **params)
        t_hi = self._theta(hi, **params)
        t_lo, t_hi, theta_b = np.broadcast_arrays(t_lo, t_hi, theta)
        if np.any(t_hi <= t_lo):
            msg = f"{self.name}: relation does not increase with permittivity; cannot invert"
            raise ValidRangeError(msg)
        bad = (theta_b < t_lo) | (theta_b > t_hi)
        if np.any(bad):
            count, first = _where(bad)
            msg = (
                f"{self.name}: {count} water content value(s) (first at index {first}: "
                f"{float(theta_b[bad][0]):.4g}) have no permittivity in "
                f"[1, {_EPS_SEARCH_MAX:g}]; expected theta between "
                f"{float(np.min(t_lo)):.4g} and {float(np.max(t_hi)):.4g}"
            )
            raise ValidRangeError(msg)
        a = np.ones(theta_b.shape)
        b = np.full(theta_b.shape, _EPS_SEARCH_MAX)
        for _ in range(200):
            mid = 0.5 * (a + b)
            below = self._theta(mid, **params) < theta_b
            a = np.where(below, mid, a)
            b = np.where(below, b, mid)
            if np.all(b - a <= 1e-12 * b):
                break
        return 0.5 * (a + b)

    # ----- checks -----------------------------------------------------------------
    @staticmethod
    def _check_on_range(on_range):
        if on_range not in _ON_RANGE:
            msg = f"on_range must be one of {_ON_RANGE}, got {on_range!r}"
            raise InputError(msg)

    def _check_finite(self, x, what):
        if not np.all(np.isfinite(x)):
            count, first = _where(~np.isfinite(x))
            msg = (
                f"{self.name}: {count} {what} value(s) are not finite (first at index "
                f"{first}); expected finite numbers"
            )
            raise InputError(msg)

    def _range_check(self, x, rng_, what, unit, on_range):
        if on_range == "ignore":
            return
        lo, hi = rng_
        out = (x < lo) | (x > hi)
        if not np.any(out):
            return
        count, first = _where(out)
        msg = (
            f"{self.name}: {count} of {x.size} {what} value(s) lie outside the calibrated "
            f"range {lo:.4g}-{hi:.4g}{unit} (first at index {first}: {float(x[out][0]):.4g}; "
            f"min {float(x.min()):.4g}, max {float(x.max()):.4g}); results there are "
            "extrapolations"
        )
        if on_range == "raise":
            raise ValidRangeError(msg)
        warnings.warn(msg, RangeWarning, stacklevel=4)

    def _check_eps(self, eps, on_range):
        self._check_on_range(on_range)
        self._check_finite(eps, "permittivity")
        if np.any(eps < 1.0):
            count, first = _where(eps < 1.0)
            msg = (
                f"{self.name}: {count} permittivity value(s) are below 1 (first at index "
                f"{first}: {float(eps[eps < 1.0][0]):.4g}); relative permittivity of matter "
                "is >= 1 (vacuum)"
            )
            raise ValidRangeError(msg)
        self._range_check(eps, self.valid_eps, "permittivity", "", on_range)

    def _check_theta(self, theta, on_range):
        self._check_on_range(on_range)
        self._check_finite(theta, "water content")
        bad = (theta < 0.0) | (theta > 1.0)
        if np.any(bad):
            count, first = _where(bad)
            msg = (
                f"{self.name}: {count} water content value(s) lie outside 0-1 m3/m3 (first at "
                f"index {first}: {float(theta[bad][0]):.4g}); a volume fraction must be in [0, 1]"
            )
            raise ValidRangeError(msg)
        self._range_check(theta, self.valid_theta, "water content", " m3/m3", on_range)

    def _check_result(self, out, inp, what):
        """Refuse to return NaN/inf: the relation has no value for these inputs."""
        out = np.asarray(out)
        if np.all(np.isfinite(out)):
            return
        bad = ~np.isfinite(out)
        count, first = _where(bad)
        value = float(np.broadcast_to(inp, out.shape)[bad][0])
        msg = (
            f"{self.name}: the relation has no finite value for {count} {what} input(s) "
            f"(first at index {first}: {value:.4g}) with parameters {self.means}; "
            f"expected inputs inside the valid range"
        )
        raise ValidRangeError(msg)

    # ----- public evaluation ------------------------------------------------------
    def water_content(self, eps, *, on_range="warn"):
        """Volumetric water content (m3/m3) from bulk relative permittivity.

        Uses the parameter means.

        Parameters
        ----------
        eps : array_like
            Bulk relative permittivity (dimensionless), any shape.
        on_range : {"warn", "raise", "ignore"}
            What to do with values outside :attr:`valid_eps`: issue a
            :class:`~soilwave.errors.RangeWarning`, raise
            :class:`~soilwave.errors.ValidRangeError`, or stay silent.
            Values below 1 (impossible) always raise ``ValidRangeError``.

        Returns
        -------
        numpy.ndarray or float
            Water content, m3/m3, same shape as ``eps``.

        Examples
        --------
        >>> from soilwave.petro import Topp
        >>> round(float(Topp().water_content(20.0)), 4)
        0.3454
        """
        e = np.asarray(eps, dtype=float)
        self._check_eps(e, on_range)
        with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
            theta = self._theta(e, **self.means)
        self._check_result(theta, e, "permittivity")
        return theta if np.ndim(theta) else float(theta)

    def permittivity(self, theta, *, on_range="warn"):
        """Bulk relative permittivity from volumetric water content (m3/m3).

        Uses the parameter means, a closed-form inverse where the model has one,
        otherwise numeric root finding.

        Parameters
        ----------
        theta : array_like
            Volumetric water content, m3/m3, in [0, 1].
        on_range : {"warn", "raise", "ignore"}
            Handling of values outside :attr:`valid_theta` (see :meth:`water_content`).
            Values outside [0, 1] always raise ``ValidRangeError``.

        Returns
        -------
        numpy.ndarray or float
            Relative permittivity (dimensionless).

        Examples
        --------
        >>> from soilwave.petro import CRIM
        >>> round(float(CRIM(porosity=0.4, eps_solid=4.7, eps_water=80.0).permittivity(0.2)), 4)
        10.8216
        """
        t = np.asarray(theta, dtype=float)
        self._check_theta(t, on_range)
        with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
            eps = np.asarray(self._inverse(t, self.means), dtype=float)
        self._check_result(eps, t, "water content")
        if np.any(eps < 1.0):
            bad = eps < 1.0
            count, first = _where(bad)
            msg = (
                f"{self.name}: {count} water content value(s) (first at index {first}: "
                f"{float(np.broadcast_to(t, eps.shape)[bad][0]):.4g}) map to a permittivity "
                "below 1; expected theta above the relation's value at eps = 1"
            )
            raise ValidRangeError(msg)
        return eps if eps.ndim else float(eps)

    def water_content_draws(self, eps, *, rng, on_range="warn"):
        """Water content draws carrying permittivity and parameter uncertainty.

        One parameter set is drawn per sample (axis 0 of ``eps``) and applied to
        every value of that sample; :attr:`model_error` adds independent normal
        scatter to each value.

        Parameters
        ----------
        eps : array_like
            Posterior draws of relative permittivity, shape ``(n_sample, ...)``.
        rng : numpy.random.Generator or int
            Random generator or seed.
        on_range : {"warn", "raise", "ignore"}
            Handling of values outside :attr:`valid_eps`.

        Returns
        -------
        numpy.ndarray
            Water content draws, m3/m3, same shape as ``eps``.

        Examples
        --------
        >>> import numpy as np
        >>> from soilwave.petro import Topp
        >>> th = Topp(model_error=0.013).water_content_draws(np.full((500, 3), 20.0), rng=0)
        >>> th.shape
        (500, 3)
        """
        e = np.asarray(eps, dtype=float)
        if e.ndim < 1 or e.shape[0] < 1:
            msg = f"eps draws must have a leading sample axis, got shape {e.shape}"
            raise InputError(msg)
        self._check_eps(e, on_range)
        rng = np.random.default_rng(rng)
        n = e.shape[0]
        tail = (1,) * (e.ndim - 1)
        p = {k: v.reshape((n, *tail)) for k, v in self.draw_params(n, rng=rng).items()}
        with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
            theta = np.broadcast_to(self._theta(e, **p), e.shape).astype(float)
        self._check_result(theta, e, "permittivity")
        if self._model_error > 0.0:
            theta = theta + rng.normal(0.0, self._model_error, size=e.shape)
        return theta

    # ----- description ------------------------------------------------------------
    def _extra_repr(self):
        return {}

    def __repr__(self):
        parts = [f"{k}={v!r}" for k, v in self._params.items()]
        parts += [f"{k}={v!r}" for k, v in self._extra_repr().items()]
        if self._model_error:
            parts.append(f"model_error={self._model_error!r}")
        if self._joint is not None:
            parts.append(f"joint={list(self._joint[0])}")
        return f"{type(self).__name__}({', '.join(parts)})"

    def to_attrs(self):
        """Provenance as a flat dict of str/float, for NetCDF attributes.

        Returns
        -------
        dict
            Keys ``petro_model``, ``petro_reference``, ``petro_params`` (text),
            ``petro_<name>`` (mean) and ``petro_<name>_sd`` for each parameter,
            ``petro_model_error``, ``petro_valid_eps_low/high`` and, after a
            calibration, ``petro_covariance`` (JSON text).

        Examples
        --------
        >>> from soilwave.petro import Topp
        >>> Topp().to_attrs()["petro_model"]
        'Topp'
        """
        attrs = {
            "petro_model": type(self).__name__,
            "petro_reference": self.reference,
            "petro_params": ", ".join(
                f"{k}={_format_value(m)}"
                + (
                    f" +/- {_format_value(self._params[k].sd)}"
                    if isinstance(self._params[k], Uncertain)
                    else ""
                )
                for k, m in self.means.items()
            ),
        }
        for k, v in self._params.items():
            attrs[f"petro_{k}"] = float(v.mean if isinstance(v, Uncertain) else v)
            attrs[f"petro_{k}_sd"] = float(v.sd if isinstance(v, Uncertain) else 0.0)
        for k, v in self._extra_repr().items():
            attrs[f"petro_{k}"] = v if isinstance(v, str) else float(v)
        attrs["petro_model_error"] = float(self._model_error)
        lo, hi = self.valid_eps
        attrs["petro_valid_eps_low"] = float(lo)
        attrs["petro_valid_eps_high"] = float(hi)
        if self._joint is not None:
            names, _, cov = self._joint
            attrs["petro_covariance"] = json.dumps(
                {"names": list(names), "matrix": np.asarray(cov).tolist()}
            )
        return attrs
