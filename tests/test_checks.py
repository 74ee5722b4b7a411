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


def test_the_chi_square_check_fails_an_overstated_sigma_by_the_distributions_own_tail():
    # A reduced chi-square below its distribution's 5-sigma lower tail fails, as one above
    # 1 + 5 sqrt(2/dof) does. Reference: scipy.stats.chi2 (the chi-square distribution;
    # Abramowitz & Stegun 1964, 26.4): over 73 degrees of freedom its 2.9e-7 quantile is about
    # 0.40 of the mean, inside 1 - 5 * 0.166 = 0.17 of the normal approximation. A sigma
    # stated twice too large (0.25) fails; 0.5 and 1 pass; a model that misses (2.0) fails.
    from scipy.stats import chi2

    from forcefit.estimators._checks import CHI_SQUARE_TAIL, chi_square_diagnostic

    dof = 73
    quantile = chi2.ppf(CHI_SQUARE_TAIL, dof) / dof
    assert 0.3 < quantile < 0.5
    assert chi_square_diagnostic(quantile * 0.98, dof).passed is False
    assert chi_square_diagnostic(quantile * 1.02, dof).passed is True
    for reduced, passed in ((0.25, False), (0.5, True), (1.0, True), (2.0, False)):
        assert chi_square_diagnostic(reduced, dof).passed is passed
