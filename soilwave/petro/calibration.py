"""Site calibration of a petrophysical model from (permittivity, water content) pairs.

:func:`calibrate` fits chosen free parameters of a :class:`~soilwave.petro.PetroModel`
by (weighted) nonlinear least squares (``scipy.optimize.least_squares``) on water
content residuals and returns a :class:`Calibration`. Its ``model`` has the free
parameters replaced by :class:`~soilwave.petro.Uncertain` values whose standard
deviations come from the parameter covariance, stores the full covariance so that
:meth:`~soilwave.petro.PetroModel.water_content_draws` draws the parameters
jointly (multivariate normal), and uses the residual standard deviation as the
model error (scatter of individual values about the fitted relation).

Covariance (Gauss-Newton, linearised at the optimum, J the Jacobian of the
weighted residuals):

- ``theta_sigma`` not given: ``s^2 (J^T J)^-1`` with ``s^2 = SSR / (n - p)``;
- ``theta_sigma`` given (absolute sd of the reference water contents): ``(J^T J)^-1``.

Examples
--------
>>> import numpy as np
>>> from soilwave.petro import SqrtLinear, calibrate
>>> rng = np.random.default_rng(0)
>>> eps = np.linspace(4, 30, 20)
>>> theta = 0.12 * np.sqrt(eps) - 0.18 + rng.normal(0, 0.01, eps.size)
>>> cal = calibrate(SqrtLinear(0.1, -0.1), eps, theta)
>>> cal.n_pairs, cal.free
(20, ('slope', 'intercept'))
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize

from soilwave.errors import CalibrationError, ConvergenceWarning
from soilwave.petro.base import PetroModel, Uncertain

__all__ = ["Calibration", "calibrate"]


@dataclass(frozen=True)
class Calibration:
    """Result of :func:`calibrate`.

    Attributes
    ----------
    model : PetroModel
        Calibrated model: free parameters are :class:`Uncertain` (mean = estimate,
        sd = standard error), drawn jointly with :attr:`covariance`; its
        ``model_error`` is the residual standard deviation.
    free : tuple of str
        Names of the fitted parameters, in the order of :attr:`covariance`.
    estimate : dict
        Parameter name -> fitted value.
    standard_error : dict
        Parameter name -> standard error.
    covariance : numpy.ndarray
        Parameter covariance, shape ``(p, p)``.
    rmse : float
        Root-mean-square residual water content, m3/m3 (divided by n).
    residual_sd : float
        Residual standard deviation sqrt(SSR / (n - p)), m3/m3.
    n_pairs : int
        Number of calibration pairs.
    residuals : numpy.ndarray
        Fitted minus reference water content, m3/m3, per pair.
    message : str
        Optimiser status message.
    """

    model: PetroModel
    free: tuple
    estimate: dict
    standard_error: dict
    covariance: np.ndarray = field(repr=False)
    rmse: float
    residual_sd: float
    n_pairs: int
    residuals: np.ndarray = field(repr=False)
    message: str = ""

    @property
    def correlation(self):
        """numpy.ndarray: parameter correlation matrix."""
        sd = np.sqrt(np.diag(self.covariance))
        return self.covariance / np.outer(sd, sd)

    def to_attrs(self):
        """Calibration provenance as flat str/float attributes (model attrs plus fit stats)."""
        attrs = self.model.to_attrs()
        attrs["petro_calibration_free"] = ", ".join(self.free)
        attrs["petro_calibration_n_pairs"] = float(self.n_pairs)
        attrs["petro_calibration_rmse"] = float(self.rmse)
        attrs["petro_calibration_residual_sd"] = float(self.residual_sd)
        return attrs


def _check_pairs(eps, theta, theta_sigma, n_free):
    eps = np.asarray(eps, dtype=float)
    theta = np.asarray(theta, dtype=float)
    if eps.ndim != 1 or theta.ndim != 1:
        msg = (
            f"calibration pairs must be 1-D arrays, got eps shape {eps.shape} and "
            f"theta shape {theta.shape}"
        )
        raise CalibrationError(msg)
    if eps.size != theta.size:
        msg = (
            f"eps and theta have different lengths ({eps.size} and {theta.size}); "
            "expected one water content per permittivity"
        )
        raise CalibrationError(msg)
    for i in range(eps.size):
        e, t = eps[i], theta[i]
        if not (math.isfinite(e) and math.isfinite(t)):
            msg = f"calibration pair {i} is not finite (eps={e}, theta={t}); expected numbers"
            raise CalibrationError(msg)
        if e < 1.0:
            msg = f"calibration pair {i} has eps={e} < 1; relative permittivity is >= 1"
            raise CalibrationError(msg)
        if not 0.0 <= t <= 1.0:
            msg = f"calibration pair {i} has theta={t} outside 0-1 m3/m3"
            raise CalibrationError(msg)
    if eps.size < n_free + 1:
        msg = (
            f"{eps.size} calibration pair(s) for {n_free} free parameter(s); "
            f"need at least {n_free + 1}"
        )
        raise CalibrationError(msg)
    if theta_sigma is None:
        sigma = None
    else:
        sigma = np.broadcast_to(np.asarray(theta_sigma, dtype=float), eps.shape)
        bad = ~(np.isfinite(sigma) & (sigma > 0))
        if np.any(bad):
            i = int(np.argmax(bad))
            msg = f"theta_sigma of calibration pair {i} is {sigma[i]}; expected a positive number"
            raise CalibrationError(msg)
    return eps, theta, sigma


def calibrate(model, eps, theta, *, free=None, theta_sigma=None, model_error=None):
    """Fit free parameters of a petrophysical model to site (eps, theta) pairs.

    Parameters
    ----------
    model : PetroModel
        Model whose fixed parameters are kept and whose free parameters start at
        their current means.
    eps : array_like
        Measured relative permittivity of each pair, shape ``(n,)``.
    theta : array_like
        Reference volumetric water content of each pair (e.g. gravimetric times
        bulk density), m3/m3, shape ``(n,)``.
    free : sequence of str, optional
        Parameters to fit; default the model's usual choice (e.g. ``("slope",
        "intercept")`` for :class:`SqrtLinear`, ``("porosity",)`` for mixing models).
    theta_sigma : float or array_like, optional
        Standard deviation of each reference water content, m3/m3; weights the fit
        and makes the covariance absolute. Default: unweighted, covariance scaled
        by the residual variance.
    model_error : float, optional
        Scatter given to the calibrated model; default the residual standard
        deviation of the fit.

    Returns
    -------
    Calibration

    Raises
    ------
    CalibrationError
        Too few pairs (fewer than free parameters + 1), mismatched lengths, NaN,
        eps < 1, theta outside 0-1 (the message names the pair index), unknown
        free parameters, or parameters that the pairs cannot identify.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.petro import CRIM, calibrate
    >>> truth = CRIM(porosity=0.38, eps_solid=4.7, eps_water=80.0)
    >>> th = np.linspace(0.05, 0.35, 8)
    >>> cal = calibrate(truth.with_params(porosity=0.45), truth.permittivity(th), th)
    >>> round(cal.estimate["porosity"], 6)
    0.38
    """
    if not isinstance(model, PetroModel):
        msg = f"model must be a soilwave PetroModel, got {type(model).__name__}"
        raise CalibrationError(msg)
    free = tuple(model._default_free if free is None else free)
    if isinstance(free, str) or not free:
        msg = f"free must be a non-empty sequence of parameter names, got {free!r}"
        raise CalibrationError(msg)
    unknown = [k for k in free if k not in model._bounds]
    if unknown or len(set(free)) != len(free):
        msg = (
            f"free parameters {list(free)} are not distinct parameters of {model.name}; "
            f"expected names from {list(model._bounds)}"
        )
        raise CalibrationError(msg)
    eps, theta, sigma = _check_pairs(eps, theta, theta_sigma, len(free))
    n, p = eps.size, len(free)

    base = model.means
    lo = np.array([model._bounds[k][0] for k in free], dtype=float)
    hi = np.array([model._bounds[k][1] for k in free], dtype=float)
    x0 = np.clip(np.array([base[k] for k in free], dtype=float), lo, hi)
    weight = 1.0 if sigma is None else 1.0 / sigma

    def resid(x):
        params = {**base, **dict(zip(free, x, strict=True))}
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            r = (model._theta(eps, **params) - theta) * weight
        return np.where(np.isfinite(r), r, 1e6)

    fit = optimize.least_squares(
        resid, x0, bounds=(lo, hi), jac="3-point", x_scale="jac", xtol=1e-12, ftol=1e-12
    )
    x = fit.x
    jac = fit.jac
    jtj = jac.T @ jac
    if np.linalg.matrix_rank(jtj) < p or not np.all(np.isfinite(jtj)):
        msg = (
            f"parameters {list(free)} of {model.name} cannot be identified from these "
            f"{n} pairs (singular information matrix); fix some of them or add pairs "
            "spanning a wider permittivity range"
        )
        raise CalibrationError(msg)
    raw = (model._theta(eps, **{**base, **dict(zip(free, x, strict=True))})) - theta
    ssr_w = float(np.sum(resid(x) ** 2))
    dof = n - p
    cov = np.linalg.inv(jtj)
    if sigma is None:
        cov = cov * ssr_w / dof
    cov = 0.5 * (cov + cov.T)
    se = np.sqrt(np.diag(cov))
    residual_sd = float(math.sqrt(np.sum(raw**2) / dof))
    rmse = float(math.sqrt(np.mean(raw**2)))
    span = hi - lo
    at_bound = (np.abs(x - lo) <= 1e-8 * np.maximum(1.0, np.abs(lo))) | (
        np.abs(x - hi) <= 1e-8 * np.maximum(1.0, np.abs(hi))
    )
    if np.any(at_bound & np.isfinite(span)):
        names = [k for k, b in zip(free, at_bound, strict=True) if b]
        msg = (
            f"calibrated {names} of {model.name} ended on a physical bound; "
            "the standard errors are not reliable"
        )
        warnings.warn(msg, ConvergenceWarning, stacklevel=2)
    if not fit.success:
        msg = f"least-squares calibration of {model.name} did not converge: {fit.message}"
        warnings.warn(msg, ConvergenceWarning, stacklevel=2)

    new_params = {
        k: Uncertain(float(x[j]), float(se[j]), *_bounds_of(model, k)) for j, k in enumerate(free)
    }
    me = residual_sd if model_error is None else model_error
    fitted = model.with_params(**new_params, model_error=me)._with_joint(free, x, cov)
    return Calibration(
        model=fitted,
        free=free,
        estimate={k: float(x[j]) for j, k in enumerate(free)},
        standard_error={k: float(se[j]) for j, k in enumerate(free)},
        covariance=cov,
        rmse=rmse,
        residual_sd=residual_sd,
        n_pairs=n,
        residuals=raw,
        message=str(fit.message),
    )


def _bounds_of(model, name):
    lo, hi = model._bounds[name]
    return float(lo), float(hi)
