"""Volumetric power-law mixing of solid, water and air permittivities.

Birchak et al. (1974); Roth et al. (1990)::

    eps_b^a = (1 - phi) eps_s^a + theta eps_w^a + (phi - theta) eps_air^a

with porosity ``phi``, solid, water and air permittivities and exponent ``a``
(``a = 0.5`` is the complex refractive index model, CRIM; Roth et al. fitted
about 0.46, value from memory). Both directions are closed form::

    theta = (eps_b^a - (1 - phi) eps_s^a - phi eps_air^a) / (eps_w^a - eps_air^a)

References: Birchak, J.R., Gardner, C.G., Hipp, J.E. & Victor, J.M. (1974), High
dielectric constant microwave probes for sensing soil moisture, Proc. IEEE
62(1):93-98. Roth, K., Schulin, R., Fluhler, H. & Attinger, W. (1990),
Calibration of time domain reflectometry for water content measurement using a
composite dielectric approach, Water Resour. Res. 26(10):2267-2273.
"""

from __future__ import annotations

from typing import ClassVar

import numpy as np

from soilwave.errors import InputError
from soilwave.petro.base import PetroModel, Uncertain
from soilwave.petro.water import water_permittivity

__all__ = ["CRIM", "PowerLawMixing"]

_REFERENCE = (
    "Birchak, J.R., Gardner, C.G., Hipp, J.E. & Victor, J.M. (1974) Proc. IEEE 62(1):93-98; "
    "Roth, K., Schulin, R., Fluhler, H. & Attinger, W. (1990) Water Resour. Res. "
    "26(10):2267-2273"
)


def _mix_eps(theta, porosity, eps_solid, eps_water, eps_air, exponent):
    s = (
        (1.0 - porosity) * eps_solid**exponent
        + theta * eps_water**exponent
        + (porosity - theta) * eps_air**exponent
    )
    # A non-positive sum has no real mixture (possible only beyond saturation with a < 0);
    # mark it NaN so the caller raises ValidRangeError instead of returning a value.
    s = s if np.all(s > 0) else np.where(s > 0, s, np.nan)
    return s ** (1.0 / exponent)


def _mix_theta(eps, porosity, eps_solid, eps_water, eps_air, exponent):
    num = eps**exponent - (1.0 - porosity) * eps_solid**exponent - porosity * eps_air**exponent
    return num / (eps_water**exponent - eps_air**exponent)


def _resolve_water(eps_water, temperature, formula):
    if eps_water is not None and temperature is not None:
        msg = (
            f"give either eps_water ({eps_water!r}) or temperature ({temperature!r}), not both; "
            "the water permittivity is computed from the temperature when eps_water is None"
        )
        raise InputError(msg)
    if eps_water is not None:
        return eps_water, None
    if temperature is None:
        temperature = 20.0
    if isinstance(temperature, Uncertain):
        msg = "temperature must be a fixed number (deg C); give eps_water=Uncertain(...) instead"
        raise InputError(msg)
    return water_permittivity(float(temperature), formula=formula), float(temperature)


class PowerLawMixing(PetroModel):
    """Power-law (Birchak/Roth) volumetric mixing model.

    Parameters
    ----------
    porosity : float or Uncertain
        Porosity phi, m3/m3, in (0, 1).
    eps_solid : float or Uncertain
        Relative permittivity of the solid grains (quartz sand about 4.7,
        Robinson & Friedman 2003).
    eps_water : float or Uncertain, optional
        Relative permittivity of the soil water. When None it is computed from
        ``temperature`` with :func:`water_permittivity`.
    exponent : float or Uncertain
        Geometry exponent ``a`` (keyword), in [-1, 1] and not 0.
    eps_air : float or Uncertain, optional
        Relative permittivity of the pore air, default 1.
    temperature : float, optional
        Water temperature, deg C, used when ``eps_water`` is None (default 20 deg C).
    water_formula : {"malmberg-maryott", "kaatze"}
        Fit used with ``temperature``.
    model_error : float, optional
        Scatter (m3/m3) added in :meth:`water_content_draws`. Default 0.

    Notes
    -----
    Valid water content 0 to porosity; the valid permittivity range is the image
    of that interval under the relation (parameter means).

    Examples
    --------
    >>> m = PowerLawMixing(0.4, 4.7, 80.0, exponent=0.46)
    >>> round(float(m.water_content(m.permittivity(0.25))), 12)
    0.25
    """

    name = "PowerLawMixing"
    reference = _REFERENCE
    _bounds: ClassVar[dict] = {
        "porosity": (1e-6, 1.0 - 1e-6),
        "eps_solid": (1.0, 1e4),
        "eps_water": (1.0, 1e4),
        "eps_air": (1.0, 1e4),
        "exponent": (-1.0, 1.0),
    }
    _default_free = ("porosity",)

    def __init__(
        self,
        porosity,
        eps_solid,
        eps_water=None,
        *,
        exponent,
        eps_air=1.0,
        temperature=None,
        water_formula="malmberg-maryott",
        model_error=0.0,
    ):
        eps_water, self._temperature = _resolve_water(eps_water, temperature, water_formula)
        self._water_formula = water_formula
        params = {
            "porosity": porosity,
            "eps_solid": eps_solid,
            "eps_water": eps_water,
            "eps_air": eps_air,
            "exponent": exponent,
        }
        super().__init__(params, model_error=model_error)
        self._after_params_changed()

    def _after_params_changed(self):
        p = self.means
        if "exponent" in p and abs(p["exponent"]) < 1e-6:
            msg = (
                f"exponent must be nonzero (the power-law form degenerates at 0), "
                f"got {p['exponent']!r}"
            )
            raise InputError(msg)
        if p["eps_water"] <= p["eps_air"]:
            msg = (
                f"eps_water ({p['eps_water']!r}) must exceed eps_air ({p['eps_air']!r}) "
                "for water content to be identifiable"
            )
            raise InputError(msg)

    def _extra_repr(self):
        out = {}
        if self._temperature is not None:
            out["temperature"] = self._temperature
            out["water_formula"] = self._water_formula
        return out

    @property
    def valid_theta(self):
        """tuple of float: (0, porosity) m3/m3, at the porosity mean."""
        return 0.0, float(self.means["porosity"])

    def _theta(self, eps, *, porosity, eps_solid, eps_water, eps_air, exponent):
        return _mix_theta(eps, porosity, eps_solid, eps_water, eps_air, exponent)

    def _eps(self, theta, *, porosity, eps_solid, eps_water, eps_air, exponent):
        return _mix_eps(theta, porosity, eps_solid, eps_water, eps_air, exponent)


class CRIM(PowerLawMixing):
    """Complex refractive index model: power-law mixing with exponent 0.5.

    Parameters are those of :class:`PowerLawMixing` without ``exponent``.

    Examples
    --------
    >>> m = CRIM(porosity=0.4, eps_solid=4.7, eps_water=80.0)
    >>> round(float(m.permittivity(0.2)), 4)
    10.8216
    >>> round(float(m.water_content(10.0)), 4)
    0.184
    """

    name = "CRIM"
    _bounds: ClassVar[dict] = {k: v for k, v in PowerLawMixing._bounds.items() if k != "exponent"}

    def __init__(
        self,
        porosity,
        eps_solid,
        eps_water=None,
        *,
        eps_air=1.0,
        temperature=None,
        water_formula="malmberg-maryott",
        model_error=0.0,
    ):
        eps_water, self._temperature = _resolve_water(eps_water, temperature, water_formula)
        self._water_formula = water_formula
        params = {
            "porosity": porosity,
            "eps_solid": eps_solid,
            "eps_water": eps_water,
            "eps_air": eps_air,
        }
        PetroModel.__init__(self, params, model_error=model_error)
        self._after_params_changed()

    def _theta(self, eps, *, porosity, eps_solid, eps_water, eps_air):
        return _mix_theta(eps, porosity, eps_solid, eps_water, eps_air, 0.5)

    def _eps(self, theta, *, porosity, eps_solid, eps_water, eps_air):
        return _mix_eps(theta, porosity, eps_solid, eps_water, eps_air, 0.5)
