"""forcefit: infer the central force law F(r) = -k r**n r_hat behind a planar trajectory."""

from ._version import __version__
from .analysis.apsides import Apsides, measure_apsides
from .analysis.duality_check import DualityCheck, check_duality
from .dynamics.duality import dual_exponent, dual_track, map_power
from .dynamics.laws import (
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
from .dynamics.propagate import BatchStates, Drag, States, propagate_batch, propagate_reference
from .dynamics.simulate import simulate_orbit, simulate_pendulum, spherical_pendulum_states
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
    fit_acceleration,
    fit_curvature,
    fit_orbit,
    fit_shape,
    force_profile,
)
from .estimators.result import Diagnostic, LawFit
from .geometry.centre import CentreEstimate, find_centre
from .geometry.path import PathGeometry, describe_path
from .inference.comparison import compare_laws
from .inference.planning import Forecast, forecast_precision, required_duration, required_rate
from .inference.posterior import Posterior, sample_posterior
from .reading.coordinates import Calibration, PlaneProjection, project_to_plane
from .reading.inspection import TrackSummary, inspect_track
from .reading.loaders import load_track, load_tracks, save_track
from .track import Track
from .units import length_factor, parse_length_unit, parse_time_unit, strength_unit, time_factor

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
    "NotIdentifiable",
    "PathGeometry",
    "PlaneProjection",
    "Posterior",
    "States",
    "Track",
    "TrackSummary",
    "__version__",
    "angular_momentum",
    "apsidal_angle",
    "apsidal_angle_circular",
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
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_shape",
    "force_profile",
    "forecast_precision",
    "inspect_track",
    "length_factor",
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
]
