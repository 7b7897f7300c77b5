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
from soilwave.fresnel import (
    brewster_angle,
    critical_angle,
    fresnel_coefficients,
    reflection_coefficient,
    transmission_coefficient,
)
from soilwave.layered import (
    depth_to_twt,
    dix_interval_velocity,
    interface_depths,
    nmo_time,
    rms_velocity,
    twt_to_depth,
    vertical_twt,
)
from soilwave.resolution import footprint, fresnel_zone_radius, vertical_resolution
from soilwave.wave import (
    SPEED_OF_LIGHT,
    attenuation,
    attenuation_rule_db,
    loss_tangent,
    permittivity_from_velocity,
    phase_velocity,
    skin_depth,
    wave_velocity,
    wavelength,
)

__all__ += [
    "SPEED_OF_LIGHT",
    "attenuation",
    "attenuation_rule_db",
    "brewster_angle",
    "critical_angle",
    "depth_to_twt",
    "dix_interval_velocity",
    "footprint",
    "fresnel_coefficients",
    "fresnel_zone_radius",
    "interface_depths",
    "loss_tangent",
    "nmo_time",
    "permittivity_from_velocity",
    "phase_velocity",
    "reflection_coefficient",
    "rms_velocity",
    "skin_depth",
    "transmission_coefficient",
    "twt_to_depth",
    "vertical_resolution",
    "vertical_twt",
    "wave_velocity",
    "wavelength",
]

# --- petrophysics (soilwave.petro) ---
from soilwave.petro import (  # noqa: E402
    CRIM,
    Calibration,
    Ledieu,
    Malicki,
    PetroModel,
    PowerLawMixing,
    SqrtLinear,
    Topp,
    Uncertain,
    calibrate,
    water_permittivity,
)

__all__ += [
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

# --- picks and travel-time forward models ---
from soilwave.initial_model import initial_model  # noqa: E402
from soilwave.picks import (  # noqa: E402
    drop_picks,
    edit_pick,
    make_picks,
    merge_picks,
    read_picks,
    validate_picks,
    write_picks,
)
from soilwave.traveltime import (  # noqa: E402
    TravelTimeOperator,
    air_wave_time,
    ground_wave_time,
    head_wave_time,
    reflection_rays,
    reflection_time,
)

__all__ += [
    "TravelTimeOperator",
    "air_wave_time",
    "drop_picks",
    "edit_pick",
    "ground_wave_time",
    "head_wave_time",
    "initial_model",
    "make_picks",
    "merge_picks",
    "read_picks",
    "reflection_rays",
    "reflection_time",
    "validate_picks",
    "write_picks",
]

# --- inversion and results ---
from soilwave.inversion import invert  # noqa: E402
from soilwave.priors import Priors  # noqa: E402
from soilwave.result import InversionResult, read_result  # noqa: E402

__all__ += ["InversionResult", "Priors", "invert", "read_result"]

# --- gathers: data model, io, processing, synthetic ---
from soilwave.earth import LayeredEarth  # noqa: E402
from soilwave.gather import gather_from_array, validate_gather  # noqa: E402
from soilwave.gather_io import read_gather, write_gather  # noqa: E402
from soilwave.processing import (  # noqa: E402
    agc,
    bandpass,
    dewow,
    envelope,
    first_arrival_times,
    gain_spreading_exponential,
    instantaneous_phase,
    normalize_traces,
    remove_background,
    time_zero_correction,
)
from soilwave.synthetic import synthetic_gather  # noqa: E402
from soilwave.synthetic_profile import bowl_depth, synthetic_profile  # noqa: E402
from soilwave.wavelets import ricker  # noqa: E402

__all__ += [
    "LayeredEarth",
    "agc",
    "bandpass",
    "bowl_depth",
    "dewow",
    "envelope",
    "first_arrival_times",
    "gain_spreading_exponential",
    "gather_from_array",
    "instantaneous_phase",
    "normalize_traces",
    "read_gather",
    "remove_background",
    "ricker",
    "synthetic_gather",
    "synthetic_profile",
    "time_zero_correction",
    "validate_gather",
    "write_gather",
]

# --- velocity analysis and automatic picking ---
from soilwave.autopick import auto_pick  # noqa: E402
from soilwave.diffraction import fit_diffraction  # noqa: E402
from soilwave.firstbreaks import first_breaks  # noqa: E402
from soilwave.line_picks import pick_line_arrivals  # noqa: E402
from soilwave.semblance import interval_velocities, pick_semblance, semblance  # noqa: E402

__all__ += [
    "auto_pick",
    "first_breaks",
    "fit_diffraction",
    "interval_velocities",
    "pick_line_arrivals",
    "pick_semblance",
    "semblance",
]

# --- amplitudes and conductivity ---
from soilwave.amplitude import (  # noqa: E402
    AmplitudeOperator,
    air_wave_log_amplitude,
    ground_wave_log_amplitude,
    reflection_log_amplitude,
)
from soilwave.conductivity import (  # noqa: E402
    archie_bulk_conductivity,
    archie_pore_water_conductivity,
    attenuation_db_per_m,
    penetration_depth,
)

__all__ += [
    "AmplitudeOperator",
    "air_wave_log_amplitude",
    "archie_bulk_conductivity",
    "archie_pore_water_conductivity",
    "attenuation_db_per_m",
    "ground_wave_log_amplitude",
    "penetration_depth",
    "reflection_log_amplitude",
]

# --- repeat surveys and infiltration ---
from soilwave.groundwave_line import (  # noqa: E402
    groundwave_min_separation,
    groundwave_sampling_depth,
    groundwave_water_content,
)
from soilwave.infiltration import (  # noqa: E402
    RAWLS_1983,
    green_ampt_front_depth,
    green_ampt_infiltration,
    green_ampt_rate,
    green_ampt_time,
    philip_infiltration,
    philip_rate,
    rawls_1983_class,
)
from soilwave.infiltration_fit import InfiltrationFit, fit_green_ampt, fit_philip  # noqa: E402
from soilwave.surveys import read_survey_set, survey_picks, survey_set_from_picks  # noqa: E402
from soilwave.timelapse import track_front, write_timelapse  # noqa: E402

__all__ += [
    "RAWLS_1983",
    "InfiltrationFit",
    "fit_green_ampt",
    "fit_philip",
    "green_ampt_front_depth",
    "green_ampt_infiltration",
    "green_ampt_rate",
    "green_ampt_time",
    "groundwave_min_separation",
    "groundwave_sampling_depth",
    "groundwave_water_content",
    "philip_infiltration",
    "philip_rate",
    "rawls_1983_class",
    "read_survey_set",
    "survey_picks",
    "survey_set_from_picks",
    "track_front",
    "write_timelapse",
]

# --- batch processing ---
from soilwave.batch import BatchReport, gather_seed, read_batch_manifest, run_batch
from soilwave.batch_store import read_batch_settings

__all__ += ["BatchReport", "gather_seed", "read_batch_manifest", "read_batch_settings", "run_batch"]
