"""Reflection and transmission of plane waves at a planar interface.

Layer-1 physics kernels (pure numpy, vectorised, broadcasting). Both media are
non-magnetic, lossless dielectrics described by their relative permittivity
(dimensionless, ``>= 1``); the refractive index is ``n = sqrt(eps)``. Angles are
in degrees, measured from the interface normal in the upper (incident) medium.

Sign conventions
----------------
All coefficients are ratios of *electric-field* amplitudes (reflected or
transmitted over incident).

- TE (s, electric field parallel to the interface)::

      r_TE = (n1 cos t1 - n2 cos t2) / (n1 cos t1 + n2 cos t2)
      t_TE = 2 n1 cos t1 / (n1 cos t1 + n2 cos t2) = 1 + r_TE

- TM (p, electric field in the plane of incidence). ``r_TM`` is the ratio of
  the *tangential* components of the reflected and incident electric fields,
  both taken along the same direction in the interface::

      r_TM = (n1 cos t2 - n2 cos t1) / (n1 cos t2 + n2 cos t1)
      t_TM = 2 n1 cos t1 / (n1 cos t2 + n2 cos t1)

  With this choice ``r_TM = r_TE = R`` at normal incidence, where
  ``R = (n1 - n2) / (n1 + n2)`` is :func:`reflection_coefficient`. Texts that
  refer the TM reflected field to the field vector itself (e.g. Born & Wolf's
  ``r_parallel``) have the opposite sign: ``r_TM(theirs) = -r_TM(ours)``, which
  is ``-R`` at normal incidence. ``t_TM`` is the same in both conventions.
  ``r_TM`` vanishes at the Brewster angle in either convention.

Energy conservation (below the critical angle, both polarisations)::

    |r|^2 + (n2 cos t2) / (n1 cos t1) |t|^2 = 1

Beyond the critical angle (``eps_lower < eps_upper``) ``cos t2`` is imaginary,
the coefficients are complex and ``|r| = 1`` (total reflection). The branch is
chosen so that ``Im(cos t2) >= 0``, i.e. a field decaying away from the
interface for the time factor ``exp(-i omega t)`` (the sign of the phase of
``r`` follows that choice).
"""

from __future__ import annotations

import numpy as np

from soilwave.errors import InputError
from soilwave.wave import _as_float, _check_eps, _first_bad, _out

__all__ = [
    "brewster_angle",
    "critical_angle",
    "fresnel_coefficients",
    "reflection_coefficient",
    "transmission_coefficient",
]


def _indices(eps_upper, eps_lower):
    e1 = _check_eps(eps_upper, "eps_upper")
    e2 = _check_eps(eps_lower, "eps_lower")
    return np.sqrt(e1), np.sqrt(e2)


def reflection_coefficient(eps_upper, eps_lower):
    """Normal-incidence amplitude reflection coefficient.

    ``R = (sqrt(e1) - sqrt(e2)) / (sqrt(e1) + sqrt(e2))``; negative when the
    wave enters a medium of higher permittivity (e.g. a wetter layer).

    Parameters
    ----------
    eps_upper, eps_lower : float or array_like
        Relative permittivity above and below the interface (``>= 1``).

    Returns
    -------
    float or ndarray
        Amplitude reflection coefficient (dimensionless, between -1 and 1).

    Examples
    --------
    >>> float(reflection_coefficient(1.0, 9.0))
    -0.5
    """
    n1, n2 = _indices(eps_upper, eps_lower)
    return _out((n1 - n2) / (n1 + n2))


def transmission_coefficient(eps_upper, eps_lower):
    """Normal-incidence amplitude transmission coefficient ``T = 1 + R``.

    ``T = 2 sqrt(e1) / (sqrt(e1) + sqrt(e2))``.

    Parameters
    ----------
    eps_upper, eps_lower : float or array_like
        Relative permittivity above and below the interface (``>= 1``).

    Returns
    -------
    float or ndarray
        Amplitude transmission coefficient (dimensionless, between 0 and 2).

    Examples
    --------
    >>> float(transmission_coefficient(1.0, 9.0))
    0.5
    """
    n1, n2 = _indices(eps_upper, eps_lower)
    return _out(2.0 * n1 / (n1 + n2))


def fresnel_coefficients(eps_upper, eps_lower, angle, *, polarization="TE"):
    """Fresnel amplitude coefficients at oblique incidence.

    See the module docstring for the sign convention (``r_TM = r_TE`` at
    normal incidence).

    Parameters
    ----------
    eps_upper, eps_lower : float or array_like
        Relative permittivity of the incident (upper) and lower media (``>= 1``).
    angle : float or array_like
        Angle of incidence in degrees from the normal, ``0 <= angle <= 90``.
    polarization : {"TE", "TM"}, optional
        TE: electric field parallel to the interface; TM: in the plane of
        incidence.

    Returns
    -------
    r, t : complex ndarray
        Amplitude reflection and transmission coefficients, broadcast over all
        inputs. Beyond the critical angle ``|r| = 1``.

    Raises
    ------
    InputError
        For an angle outside 0-90 degrees or an unknown polarization.
    ValidRangeError
        For a permittivity below 1.

    Examples
    --------
    >>> r, t = fresnel_coefficients(1.0, 9.0, 30.0)
    >>> round(float(r.real), 4)
    -0.5471
    """
    pol = str(polarization).upper()
    if pol not in ("TE", "TM"):
        msg = f"polarization must be 'TE' or 'TM'; got {polarization!r}"
        raise InputError(msg)
    n1, n2 = _indices(eps_upper, eps_lower)
    theta = _as_float(angle, "angle")
    ok = (theta >= 0.0) & (theta <= 90.0)
    if not np.all(ok):
        val, where = _first_bad(theta, ok)
        msg = f"angle must be between 0 and 90 degrees from the normal; got {val!r}{where}"
        raise InputError(msg)
    rad = np.deg2rad(theta)
    cos1 = np.cos(rad).astype(complex)
    sin1 = np.sin(rad)
    sin2_sq = (n1 / n2) ** 2 * sin1**2
    cos2 = np.sqrt((1.0 - sin2_sq).astype(complex) + 0j)
    # principal complex sqrt of a negative real (+0j) has Im >= 0: decaying branch
    if pol == "TE":
        den = n1 * cos1 + n2 * cos2
        r = (n1 * cos1 - n2 * cos2) / den
        t = 2.0 * n1 * cos1 / den
    else:
        den = n1 * cos2 + n2 * cos1
        r = (n1 * cos2 - n2 * cos1) / den
        t = 2.0 * n1 * cos1 / den
    return np.asarray(r), np.asarray(t)


def critical_angle(eps_upper, eps_lower):
    """Critical angle of total reflection, ``arcsin(sqrt(e2 / e1))``.

    Parameters
    ----------
    eps_upper, eps_lower : float or array_like
        Relative permittivity of the incident (upper) and lower media (``>= 1``).

    Returns
    -------
    float or ndarray
        Angle in degrees from the normal; NaN where there is none
        (``eps_lower >= eps_upper``).

    Examples
    --------
    >>> round(float(critical_angle(9.0, 1.0)), 4)
    19.4712
    """
    n1, n2 = _indices(eps_upper, eps_lower)
    ratio = n2 / n1
    with np.errstate(invalid="ignore"):
        ang = np.where(ratio < 1.0, np.rad2deg(np.arcsin(np.minimum(ratio, 1.0))), np.nan)
    return _out(ang)


def brewster_angle(eps_upper, eps_lower):
    """Brewster angle, where ``r_TM = 0``: ``arctan(sqrt(e2 / e1))``.

    Parameters
    ----------
    eps_upper, eps_lower : float or array_like
        Relative permittivity of the incident (upper) and lower media (``>= 1``).

    Returns
    -------
    float or ndarray
        Angle in degrees from the normal.

    Examples
    --------
    >>> round(float(brewster_angle(1.0, 9.0)), 3)
    71.565
    """
    n1, n2 = _indices(eps_upper, eps_lower)
    return _out(np.rad2deg(np.arctan(n2 / n1)))
