"""forcefit: infer the central force law F(r) = -k r**n r_hat behind a planar trajectory."""

from .centre import CentreEstimate, find_centre
from .coordinates import Calibration, PlaneProjection, project_to_plane
from .duality import dual_exponent, dual_track, map_power
from .errors import (
    FitError,
    ForcefitError,
    ForcefitWarning,
    GeometryError,
    InputError,
    NotIdentifiable,
)
from .estimators import (
    ForceProfile,
    compare_laws,
    fit_acceleration,
    fit_curvature,
    fit_orbit,
    fit_shape,
    force_profile,
)
from .estimators.apsides import Apsides, measure_apsides
from .estimators.dual_check import DualityCheck, check_duality
from .geometry import PathGeometry, describe_path
from .inspection import TrackSummary, inspect_track
from .laws import (
    angular_momentum,
    apsidal_angle,
    apsidal_angle_circular,
    circular_period,
    circular_speed,
    exponent_from_apsidal_angle,
    exponent_from_precession,
    pendulum_precession_rate,
    potential,
    precession_per_orbit,
    radial_force,
    specific_energy,
)
from .loaders import load_track, load_tracks, save_track
from .planning import Forecast, forecast_precision, required_duration, required_rate
from .posterior import Posterior, sample_posterior
from .propagate import BatchStates, Drag, States, propagate_batch, propagate_reference
from .reading.lens import LensModel, calibrate_lens, load_lens
from .reading.perspective import PlaneMapping, fit_homography
from .reading.video import VideoTrack, track_video
from .result import Diagnostic, LawFit
from .simulate import simulate_orbit, simulate_pendulum, spherical_pendulum_states
from .track import Track
from .units import length_factor, parse_length_unit, parse_time_unit, strength_unit, time_factor

__version__ = "0.1.0"

__all__ = [
    "Apsides",
    "BatchStates",
    "Calibration",
    "CentreEstimate",
    "Diagnostic",
    "Drag",
    "DualityCheck",
    "FitError",
    "ForceProfile",
    "ForcefitError",
    "ForcefitWarning",
    "Forecast",
    "GeometryError",
    "InputError",
    "LawFit",
    "LensModel",
    "NotIdentifiable",
    "PathGeometry",
    "PlaneMapping",
    "PlaneProjection",
    "Posterior",
    "States",
    "Track",
    "TrackSummary",
    "VideoTrack",
    "__version__",
    "angular_momentum",
    "apsidal_angle",
    "apsidal_angle_circular",
    "calibrate_lens",
    "check_duality",
    "circular_period",
    "circular_speed",
    "compare_laws",
    "describe_path",
    "dual_exponent",
    "dual_track",
    "exponent_from_apsidal_angle",
    "exponent_from_precession",
    "find_centre",
    "fit_homography",
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_shape",
    "force_profile",
    "forecast_precision",
    "inspect_track",
    "length_factor",
    "load_lens",
    "load_track",
    "load_tracks",
    "map_power",
    "measure_apsides",
    "parse_length_unit",
    "parse_time_unit",
    "pendulum_precession_rate",
    "potential",
    "precession_per_orbit",
    "project_to_plane",
    "propagate_batch",
    "propagate_reference",
    "radial_force",
    "required_duration",
    "required_rate",
    "sample_posterior",
    "save_track",
    "simulate_orbit",
    "simulate_pendulum",
    "specific_energy",
    "spherical_pendulum_states",
    "strength_unit",
    "time_factor",
    "track_video",
]
