"""Plane-wave propagation in soil: velocity, attenuation, skin depth, wavelength.

Layer-1 physics kernels (pure numpy, vectorised, broadcasting). Units throughout:

- relative permittivity ``eps``: dimensionless, ``>= 1``;
- electrical conductivity: mS/m, ``>= 0``;
- frequency: MHz, ``> 0``;
- velocity: m/ns; distance: m; attenuation: Np/m or dB/m as named.

The medium is a homogeneous, isotropic, non-magnetic (mu = mu_0) conductive
dielectric with a frequency-independent real permittivity and conductivity.
For a plane wave ``exp(i(k z - omega t))`` with complex wavenumber
``k = beta + i alpha`` (amplitude decays as ``exp(-alpha z)``) the exact
solution is (standard electromagnetic theory, e.g. any textbook treatment of
waves in lossy media)::

    p     = sigma / (omega eps_0 eps)                         (loss tangent)
    alpha = omega sqrt(mu eps_0 eps / 2) [sqrt(1 + p^2) - 1]^(1/2)   Np/m
    beta  = omega sqrt(mu eps_0 eps / 2) [sqrt(1 + p^2) + 1]^(1/2)   rad/m
    v     = omega / beta

In the low-loss limit ``p << 1``: ``alpha -> sigma Z0 / (2 sqrt(eps))`` with
``Z0 = sqrt(mu_0 / eps_0)``, independent of frequency, and ``v -> c / sqrt(eps)``.

Constants come from :mod:`scipy.constants` (CODATA).
"""

from __future__ import annotations

import numpy as np
from scipy import constants as _const

from soilwave.errors import InputError, ValidRangeError

__all__ = [
    "SPEED_OF_LIGHT",
    "attenuation",
    "attenuation_rule_db",
    "loss_tangent",
    "permittivity_from_velocity",
    "phase_velocity",
    "skin_depth",
    "wave_velocity",
    "wavelength",
]

#: Speed of light in vacuum, m/ns (CODATA value from :mod:`scipy.constants`).
SPEED_OF_LIGHT: float = _const.c * 1e-9

#: Impedance of free space sqrt(mu_0 / eps_0), ohm.
_Z0: float = float(np.sqrt(_const.mu_0 / _const.epsilon_0))

#: Nepers to decibels: 20 log10(e).
_DB_PER_NEPER: float = float(20.0 / np.log(10.0))


# --- input checks (shared by the layer-1 wave-physics modules) -----------------


def _as_float(value, name: str) -> np.ndarray:
    """Return ``value`` as a float array or raise :class:`InputError` naming it."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        msg = f"{name} must be a number or an array of numbers; got {value!r} ({exc})"
        raise InputError(msg) from None
    return arr


def _first_bad(arr: np.ndarray, ok: np.ndarray) -> tuple[float, str]:
    """Return the first offending value and a description of where it is."""
    bad = np.argwhere(~ok)[0]
    val = float(arr[tuple(bad)])
    where = "" if arr.ndim == 0 else f" at index {tuple(int(i) for i in bad)}"
    return val, where


def _check_min(
    value,
    name: str,
    minimum: float,
    *,
    strict: bool = False,
    error: type[InputError] = InputError,
    expected: str = "",
) -> np.ndarray:
    """Convert to float array and check ``value >= minimum`` (``>`` if strict).

    NaN always fails the check. The error message names the argument, the
    first offending value, its index for arrays, and the expected range.
    """
    arr = _as_float(value, name)
    ok = arr > minimum if strict else arr >= minimum
    if not np.all(ok):
        val, where = _first_bad(arr, ok)
        op = ">" if strict else ">="
        extra = f" ({expected})" if expected else ""
        msg = f"{name} must be {op} {minimum:g}{extra}; got {val!r}{where}"
        raise error(msg)
    return arr


def _check_eps(eps, name: str = "eps") -> np.ndarray:
    return _check_min(
        eps,
        name,
        1.0,
        error=ValidRangeError,
        expected="relative permittivity of a non-magnetic medium, dimensionless",
    )


def _check_sigma(conductivity, name: str = "conductivity") -> np.ndarray:
    return _check_min(conductivity, name, 0.0, expected="electrical conductivity in mS/m")


def _check_freq(frequency, name: str = "frequency") -> np.ndarray:
    return _check_min(frequency, name, 0.0, strict=True, expected="frequency in MHz")


def _out(arr):
    """Return numpy scalars for 0-d results, arrays otherwise."""
    arr = np.asarray(arr)
    return arr[()] if arr.ndim == 0 else arr


# --- velocity -------------------------------------------------------------------


def wave_velocity(eps):
    """Electromagnetic wave velocity in a low-loss, non-magnetic medium.

    ``v = c / sqrt(eps)``, the high-frequency (low-loss) limit of
    :func:`phase_velocity`.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).

    Returns
    -------
    float or ndarray
        Velocity in m/ns.

    Raises
    ------
    ValidRangeError
        If any ``eps < 1`` (or NaN).

    Examples
    --------
    >>> round(float(wave_velocity(9.0)), 4)
    0.0999
    """
    e = _check_eps(eps)
    return _out(SPEED_OF_LIGHT / np.sqrt(e))


def permittivity_from_velocity(v):
    """Relative permittivity from a low-loss wave velocity, ``eps = (c / v)^2``.

    Parameters
    ----------
    v : float or array_like
        Velocity in m/ns, ``0 < v <= c`` (c = 0.2998 m/ns).

    Returns
    -------
    float or ndarray
        Relative permittivity (dimensionless).

    Raises
    ------
    InputError
        If any ``v <= 0``.
    ValidRangeError
        If any ``v`` exceeds the speed of light (would give ``eps < 1``).

    Examples
    --------
    >>> round(float(permittivity_from_velocity(0.1)), 3)
    8.988
    """
    vel = _check_min(v, "v", 0.0, strict=True, expected="velocity in m/ns")
    ok = vel <= SPEED_OF_LIGHT
    if not np.all(ok):
        val, where = _first_bad(vel, ok)
        msg = (
            f"v must be <= the speed of light {SPEED_OF_LIGHT:.9f} m/ns "
            f"(eps >= 1); got {val!r}{where}"
        )
        raise ValidRangeError(msg)
    return _out((SPEED_OF_LIGHT / vel) ** 2)


# --- lossy medium -----------------------------------------------------------------


def _omega_p(eps, conductivity, frequency):
    """Validated angular frequency (rad/s), eps, and loss tangent."""
    e = _check_eps(eps)
    s = _check_sigma(conductivity)
    f = _check_freq(frequency)
    omega = 2.0 * np.pi * f * 1e6
    p = (s * 1e-3) / (omega * _const.epsilon_0 * e)
    return omega, e, p


def loss_tangent(eps, conductivity, frequency):
    """Loss tangent ``sigma / (omega eps_0 eps)`` of a conductive dielectric.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).
    conductivity : float or array_like
        Electrical conductivity in mS/m (``>= 0``).
    frequency : float or array_like
        Frequency in MHz (``> 0``).

    Returns
    -------
    float or ndarray
        Loss tangent (dimensionless). Below about 0.1 the medium is "low loss".

    Examples
    --------
    >>> round(float(loss_tangent(25.0, 10.0, 100.0)), 4)
    0.0719
    """
    _, _, p = _omega_p(eps, conductivity, frequency)
    return _out(p)


def _alpha_beta(eps, conductivity, frequency):
    omega, e, p = _omega_p(eps, conductivity, frequency)
    k0 = omega * np.sqrt(_const.mu_0 * _const.epsilon_0 * e / 2.0)
    root = np.sqrt(1.0 + p * p)
    # sqrt(1 + p^2) - 1 written as p^2 / (sqrt(1 + p^2) + 1): no cancellation for small p
    alpha = k0 * np.sqrt(p * p / (root + 1.0))
    beta = k0 * np.sqrt(root + 1.0)
    return omega, alpha, beta


def phase_velocity(eps, conductivity, frequency):
    """Exact plane-wave phase velocity in a non-magnetic conductive dielectric.

    ``v = omega / beta`` with ``beta`` from the exact dispersion relation (see the
    module docstring). Equals ``c / sqrt(eps)`` when the conductivity is zero and
    decreases as the loss tangent grows.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).
    conductivity : float or array_like
        Electrical conductivity in mS/m (``>= 0``).
    frequency : float or array_like
        Frequency in MHz (``> 0``).

    Returns
    -------
    float or ndarray
        Phase velocity in m/ns.

    Examples
    --------
    >>> round(float(phase_velocity(25.0, 100.0, 100.0)), 5)
    0.05676
    """
    omega, _, beta = _alpha_beta(eps, conductivity, frequency)
    return _out(omega / beta * 1e-9)


def attenuation(eps, conductivity, frequency, *, unit="Np/m", low_loss=False):
    """Plane-wave amplitude attenuation coefficient alpha.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).
    conductivity : float or array_like
        Electrical conductivity in mS/m (``>= 0``).
    frequency : float or array_like
        Frequency in MHz (``> 0``). Ignored (but still validated) when
        ``low_loss=True``.
    unit : {"Np/m", "dB/m"}, optional
        Unit of the result. 1 Np = 20 log10(e) = 8.686 dB.
    low_loss : bool, optional
        If False (default) use the exact expression; if True use the low-loss
        limit ``sigma Z0 / (2 sqrt(eps))``, which does not depend on frequency
        and overestimates the exact value, increasingly so as the loss tangent
        grows.

    Returns
    -------
    float or ndarray
        Attenuation in the requested unit (amplitude decays as ``exp(-alpha z)``).

    Raises
    ------
    InputError
        For a negative conductivity, non-positive frequency or unknown unit.
    ValidRangeError
        For ``eps < 1``.

    Examples
    --------
    >>> round(float(attenuation(25.0, 10.0, 100.0)), 5)
    0.37649
    >>> round(float(attenuation(25.0, 10.0, 100.0, unit="dB/m", low_loss=True)), 3)
    3.272
    """
    if unit not in ("Np/m", "dB/m"):
        msg = f"unit must be 'Np/m' or 'dB/m'; got {unit!r}"
        raise InputError(msg)
    if low_loss:
        _omega_p(eps, conductivity, frequency)  # validate all inputs alike
        e = np.asarray(eps, dtype=float)
        s = np.asarray(conductivity, dtype=float)
        f = np.asarray(frequency, dtype=float)
        alpha = s * 1e-3 * _Z0 / (2.0 * np.sqrt(e))
        alpha = alpha + np.zeros_like(f)  # keep the broadcast shape of all inputs
    else:
        _, alpha, _ = _alpha_beta(eps, conductivity, frequency)
    if unit == "dB/m":
        alpha = alpha * _DB_PER_NEPER
    return _out(alpha)


def attenuation_rule_db(eps, conductivity):
    """Attenuation rule of thumb ``1.69 sigma / sqrt(eps)`` dB/m.

    This is the widely quoted field rule for GPR attenuation in low-loss soil
    (attributed to Annan; the coefficient is a value from memory, not re-read
    in the source). The physical low-loss limit of :func:`attenuation` gives
    ``1.636 sigma / sqrt(eps)`` dB/m, so the rule is about 3 % high; use
    :func:`attenuation` for computation and this only where the rule itself is
    wanted.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).
    conductivity : float or array_like
        Electrical conductivity in mS/m (``>= 0``).

    Returns
    -------
    float or ndarray
        Attenuation in dB/m.

    Examples
    --------
    >>> round(float(attenuation_rule_db(25.0, 10.0)), 2)
    3.38
    """
    e = _check_eps(eps)
    s = _check_sigma(conductivity)
    return _out(1.69 * s / np.sqrt(e))


def skin_depth(eps, conductivity, frequency):
    """Skin depth ``1 / alpha``: the distance over which amplitude falls by 1/e.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).
    conductivity : float or array_like
        Electrical conductivity in mS/m (``>= 0``).
    frequency : float or array_like
        Frequency in MHz (``> 0``).

    Returns
    -------
    float or ndarray
        Skin depth in m; ``inf`` for a lossless medium (zero conductivity).

    Examples
    --------
    >>> round(float(skin_depth(9.0, 1.0, 100.0)), 3)
    15.927
    """
    _, alpha, _ = _alpha_beta(eps, conductivity, frequency)
    with np.errstate(divide="ignore"):
        depth = np.where(alpha > 0, 1.0 / np.where(alpha > 0, alpha, 1.0), np.inf)
    return _out(depth)


def wavelength(eps, frequency, *, conductivity=0.0):
    """Wavelength ``v / f`` in the medium, using the exact phase velocity.

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity (dimensionless, ``>= 1``).
    frequency : float or array_like
        Frequency in MHz (``> 0``).
    conductivity : float or array_like, optional
        Electrical conductivity in mS/m (default 0: lossless, ``v = c/sqrt(eps)``).

    Returns
    -------
    float or ndarray
        Wavelength in m.

    Examples
    --------
    >>> round(float(wavelength(9.0, 100.0)), 4)
    0.9993
    """
    v = np.asarray(phase_velocity(eps, conductivity, frequency))
    f = np.asarray(frequency, dtype=float)
    # v in m/ns = 1e9 m/s; f in MHz = 1e6 1/s  ->  lambda = v * 1e3 / f  (m)
    return _out(v * 1e3 / f)
