"""Petrophysics: relative permittivity <-> volumetric water content, with uncertainty.

Layer 1 of soilwave (pure numpy/scipy). Models share the :class:`PetroModel`
interface: ``water_content(eps)``, ``permittivity(theta)``,
``water_content_draws(eps_draws, rng=...)`` (parameter uncertainty by Monte
Carlo), ``with_params(...)``, ``to_attrs()``. Parameters may be
:class:`Uncertain`. :func:`calibrate` fits a model to site pairs.

Moisture estimates from any published relation need site calibration before
decisions rest on them.

Examples
--------
>>> from soilwave.petro import Topp, CRIM
>>> round(float(Topp().water_content(10.0)), 4)
0.1883
>>> round(float(CRIM(porosity=0.4, eps_solid=4.7, eps_water=80.0).water_content(10.0)), 4)
0.184
"""

from soilwave.petro.base import PetroModel, Uncertain
from soilwave.petro.calibration import Calibration, calibrate
from soilwave.petro.linear import Ledieu, Malicki, SqrtLinear
from soilwave.petro.mixing import CRIM, PowerLawMixing
from soilwave.petro.topp import Topp
from soilwave.petro.water import water_permittivity

__all__ = [
    "CRIM",
    "Calibration",
    "Ledieu",
    "Malicki",
    "PetroModel",
    "PowerLawMixing",
    "SqrtLinear",
    "Topp",
    "Uncertain",
    "calibrate",
    "water_permittivity",
]
