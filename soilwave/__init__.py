"""soilwave: soil water from ground-penetrating radar, with honest uncertainty.

The public API is listed in ``__all__``; everything else is internal.
Plotting (``soilwave.plot_*``) and notebook tools (``soilwave.widgets``) are
imported from their own modules so that ``import soilwave`` loads neither
matplotlib nor ipywidgets. See ``DEVELOPERS.md`` for the architecture,
conventions and units.

Examples
--------
>>> import soilwave as sw
>>> round(float(sw.wave_velocity(9.0)), 4)
0.0999
"""

from soilwave.amplitude import (
    AmplitudeOperator,
    air_wave_log_amplitude,
    ground_wave_log_amplitude,
    reflection_log_amplitude,
)
from soilwave.autopick import auto_pick
from soilwave.batch import BatchReport, gather_seed, read_batch_manifest, run_batch
from soilwave.batch_store import read_batch_settings
from soilwave.conductivity import (
    archie_bulk_conductivity,
    archie_pore_water_conductivity,
    attenuation_db_per_m,
    penetration_depth,
)
from soilwave.diffraction import fit_diffraction
from soilwave.earth import LayeredEarth
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
from soilwave.firstbreaks import first_breaks
from soilwave.fresnel import (
    brewster_angle,
    critical_angle,
    fresnel_coefficients,
    reflection_coefficient,
    transmission_coefficient,
)
from soilwave.gather import gather_from_array, validate_gather
from soilwave.gather_io import read_gather, write_gather
from soilwave.groundwave_line import (
    groundwave_min_separation,
    groundwave_sampling_depth,
    groundwave_water_content,
)
from soilwave.infiltration import (
    RAWLS_1983,
    green_ampt_front_depth,
    green_ampt_infiltration,
    green_ampt_rate,
    green_ampt_time,
    philip_infiltration,
    philip_rate,
    rawls_1983_class,
)
from soilwave.infiltration_fit import InfiltrationFit, fit_green_ampt, fit_philip
from soilwave.initial_model import initial_model
from soilwave.inversion import invert
from soilwave.layered import (
    depth_to_twt,
    dix_interval_velocity,
    interface_depths,
    nmo_time,
    rms_velocity,
    twt_to_depth,
    vertical_twt,
)
from soilwave.line_picks import pick_line_arrivals
from soilwave.petro import (
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
from soilwave.picks import (
    drop_picks,
    edit_pick,
    make_picks,
    merge_picks,
    read_picks,
    validate_picks,
    write_picks,
)
from soilwave.priors import Priors
from soilwave.processing import (
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
from soilwave.provenance import software_version as _software_version
from soilwave.resolution import footprint, fresnel_zone_radius, vertical_resolution
from soilwave.result import InversionResult, read_result
from soilwave.semblance import interval_velocities, pick_semblance, semblance
from soilwave.surveys import read_survey_set, survey_picks, survey_set_from_picks
from soilwave.synthetic import synthetic_gather
from soilwave.synthetic_profile import bowl_depth, synthetic_profile
from soilwave.timelapse import track_front, write_timelapse
from soilwave.traveltime import (
    TravelTimeOperator,
    air_wave_time,
    ground_wave_time,
    head_wave_time,
    reflection_rays,
    reflection_time,
)
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
from soilwave.wavelets import ricker

__version__ = _software_version()

__all__ = [
    "CRIM",
    "RAWLS_1983",
    "SPEED_OF_LIGHT",
    "AmplitudeOperator",
    "BatchReport",
    "Calibration",
    "CalibrationError",
    "ConvergenceWarning",
    "FileFormatError",
    "InfiltrationFit",
    "InputError",
    "InversionResult",
    "LayeredEarth",
    "Ledieu",
    "Malicki",
    "OutputExistsError",
    "PetroModel",
    "PickTableError",
    "PowerLawMixing",
    "Priors",
    "RangeWarning",
    "SoilwaveError",
    "SoilwaveWarning",
    "SqrtLinear",
    "Topp",
    "TravelTimeOperator",
    "Uncertain",
    "ValidRangeError",
    "__version__",
    "agc",
    "air_wave_log_amplitude",
    "air_wave_time",
    "archie_bulk_conductivity",
    "archie_pore_water_conductivity",
    "attenuation",
    "attenuation_db_per_m",
    "attenuation_rule_db",
    "auto_pick",
    "bandpass",
    "bowl_depth",
    "brewster_angle",
    "calibrate",
    "critical_angle",
    "depth_to_twt",
    "dewow",
    "dix_interval_velocity",
    "drop_picks",
    "edit_pick",
    "envelope",
    "first_arrival_times",
    "first_breaks",
    "fit_diffraction",
    "fit_green_ampt",
    "fit_philip",
    "footprint",
    "fresnel_coefficients",
    "fresnel_zone_radius",
    "gain_spreading_exponential",
    "gather_from_array",
    "gather_seed",
    "green_ampt_front_depth",
    "green_ampt_infiltration",
    "green_ampt_rate",
    "green_ampt_time",
    "ground_wave_log_amplitude",
    "ground_wave_time",
    "groundwave_min_separation",
    "groundwave_sampling_depth",
    "groundwave_water_content",
    "head_wave_time",
    "initial_model",
    "instantaneous_phase",
    "interface_depths",
    "interval_velocities",
    "invert",
    "loss_tangent",
    "make_picks",
    "merge_picks",
    "nmo_time",
    "normalize_traces",
    "penetration_depth",
    "permittivity_from_velocity",
    "phase_velocity",
    "philip_infiltration",
    "philip_rate",
    "pick_line_arrivals",
    "pick_semblance",
    "rawls_1983_class",
    "read_batch_manifest",
    "read_batch_settings",
    "read_gather",
    "read_picks",
    "read_result",
    "read_survey_set",
    "reflection_coefficient",
    "reflection_log_amplitude",
    "reflection_rays",
    "reflection_time",
    "remove_background",
    "ricker",
    "rms_velocity",
    "run_batch",
    "semblance",
    "skin_depth",
    "survey_picks",
    "survey_set_from_picks",
    "synthetic_gather",
    "synthetic_profile",
    "time_zero_correction",
    "track_front",
    "transmission_coefficient",
    "twt_to_depth",
    "validate_gather",
    "validate_picks",
    "vertical_resolution",
    "vertical_twt",
    "water_permittivity",
    "wave_velocity",
    "wavelength",
    "write_gather",
    "write_picks",
    "write_timelapse",
]
