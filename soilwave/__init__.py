"""soilwave: soil water from ground-penetrating radar, with honest uncertainty.

The public API is listed in ``__all__``; everything else is internal. See
``DEVELOPERS.md`` for the architecture, conventions and units.

Examples
--------
>>> import soilwave as sw
>>> round(float(sw.wave_velocity(9.0)), 4)
0.0999
"""

from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _version

from soilwave.errors import (
    CalibrationError,
    ConvergenceWarning,
    FileFormatError,
    InputError,
    OutputExistsError,
    PickTableError,
    RangeWarning,
    SoilwaveError,
    SoilwaveWarning,
    ValidRangeError,
)

try:
    __version__ = _version("soilwave")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0+unknown"

__all__ = [
    "CalibrationError",
    "ConvergenceWarning",
    "FileFormatError",
    "InputError",
    "OutputExistsError",
    "PickTableError",
    "RangeWarning",
    "SoilwaveError",
    "SoilwaveWarning",
    "ValidRangeError",
    "__version__",
]

# Each block below is owned by one area of the package; keep imports and the
# matching __all__ additions together so the public API stays curated.

# --- wave physics (wave, fresnel, resolution, layered) ---

# --- petrophysics (soilwave.petro) ---

# --- picks and travel-time forward models ---

# --- inversion and results ---

# --- gathers: data model, io, processing, synthetic ---

# --- velocity analysis and automatic picking ---

# --- amplitudes and conductivity ---

# --- repeat surveys and infiltration ---

# --- batch processing ---
