"""The deviation from a nominal law: the strength there (omega, g = k L), the significance, and the
precession it implies, against measured apses."""

import math

import numpy as np
import pytest

from forcefit.analysis.apsides import measure_apsides
from forcefit.analysis.deviation import deviation_from
from forcefit.cli import main
from forcefit.dynamics.simulate import simulate_orbit, simulate_pendulum
from forcefit.estimators import LawFit, fit_orbit


@pytest.fixture(scope="module")
def nearly_kepler():
    # n = -2 - delta with delta = 2e-4 at e ~ 0.3 over 20 orbits: the apses advance by
    # 2 pi delta / (1 + sqrt(1 - e^2)) per orbit (CHECKS.md §5, derived, verified to 2e-6).
    track = simulate_orbit(exponent=-2.0002, strength=1.0, start=(1.0, 0.0), velocity=(0.0, math.sqrt(1.3)),
                           duration=20 * 2 * math.pi * (1 / 0.7) ** 1.5, rate=40.0, noise=1e-5, rng=11)
    return track, fit_orbit(track, centre=(0.0, 0.0))


def test_the_deviation_is_the_fitted_exponent_less_the_nominal(nearly_kepler):
    _, fit = nearly_kepler
    deviation = deviation_from(fit, -2.0)
    assert deviation.delta == pytest.approx(fit.exponent + 2.0)
    assert deviation.significance == pytest.approx(abs(fit.exponent + 2.0) / fit.exponent_stderr)
    assert abs(deviation.delta + 2e-4) < 3 * deviation.delta_stderr


def test_the_implied_precession_is_what_the_apses_show(nearly_kepler):
    track, fit = nearly_kepler
    deviation = deviation_from(fit, -2.0)
    e = deviation.eccentricity
    assert e == pytest.approx(0.3, abs=0.01)                  # vis-viva: r_p = 1, v_p^2 = 1.3
    exact = 2 * math.pi * 2e-4 / (1 + math.sqrt(1 - e**2))
    assert abs(deviation.precession_per_orbit - exact) < 3 * deviation.precession_per_orbit_stderr
    apsides = measure_apsides(track, centre=(0.0, 0.0))       # an independent measurement
    gap = deviation.precession_per_orbit - apsides.precession_per_revolution
    assert abs(gap) < 3 * math.hypot(deviation.precession_per_orbit_stderr,
                                     apsides.precession_per_revolution_stderr)


def test_against_hooke_no_precession_is_implied():
    fit = fit_orbit(simulate_orbit(exponent=1.0, strength=4.0, noise=1e-3, rng=2))
    deviation = deviation_from(fit, 1.0)
    assert math.isnan(deviation.precession_per_orbit) and deviation.significance < 4


def test_fit_states_the_deviation_from_the_nearer_nominal_law(tmp_path, capsys):
    a, k = 1.0, 2.959122082855911e-4                          # au, au^3/d^2 (Gauss 1809)
    track = simulate_orbit(exponent=-2.0, strength=k, start=(0.8 * a, 0.0),
                           velocity=(0.0, math.sqrt(k * 1.2 / (0.8 * a))), duration=6 * 365.25, rate=0.5,
                           noise=1e-7, length_unit="au", time_unit="d", rng=4)
    path = tmp_path / "planet.csv"
    path.write_text("t (d),x (au),y (au)\n" + "\n".join(f"{t:.2f},{x:.10f},{y:.10f}"
                                                       for t, x, y in zip(track.t, track.x, track.y)))
    assert main(["fit", str(path), "--centre", "0,0"]) == 0
    text = capsys.readouterr().out
    assert "deviation from n = -2" in text and "arcsec per century" in text
    assert main(["fit", str(path), "--centre", "0,0", "--nominal", "-1.9", "--json"]) == 0
    report = __import__("json").loads(capsys.readouterr().out)[0]
    assert report["deviation"]["nominal"] == -1.9
    assert report["deviation"]["delta"] == pytest.approx(report["exponent"] + 1.9)
    assert np.isnan(report["deviation"]["precession_per_orbit"] or np.nan)


@pytest.fixture(scope="module")
def pendulum_fit():
    track = simulate_pendulum(length=2.0, gravity=9.81, start=(0.05, 0.0), velocity=(0.0, 0.05),
                              duration=20.0, rate=30.0, noise=2e-4, rng=3)
    return fit_orbit(track)


def test_a_small_swing_gives_g_over_l_and_g(pendulum_fit):
    # A pendulum of small amplitude a obeys Hooke's law with k = omega^2 = g/L (common practice);
    # the finite amplitude changes omega^2 by a fraction of order (a/L)^2 ~ 6e-4 here.
    law = deviation_from(pendulum_fit, 1.0, pendulum_length=(2.0, "m"), pendulum_length_stderr=0.002)
    assert law.nominal == 1.0 and law.strength_unit == "s^-2"
    assert law.strength == pytest.approx(9.81 / 2.0, rel=2e-3)
    assert law.angular_frequency == pytest.approx(math.sqrt(9.81 / 2.0), rel=1e-3)
    assert law.gravity == pytest.approx(9.81, rel=2e-3) and law.gravity_unit == "m/s^2"
    assert law.gravity_stderr == pytest.approx(law.strength * 0.002, rel=0.05)   # L's error dominates
    labels = [row.label for row in law.rows()]
    assert labels == ["k at n = 1", "angular frequency", "g = k L", "with L", "deviation from n = 1"]


def test_the_deviation_its_significance_and_p_value():
    fit = fit_orbit(simulate_orbit(exponent=-1.9, noise=1e-3, rng=5))
    law = deviation_from(fit, -2.0)
    assert law.delta == pytest.approx(fit.exponent + 2.0)
    assert law.significance == pytest.approx(abs(law.delta) / fit.exponent_stderr)
    assert not law.consistent and "differs from the inverse-square law" in law.verdict()
    assert law.strength_unit == "m^3 s^-2" and math.isnan(law.gravity)
    # two-sided normal tail: p = 2 (1 - Phi(|z|)) (common practice)
    assert deviation_from(fit, fit.exponent + 1.96 * fit.exponent_stderr).p_value \
        == pytest.approx(0.05, rel=1e-3)


def test_without_timestamps_only_the_deviation_is_given():
    # a shape-only fit (no times) has no strength, so no k at n = 1 and no g
    fit = LawFit(exponent=0.99, exponent_stderr=0.002, strength=math.nan, strength_stderr=math.nan,
                 strength_per_h2=1.0, strength_per_h2_stderr=0.1, centre=(0.0, 0.0),
                 centre_stderr=(0.01, 0.01), method="shape", n_points=100, chi2=98.0, reduced_chi2=1.0,
                 parameter_names=(), covariance=[], residuals=[], length_unit="m", time_unit=None,
                 reference_radius=0.2, force_at_reference=math.nan, force_at_reference_stderr=math.nan)
    law = deviation_from(fit, 1.0, pendulum_length=(2.0, "m"))
    assert math.isnan(law.strength) and law.strength_unit == "" and math.isnan(law.gravity)
    assert law.rows()[0].text == "not determined (no timestamps)"
    assert law.delta == pytest.approx(-0.01) and law.significance == pytest.approx(5.0)


def test_a_fit_that_failed_its_checks_is_no_test_of_the_law(screened):
    # a screened force F = exp(-r/lambda)/r^2 is no power law: the fit's checks fail, so however
    # many standard errors n lies from -2, the verdict must not read as a measurement of it
    fit = fit_orbit(screened())
    assert not fit.passed
    deviation = deviation_from(fit)
    assert deviation.significance > 3
    assert "not a test of the inverse-square law" in deviation.verdict()
    assert "differs from" not in deviation.verdict() and deviation.to_dict()["fit_passed"] is False
