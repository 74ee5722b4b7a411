"""forcefit: infer the central force law F(r) = -k r**n r_hat behind a planar trajectory."""

from .centre import CentreEstimate, find_centre
from .coordinates import Calibration, PlaneProjection, project_to_plane
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
from .geometry import PathGeometry, describe_path
from .inspection import TrackSummary, inspect_track
from .laws import (
    angular_momentum,
    circular_period,
    circular_speed,
    potential,
    radial_force,
    specific_energy,
)
from .loaders import load_track, load_tracks, save_track
from .posterior import Posterior, sample_posterior
from .propagate import BatchStates, Drag, States, propagate_batch, propagate_reference
from .result import Diagnostic, LawFit
from .simulate import simulate_orbit, simulate_pendulum, spherical_pendulum_states
from .track import Track
from .units import length_factor, parse_length_unit, parse_time_unit, strength_unit, time_factor

__version__ = "0.1.0"

__all__ = [
    "BatchStates",
    "Calibration",
    "CentreEstimate",
    "Diagnostic",
    "Drag",
    "FitError",
    "ForceProfile",
    "ForcefitError",
    "ForcefitWarning",
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
    "circular_period",
    "circular_speed",
    "compare_laws",
    "describe_path",
    "find_centre",
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_shape",
    "force_profile",
    "inspect_track",
    "length_factor",
    "load_track",
    "load_tracks",
    "parse_length_unit",
    "parse_time_unit",
    "potential",
    "project_to_plane",
    "propagate_batch",
    "propagate_reference",
    "radial_force",
    "sample_posterior",
    "save_track",
    "simulate_orbit",
    "simulate_pendulum",
    "specific_energy",
    "spherical_pendulum_states",
    "strength_unit",
    "time_factor",
]
