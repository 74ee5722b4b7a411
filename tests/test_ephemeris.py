"""Real orbits from the JPL DE421 ephemeris: perturbed, never a pure power law.

DE421 (W. M. Folkner, J. G. Williams & D. H. Boggs 2009, IPN Progress Report 42-178), read
with jplephem from the ``de421`` package. Heliocentric positions are the body's barycentric
position minus the Sun's, in au (1 au = 149 597 870.700 km, IAU 2012 Resolution B2), projected
onto the plane of the body's mean angular momentum.
"""

import numpy as np
import pytest

from forcefit.estimators import fit_orbit
from forcefit.inference.comparison import compare_laws
from forcefit.track import Track

de421 = pytest.importorskip("de421")
jplephem = pytest.importorskip("jplephem")

AU_KM = 149_597_870.700
GAUSS_K2 = 2.959122082855911e-4          # au^3/d^2: k_G^2 (Gauss 1809; IAU 1976 system)
MASS_RATIO = {                           # body / Sun, from the DE421 constants (from memory)
    "earthmoon": 1 / 328_900.56,
    "mars": 1 / 3_098_703.59,
}
J2000 = 2451545.0


def _planar(body: str, days: float, step: float = 1.0) -> Track:
    ephemeris = jplephem.Ephemeris(de421)
    jd = J2000 + np.arange(0.0, days + 1e-9, step)
    position = ((ephemeris.position(body, jd) - ephemeris.position("sun", jd)) / AU_KM).T
    velocity = np.gradient(position, jd, axis=0)
    normal = np.mean(np.cross(position, velocity), axis=0)
    normal /= np.linalg.norm(normal)
    first = position[0] - (position[0] @ normal) * normal
    first /= np.linalg.norm(first)
    second = np.cross(normal, first)
    return Track(t=jd - J2000, x=position @ first, y=position @ second, length_unit="au", time_unit="d",
                 name=body)


@pytest.fixture(scope="module", params=[("earthmoon", 365.25), ("mars", 4 * 365.25)],
                ids=["Earth-Moon barycentre, 1 year", "Mars, 4 years"])
def perturbed(request):
    body, days = request.param
    return body, fit_orbit(_planar(body, days), centre=(0.0, 0.0))


def test_the_corrected_errors_cover_newton(perturbed):
    _, fit = perturbed
    assert abs(fit.exponent + 2.0) < 3 * fit.exponent_stderr
    # ...where the errors of independent residuals would not (9 of them for the barycentre):
    assert fit.correlation_time > 20
    assert fit.exponent_stderr > 3 * fit.white_stderrs["exponent"]


def test_the_strength_is_the_suns_gm_plus_the_bodys(perturbed):
    body, fit = perturbed
    expected = GAUSS_K2 * (1 + MASS_RATIO[body])
    assert fit.strength == pytest.approx(expected, rel=1e-4)


def test_the_misfit_checks_say_the_orbit_is_perturbed(perturbed):
    _, fit = perturbed
    assert not fit.passed
    assert fit.diagnostics["correlation"].passed is False


def test_newton_is_not_rejected_once_correlation_counts():
    comparison = compare_laws(_planar("earthmoon", 365.25), [-2.0], centre=(0.0, 0.0)).table
    assert comparison.loc["n = -2", "p_value"] > 0.05
    # BIC differences under 6 are not strong evidence (Kass & Raftery 1995, JASA 90, 773, §3.2)
    assert comparison.loc["n = -2", "delta_bic"] < 6.0
