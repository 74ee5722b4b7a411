"""forcefit: infer the central force law F(r) = -k r**n r_hat behind a planar trajectory.

The entry points a user needs; everything else is importable from its subpackage:
`forcefit.reading` (files and videos to tracks), `forcefit.geometry` (smoothing, curvature, the centre),
`forcefit.dynamics` (laws, propagation, simulation, duality), `forcefit.estimators` (the fits
and their results), `forcefit.inference` (posterior, planning, law comparison),
`forcefit.analysis` (apsides, the duality check), `forcefit.outputs` (figures, reports) and
`forcefit.apps` (grading, the demo).
"""

from ._version import __version__
from .analysis.apsides import measure_apsides
from .analysis.duality_check import check_duality
from .apps.grading import GradingRule, grade_runs
from .dynamics.duality import dual_track
from .dynamics.simulate import simulate_orbit
from .errors import ForcefitError
from .estimators import (
    LawFit,
    OrbitFit,
    fit,
    fit_acceleration,
    fit_curvature,
    fit_orbit,
    fit_shape,
)
from .inference.comparison import compare_laws
from .inference.planning import forecast_precision
from .inference.posterior import Posterior, sample_posterior
from .reading import inspect_track, load_track, load_tracks, save_track
from .reading.video import track_video
from .track import Track

__all__ = [
    "ForcefitError",
    "GradingRule",
    "LawFit",
    "OrbitFit",
    "Posterior",
    "Track",
    "__version__",
    "check_duality",
    "compare_laws",
    "dual_track",
    "fit",
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_shape",
    "forecast_precision",
    "grade_runs",
    "inspect_track",
    "load_track",
    "load_tracks",
    "measure_apsides",
    "sample_posterior",
    "save_track",
    "simulate_orbit",
    "track_video",
]
