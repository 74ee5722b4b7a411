"""The checks every estimator shares: paths from which no exponent can be read are refused."""

import numpy as np
import pytest

from forcefit.errors import NotIdentifiable
from forcefit.estimators import fit_acceleration, fit_curvature, fit_shape
from forcefit.track import Track


def test_circle_about_the_centre_is_refused():
    t = np.linspace(0.0, 10.0, 500)
    track = Track(t=t, x=np.cos(t), y=np.sin(t))
    for estimator in (fit_curvature, fit_shape, fit_acceleration):
        with pytest.raises(NotIdentifiable, match="circular orbit exists for every exponent"):
            estimator(track, centre=(0.0, 0.0))



def test_straight_path_is_refused():
    t = np.linspace(0.0, 10.0, 500)
    rng = np.random.default_rng(0)
    track = Track(t=t, x=t + 1e-3 * rng.standard_normal(500), y=0.5 * t + 1e-3 * rng.standard_normal(500))
    for estimator in (fit_curvature, fit_shape, fit_acceleration):
        with pytest.raises(NotIdentifiable, match="straight"):
            estimator(track)
