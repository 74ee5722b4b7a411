"""forcefit: infer the central force law F(r) = -k r**n r_hat behind a planar trajectory.

The entry points a user needs; everything else is importable from its subpackage:
`forcefit.reading` (files and videos to tracks), `forcefit.geometry` (smoothing, curvature, the centre),
`forcefit.dynamics` (laws, propagation, simulation, duality), `forcefit.estimators` (the fits
and their results), `forcefit.inference` (posterior, planning, law comparison),
`forcefit.analysis` (apsides, the duality check), `forcefit.outputs` (figures, reports) and
`forcefit.apps` (grading, the demo).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from ._lazy import lazy_exports
from ._version import __version__
from .errors import ForcefitError

if TYPE_CHECKING:
    from .analysis.apsides import measure_apsides
    from .analysis.duality_check import check_duality
    from .apps.grading import GradingRule, grade_runs
    from .dynamics.duality import dual_track
    from .dynamics.simulate import simulate_orbit
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

__getattr__, __dir__ = lazy_exports(__name__, {
    "measure_apsides": ".analysis.apsides",
    "check_duality": ".analysis.duality_check",
    "GradingRule": ".apps.grading",
    "grade_runs": ".apps.grading",
    "dual_track": ".dynamics.duality",
    "simulate_orbit": ".dynamics.simulate",
    "LawFit": ".estimators",
    "OrbitFit": ".estimators",
    "fit": ".estimators",
    "fit_acceleration": ".estimators",
    "fit_curvature": ".estimators",
    "fit_orbit": ".estimators",
    "fit_shape": ".estimators",
    "compare_laws": ".inference.comparison",
    "forecast_precision": ".inference.planning",
    "Posterior": ".inference.posterior",
    "sample_posterior": ".inference.posterior",
    "inspect_track": ".reading",
    "load_track": ".reading",
    "load_tracks": ".reading",
    "save_track": ".reading",
    "track_video": ".reading.video",
    "Track": ".track",
})

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
