"""The estimators by name, and `fit`: the one place that says which estimator a track gets.

Every estimator registered here takes a `Track` (and keyword options) and returns its typed
`LawFit`; the command line offers these names, grading and the duality check pick from them,
and one contract test runs on each (tests/test_registry.py).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, cast

from ..errors import InputError
from ..track import Track
from .result import AccelerationFit, CurvatureFit, LawFit, OrbitFit, ShapeFit


@dataclass(frozen=True)
class Estimator:
    """One registered estimator.

    Attributes
    ----------
    module : str
        The module that defines it, within `forcefit.estimators` (e.g. ``".orbit"``); it is
        imported on first use, so that naming an estimator costs no start-up (the libraries
        behind some, such as scipy's splines, are slow to import).
    name : str
        Its function's name in ``module``.
    needs_times : bool
        True when the estimator refuses a shape-only track.
    description : str
        One line on what it fits.
    result_type : type
        The `LawFit` subclass it returns.
    """

    module: str
    name: str
    needs_times: bool
    description: str
    result_type: type[LawFit]

    @property
    def function(self) -> Callable[..., LawFit]:
        """``function(track, *, centre=None, ...)`` returning ``result_type``."""
        module = importlib.import_module(self.module, __package__)
        return cast(Callable[..., LawFit], getattr(module, self.name))


ESTIMATORS: Mapping[str, Estimator] = MappingProxyType({
    "orbit": Estimator(".orbit", "fit_orbit", True,
                       "the integrated orbit fitted to every sample (the reference)", OrbitFit),
    "shape": Estimator(".shape", "fit_shape", False, "Binet's equation fitted to the path, time-free",
                       ShapeFit),
    "curvature": Estimator(".curvature", "fit_curvature", False,
                           "the force-curvature relation as a line in log-log", CurvatureFit),
    "acceleration": Estimator(".acceleration", "fit_acceleration", True,
                              "the radial acceleration against r", AccelerationFit),
})
"""The estimators by name."""

AUTO = "auto"


def choose_method(track: Track, method: str = AUTO) -> str:
    """The estimator's name for ``track``: ``method`` itself, or for ``"auto"`` the orbit
    estimator when the track has timestamps and the shape estimator when it has none.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.linspace(0.0, 6.0, 50)
    >>> track = Track(t=t, x=np.cos(t), y=0.5 * np.sin(t))
    >>> choose_method(track), choose_method(track.shape_only()), choose_method(track, "curvature")
    ('orbit', 'shape', 'curvature')
    """
    if method == AUTO:
        return "orbit" if track.has_times else "shape"
    if method not in ESTIMATORS:
        raise InputError(f'unknown method "{method}"; choose one of {", ".join(ESTIMATORS)} or "auto".')
    return method


def fit(track: Track, method: str = AUTO, **options: Any) -> LawFit:
    """Fit F = -k r**n to ``track`` with the named estimator (``"auto"``: see `choose_method`).

    Parameters
    ----------
    track : Track
        Positions (L), with times (T) when known.
    method : str
        ``"auto"`` or one of `ESTIMATORS`.
    **options
        Passed to the estimator (``centre``, ``smoothing``, ``drag``, ...).

    Returns
    -------
    LawFit
        The estimator's typed result (`OrbitFit`, `ShapeFit`, ...).
    """
    return ESTIMATORS[choose_method(track, method)].function(track, **options)
