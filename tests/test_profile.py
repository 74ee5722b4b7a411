"""The force profile: F(r) in radius bins without a model."""

import numpy as np

from forcefit.estimators import fit_curvature, force_profile


def test_screened_force_profile_follows_its_local_exponent(screened):
    # F = exp(-r/lambda)/r^2 (a screened, Yukawa-like force; common practice): its local exponent
    # d ln F / d ln r = -2 - r/lambda.
    scale = 1.0
    track = screened(with_sigma=False, scale=scale)
    profile = force_profile(track, bins=6)
    table = profile.table
    expected = -2.0 - table["exponent_radius"] / scale
    assert np.all(np.abs(table["local_exponent"] - expected) < 3 * table["local_exponent_stderr"])
    assert not fit_curvature(track).diagnostics["power law"].passed
