"""Static relative permittivity of liquid water as a function of temperature.

Two published fits at atmospheric pressure, T in deg C:

- ``"malmberg-maryott"``: Malmberg, C.G. & Maryott, A.A. (1956), Dielectric constant
  of water from 0 to 100 C, J. Res. Natl. Bur. Stand. 56(1):1-8::

      eps_w = 87.740 - 0.40008 T + 9.398e-4 T^2 - 1.410e-6 T^3

- ``"kaatze"``: Kaatze, U. (1989), Complex permittivity of water as a function of
  frequency and temperature, J. Chem. Eng. Data 34:371-374::

      eps_w = 10^(1.94404 - 1.991e-3 T)

The fits differ by up to about 0.4 between 0 and 40 deg C. Valid range 0-100 deg C.
Pure water; dissolved salts lower the static permittivity slightly.
"""

from __future__ import annotations

import warnings

import numpy as np

from soilwave.errors import InputError, RangeWarning, ValidRangeError

__all__ = ["WATER_FORMULAS", "water_permittivity"]

WATER_FORMULAS = ("malmberg-maryott", "kaatze")
_VALID_T = (0.0, 100.0)


def water_permittivity(temperature, *, formula="malmberg-maryott", on_range="warn"):
    """Static relative permittivity of liquid water at a temperature.

    Parameters
    ----------
    temperature : array_like
        Water temperature, deg C.
    formula : {"malmberg-maryott", "kaatze"}
        Published fit to use (see module notes).
    on_range : {"warn", "raise", "ignore"}
        Handling of temperatures outside 0-100 deg C (RangeWarning, ValidRangeError,
        silent). Temperatures below absolute zero always raise ValidRangeError.

    Returns
    -------
    numpy.ndarray or float
        Relative permittivity (dimensionless).

    Examples
    --------
    >>> round(water_permittivity(20.0), 3)
    80.103
    >>> round(water_permittivity(20.0, formula="kaatze"), 3)
    80.208
    """
    if formula not in WATER_FORMULAS:
        msg = f"formula must be one of {WATER_FORMULAS}, got {formula!r}"
        raise InputError(msg)
    if on_range not in ("warn", "raise", "ignore"):
        msg = f"on_range must be 'warn', 'raise' or 'ignore', got {on_range!r}"
        raise InputError(msg)
    t = np.asarray(temperature, dtype=float)
    if not np.all(np.isfinite(t)):
        msg = f"temperature must be finite (deg C), got {temperature!r}"
        raise InputError(msg)
    if np.any(t < -273.15):
        msg = f"temperature below absolute zero (-273.15 deg C): min {float(t.min())} deg C"
        raise ValidRangeError(msg)
    out = (t < _VALID_T[0]) | (t > _VALID_T[1])
    if np.any(out) and on_range != "ignore":
        msg = (
            f"{int(np.count_nonzero(out))} temperature value(s) lie outside the range "
            f"{_VALID_T[0]:g}-{_VALID_T[1]:g} deg C of the {formula} fit (min "
            f"{float(t.min()):.4g}, max {float(t.max()):.4g} deg C); results are extrapolations"
        )
        if on_range == "raise":
            raise ValidRangeError(msg)
        warnings.warn(msg, RangeWarning, stacklevel=2)
    if formula == "malmberg-maryott":
        eps = 87.740 + t * (-0.40008 + t * (9.398e-4 + t * (-1.410e-6)))
    else:
        eps = 10.0 ** (1.94404 - 1.991e-3 * t)
    return eps if eps.ndim else float(eps)
