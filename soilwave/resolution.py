"""Resolution and illuminated area of a GPR survey.

Layer-1 physics kernels (pure numpy, vectorised, broadcasting). Units:
permittivity relative (dimensionless), frequency MHz (the antenna's centre
frequency), conductivity mS/m, depth and lengths m.

Every length here is a rule of thumb built on the wavelength in the ground,
:func:`soilwave.wave.wavelength` (exact phase velocity, so a conductive soil
shortens it slightly). They describe the order of magnitude of what a survey
can separate, not sharp limits.
"""

from __future__ import annotations

import numpy as np

from soilwave.errors import InputError, ValidRangeError
from soilwave.wave import _check_min, _out, phase_velocity, wavelength

__all__ = ["footprint", "fresnel_zone_radius", "vertical_resolution"]

_METHODS = ("quarter_wavelength", "pulse_width")


def vertical_resolution(eps, frequency, *, method="quarter_wavelength", conductivity=0.0):
    """Smallest separable layer thickness (vertical resolution).

    Parameters
    ----------
    eps : float or array_like
        Relative permittivity of the ground (dimensionless, ``>= 1``).
    frequency : float or array_like
        Centre frequency in MHz (``> 0``).
    method : {"quarter_wavelength", "pulse_width"}, optional
        ``"quarter_wavelength"`` (default): ``lambda / 4``, the usual
        criterion for two reflections to be told apart (common practice).
        ``"pulse_width"``: ``v tau / 2`` with the pulse length ``tau = 1 / f``,
        i.e. assuming the emitted pulse lasts about one period of the centre
        frequency (common practice); this equals ``lambda / 2`` and is the
        more conservative figure.
    conductivity : float or array_like, optional
        Electrical conductivity in mS/m (default 0, lossless).

    Returns
    -------
    float or ndarray
        Vertical resolution in m.

    Examples
    --------
    >>> round(float(vertical_resolution(9.0, 100.0)), 4)
    0.2498
    >>> round(float(vertical_resolution(9.0, 100.0, method="pulse_width")), 4)
    0.4997
    """
    if method not in _METHODS:
        msg = f"method must be one of {_METHODS}; got {method!r}"
        raise InputError(msg)
    if method == "quarter_wavelength":
        return _out(np.asarray(wavelength(eps, frequency, conductivity=conductivity)) / 4.0)
    v = np.asarray(phase_velocity(eps, conductivity, frequency))  # m/ns
    tau = 1e3 / np.asarray(frequency, dtype=float)  # one period in ns (f in MHz)
    return _out(v * tau / 2.0)


def fresnel_zone_radius(depth, eps, frequency, *, conductivity=0.0):
    """Radius of the first Fresnel zone on a reflector at a given depth.

    ``r = sqrt(lambda d / 2 + lambda^2 / 16)`` (standard; the zone within which
    path lengths differ by less than a quarter wavelength from the zero-offset
    path, for coincident antennas).

    Parameters
    ----------
    depth : float or array_like
        Depth of the reflector in m (``>= 0``).
    eps : float or array_like
        Relative permittivity of the ground above it (``>= 1``).
    frequency : float or array_like
        Centre frequency in MHz (``> 0``).
    conductivity : float or array_like, optional
        Electrical conductivity in mS/m (default 0).

    Returns
    -------
    float or ndarray
        Radius in m.

    Examples
    --------
    >>> round(float(fresnel_zone_radius(1.0, 9.0, 100.0)), 4)
    0.7497
    """
    d = _check_min(depth, "depth", 0.0, expected="depth in m")
    lam = np.asarray(wavelength(eps, frequency, conductivity=conductivity))
    return _out(np.sqrt(lam * d / 2.0 + lam**2 / 16.0))


def footprint(depth, eps, frequency, *, conductivity=0.0):
    """Approximate antenna footprint (illuminated ellipse) at a given depth.

    Long axis ``A = lambda / 4 + d / sqrt(eps - 1)``, short axis ``A / 2``.
    This is the footprint approximation attributed to Annan and co-workers
    (value from memory, not re-read in the source). It is undefined for
    ``eps = 1`` (no refraction focuses the beam).

    Parameters
    ----------
    depth : float or array_like
        Depth in m (``>= 0``).
    eps : float or array_like
        Relative permittivity of the ground (``> 1``).
    frequency : float or array_like
        Centre frequency in MHz (``> 0``).
    conductivity : float or array_like, optional
        Electrical conductivity in mS/m (default 0).

    Returns
    -------
    long_axis, short_axis : float or ndarray
        Ellipse axes in m (full lengths, as in the source formula).

    Examples
    --------
    >>> a, b = footprint(1.0, 9.0, 100.0)
    >>> round(float(a), 4), round(float(b), 4)
    (0.6034, 0.3017)
    """
    d = _check_min(depth, "depth", 0.0, expected="depth in m")
    e = _check_min(
        eps,
        "eps",
        1.0,
        strict=True,
        error=ValidRangeError,
        expected="footprint formula needs relative permittivity above 1",
    )
    lam = np.asarray(wavelength(e, frequency, conductivity=conductivity))
    long_axis = lam / 4.0 + d / np.sqrt(e - 1.0)
    return _out(long_axis), _out(long_axis / 2.0)
