"""Relations linear in the square root of permittivity (the refractive index).

- :class:`SqrtLinear`: generic ``theta = slope sqrt(eps) + intercept`` (a site
  calibration form; common practice).
- :class:`Ledieu`: Ledieu, J., De Ridder, P., De Clerck, P. & Dautrebande, S.
  (1986), A method of measuring soil moisture by time-domain reflectometry,
  J. Hydrol. 88:319-328: ``theta = 0.1138 sqrt(eps) - 0.1758`` (value from memory).
- :class:`Malicki`: Malicki, M.A., Plagge, R. & Roth, C.H. (1996), Improving the
  calibration of dielectric TDR soil moisture determination taking into account
  the solid soil, Eur. J. Soil Sci. 47:357-366, eq. 10::

      theta = (sqrt(eps) - 0.819 - 0.168 rho_b - 0.159 rho_b^2) / (7.17 + 1.18 rho_b)

  with dry bulk density ``rho_b`` in g/cm3.

All three have closed-form inverses.
"""

from __future__ import annotations

from typing import ClassVar

import numpy as np

from soilwave.errors import InputError
from soilwave.petro.base import _EPS_PHYSICAL, PetroModel

__all__ = ["Ledieu", "Malicki", "SqrtLinear"]

_LEDIEU = {"slope": 0.1138, "intercept": -0.1758}  # value from memory


class SqrtLinear(PetroModel):
    """Water content linear in sqrt(permittivity): ``theta = slope sqrt(eps) + intercept``.

    Parameters
    ----------
    slope : float or Uncertain
        m3/m3 per unit sqrt(eps); must be positive.
    intercept : float or Uncertain
        m3/m3.
    valid_eps : tuple of float, optional
        Calibrated permittivity range; default the physical range 1-88 (air to
        water at 0 deg C), i.e. no calibrated range known.
    model_error : float, optional
        Scatter (m3/m3) added in :meth:`water_content_draws`. Default 0.

    Examples
    --------
    >>> m = SqrtLinear(slope=0.12, intercept=-0.18)
    >>> round(float(m.water_content(16.0)), 4)
    0.3
    >>> round(float(m.permittivity(0.3)), 6)
    16.0
    """

    name = "SqrtLinear"
    reference = "theta = slope sqrt(eps) + intercept (site calibration form, common practice)"
    _bounds: ClassVar[dict] = {"slope": (1e-9, np.inf), "intercept": (-np.inf, np.inf)}
    _default_free = ("slope", "intercept")

    def __init__(self, slope, intercept, *, valid_eps=None, model_error=0.0):
        super().__init__({"slope": slope, "intercept": intercept}, model_error=model_error)
        if valid_eps is None:
            valid_eps = _EPS_PHYSICAL
        lo, hi = (float(x) for x in valid_eps)
        if not (1.0 <= lo < hi):
            msg = f"valid_eps must be (low, high) with 1 <= low < high, got {valid_eps!r}"
            raise InputError(msg)
        self._valid_eps_decl = (lo, hi)

    def _theta(self, eps, *, slope, intercept):
        return slope * np.sqrt(eps) + intercept

    def _eps(self, theta, *, slope, intercept):
        return ((theta - intercept) / slope) ** 2


class Ledieu(SqrtLinear):
    """Ledieu et al. (1986): ``theta = 0.1138 sqrt(eps) - 0.1758`` (value from memory).

    Parameters
    ----------
    model_error : float, optional
        Scatter (m3/m3) added in :meth:`water_content_draws`. Default 0.

    Notes
    -----
    The calibrated range is taken as water content 0-0.5 m3/m3 mapped through the
    relation (an assumption, not a range stated in the paper).

    Examples
    --------
    >>> round(float(Ledieu().water_content(25.0)), 4)
    0.3932
    """

    name = "Ledieu"
    reference = (
        "Ledieu, J., De Ridder, P., De Clerck, P. & Dautrebande, S. (1986) A method of "
        "measuring soil moisture by time-domain reflectometry. J. Hydrol. 88:319-328"
    )

    def __init__(self, *, model_error=0.0, **coefficients):
        PetroModel.__init__(self, {**_LEDIEU, **coefficients}, model_error=model_error)
        self._valid_eps_decl = None
        self._valid_theta_decl = (0.0, 0.5)


class Malicki(PetroModel):
    """Malicki, Plagge & Roth (1996) eq. 10, with dry bulk density.

    Parameters
    ----------
    bulk_density : float or Uncertain
        Dry bulk density rho_b, g/cm3 (0-2.65).
    model_error : float, optional
        Scatter (m3/m3) added in :meth:`water_content_draws`. Default 0.

    Notes
    -----
    The calibrated range is taken as water content 0-0.6 m3/m3 mapped through the
    relation (an assumption, not a range stated in the paper).

    Examples
    --------
    >>> m = Malicki(bulk_density=1.5)
    >>> round(float(m.permittivity(m.water_content(15.0))), 9)
    15.0
    """

    name = "Malicki"
    reference = (
        "Malicki, M.A., Plagge, R. & Roth, C.H. (1996) Improving the calibration of "
        "dielectric TDR soil moisture determination taking into account the solid soil. "
        "Eur. J. Soil Sci. 47:357-366, eq. 10"
    )
    _bounds: ClassVar[dict] = {"bulk_density": (0.0, 2.65)}
    _default_free = ("bulk_density",)
    _valid_theta_decl = (0.0, 0.6)

    def __init__(self, bulk_density, *, model_error=0.0):
        super().__init__({"bulk_density": bulk_density}, model_error=model_error)

    def _theta(self, eps, *, bulk_density):
        rb = bulk_density
        return (np.sqrt(eps) - 0.819 - 0.168 * rb - 0.159 * rb**2) / (7.17 + 1.18 * rb)

    def _eps(self, theta, *, bulk_density):
        rb = bulk_density
        return (theta * (7.17 + 1.18 * rb) + 0.819 + 0.168 * rb + 0.159 * rb**2) ** 2
