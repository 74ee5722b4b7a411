"""The batch propagator and the full-orbit estimator against references and truth."""

import erfa
import numpy as np
import pandas as pd
import pytest

from forcefit.dynamics.laws import circular_period
from forcefit.dynamics.propagate import Drag, propagate_batch, propagate_reference
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import NotIdentifiable
from forcefit.estimators import fit_orbit
from forcefit.inference.comparison import compare_laws
from forcefit.reading.loaders import load_track
from forcefit.track import Track

from .conftest import screened_track
from .test_propagate import _kepler_positions

GAUSS_K2 = 0.01720209895**2     # au^3/d^2: Gauss (1809), IAU 1976 system


@pytest.mark.parametrize("exponent", [-2.9, -2.5, -2.0, -1.0, 0.0, 1.0, 2.0, 3.0])
def test_batch_matches_the_reference_over_five_revolutions(exponent):
    period = float(circular_period(1.0, exponent, 1.0))
    t = np.linspace(0.0, 5 * period, 600)
    reference = propagate_reference([1.0, 0.0], [0.0, 0.95], t, exponent=exponent, strength=1.0,
                                    epoch=t[300])
    batch = propagate_batch(t, [1.0, 0.0], [0.0, 0.95], exponent=exponent, strength=1.0, epoch=t[300])
    size = np.abs(reference.position).max()
    assert np.abs(batch.position[0] - reference.position).max() < 1e-9 * size


@pytest.mark.parametrize("eccentricity", [0.5, 0.9, 0.95])
def test_batch_matches_keplers_equation(eccentricity):
    # Kepler's equation solved by Newton iteration, velocity from the eccentric anomaly E:
    # v = n a (-sin E, sqrt(1 - e^2) cos E) / (1 - e cos E) (Murray & Dermott 1999, §2.4).
    # Five revolutions with the epoch in the middle, as the orbit fit uses it.
    a, mu = 1.0, 1.0
    t = np.linspace(0.0, 5 * 2 * np.pi, 700)
    epoch = t[350]
    anomaly = np.sqrt(mu / a**3) * epoch
    for _ in range(60):
        anomaly -= (anomaly - eccentricity * np.sin(anomaly) - np.sqrt(mu / a**3) * epoch) / (
            1 - eccentricity * np.cos(anomaly))
    factor = np.sqrt(mu / a) / (1 - eccentricity * np.cos(anomaly))
    velocity = factor * np.array([-np.sin(anomaly), np.sqrt(1 - eccentricity**2) * np.cos(anomaly)])
    position = _kepler_positions(np.array([epoch]), a, eccentricity, mu)[0]
    batch = propagate_batch(t, position, velocity, exponent=-2.0, strength=mu, epoch=epoch)
    error = np.abs(batch.position[0] - _kepler_positions(t, a, eccentricity, mu)).max()
    assert error < 1e-9 * 2 * a


def test_batch_orbits_are_independent_and_drag_matches_the_reference():
    t = np.linspace(-3.0, 6.0, 300)
    drag = Drag("quadratic", 0.2)
    reference = propagate_reference([1.0, 0.2], [0.1, 1.1], t, exponent=-1.5, strength=1.3, epoch=0.0,
                                    drag=drag)
    batch = propagate_batch(t, [[1.0, 0.2], [2.0, 0.0]], [[0.1, 1.1], [0.0, 0.5]], exponent=[-1.5, 1.0],
                            strength=[1.3, 0.5], epoch=0.0, quadratic_drag=[0.2, 0.0])
    np.testing.assert_allclose(batch.position[0], reference.position, atol=1e-9)
    alone = propagate_batch(t, [2.0, 0.0], [0.0, 0.5], exponent=1.0, strength=0.5, epoch=0.0)
    np.testing.assert_array_equal(batch.position[1], alone.position[0])


def test_orbit_into_the_centre_is_marked_failed():
    batch = propagate_batch(np.linspace(0, 5, 50), [1.0, 0.0], [0.0, 0.0], exponent=-2.0, strength=1.0,
                            epoch=0.0)
    assert not batch.ok[0] and np.isnan(batch.position[0]).all()


@pytest.mark.parametrize("exponent", [-2.5, -2.0, -1.0, 0.0, 1.0, 2.5])
def test_orbit_fit_recovers_the_law(exponent):
    track = simulate_orbit(exponent=exponent, strength=1.7, noise=0.003, centre=(0.2, -0.4),
                           rng=int(exponent * 10) + 50)
    fit = fit_orbit(track)
    assert abs(fit.exponent - exponent) < 3 * fit.exponent_stderr
    assert abs(fit.strength - 1.7) < 3 * fit.strength_stderr
    assert fit.passed and fit.reduced_chi2 == pytest.approx(1.0, abs=0.2)


def test_orbit_fit_with_linear_drag():
    track = simulate_orbit(exponent=1.0, strength=4.0, drag=Drag("linear", 0.05), noise=0.002,
                           duration=20.0, rate=40.0, rng=3)
    fit = fit_orbit(track, drag="linear")
    assert abs(fit.exponent - 1.0) < 3 * fit.exponent_stderr
    assert abs(fit.drag - 0.05) < 3 * fit.drag_stderr
    plain = fit_orbit(track)
    assert not plain.passed                      # without drag the model misses the decay


def test_robust_loss_shrugs_off_tracking_glitches():
    track = simulate_orbit(exponent=-1.5, noise=0.002, outliers=0.01, outlier_size=40, rng=8)
    planted = set(track.metadata["truth"]["outlier_indices"])
    plain = fit_orbit(track)
    robust = fit_orbit(track, loss="soft_l1")
    assert abs(robust.exponent + 1.5) < 2 * robust.exponent_stderr
    message = plain.diagnostics["outliers"].message
    assert plain.diagnostics["outliers"].passed is False
    assert all(str(index) in message for index in sorted(planted)[:5])


def test_three_launches_fitted_jointly():
    launches = [((1.0, 0.0), (0.0, 0.7)), ((0.0, 1.3), (-0.6, 0.0)), ((-0.8, -0.4), (0.3, -0.9))]
    tracks = [simulate_orbit(exponent=-1.0, strength=0.8, start=s, velocity=v, duration=15.0, rate=30.0,
                             noise=0.002, centre=(0.1, 0.1), rng=i, name=f"launch {i}")
              for i, (s, v) in enumerate(launches)]
    joint = fit_orbit(tracks)
    single = fit_orbit(tracks[0])
    assert abs(joint.exponent + 1.0) < 3 * joint.exponent_stderr
    assert joint.exponent_stderr < single.exponent_stderr
    assert joint.n_tracks == 3 and len(joint.parameter_names) == 2 + 2 + 3 * 4


def test_mars_from_plan94_is_inverse_square_with_the_gaussian_constant():
    # Source: pyerfa plan94 (Simon et al. 1994, A&A 282, 663), 4 years daily; the Sun at the centre.
    # Planetary perturbations limit agreement to about 1e-4 (see ../shared/CHECKS.md §8).
    jd = 2451545.0 + np.arange(0.0, 4 * 365.25)
    positions = erfa.plan94(jd, 0.0, 4)["p"]
    frame = pd.DataFrame({"t [d]": jd - jd[0], "x [au]": positions[:, 0], "y [au]": positions[:, 1],
                          "z [au]": positions[:, 2]})
    fit = fit_orbit(load_track(frame), centre=(0.0, 0.0))
    assert fit.exponent == pytest.approx(-2.0, abs=1e-3)
    assert fit.strength == pytest.approx(GAUSS_K2, rel=1e-3)


def test_keplers_third_law_on_the_fitted_orbit():
    # Kepler III with GM = k: T = 2 pi sqrt(a^3 / k), a from the vis-viva equation
    # v^2 = k (2/r - 1/a) (any celestial mechanics text; common practice).
    track = simulate_orbit(exponent=-2.0, strength=2.5, start=(1.0, 0.0), velocity=(0.0, 1.9),
                           duration=30.0, rate=20.0, noise=0.001, rng=4)
    fit = fit_orbit(track)
    states = fit.states
    r = np.hypot(states["x0"], states["y0"])
    v2 = states["vx0"] ** 2 + states["vy0"] ** 2
    a = 1.0 / (2.0 / r - v2 / fit.strength)
    true_a = 1.0 / (2.0 / 1.0 - 1.9**2 / 2.5)
    assert 2 * np.pi * np.sqrt(a**3 / fit.strength) == pytest.approx(2 * np.pi * np.sqrt(true_a**3 / 2.5),
                                                                    rel=1e-3)


def test_screened_force_is_flagged_as_not_a_power_law():
    # F = exp(-r/lambda)/r^2 has no single exponent: the fit's residuals must show it.
    track = screened_track()
    fit = fit_orbit(track)
    assert not fit.passed
    assert any(not check.passed for name, check in fit.diagnostics.items()
               if name in ("residuals", "correlation", "chi-square"))


def test_compare_laws_prefers_the_true_law():
    hooke = simulate_orbit(exponent=1.0, noise=0.002, rng=1)
    table = compare_laws(hooke, (1.0, -2.0)).table
    assert table.loc["n = 1", "p_value"] > 0.01 and table.loc["n = -2", "p_value"] < 1e-6
    assert table["bic"].idxmin() == "n = 1"
    kepler = simulate_orbit(exponent=-2.0, noise=0.002, rng=2)
    table = compare_laws(kepler, (1.0, -2.0)).table
    assert table["bic"].idxmin() == "n = -2" and table.loc["n = 1", "p_value"] < 1e-6


def test_frame_rotation_is_fitted():
    track = simulate_orbit(exponent=1.0, strength=4.0, noise=0.001, duration=30, rate=30, rng=6)
    omega = 0.01
    angle = -omega * (track.t - track.t[track.n_points // 2])
    rotated = Track(t=track.t, x=np.cos(angle) * track.x - np.sin(angle) * track.y,
                    y=np.sin(angle) * track.x + np.cos(angle) * track.y, sigma=track.sigma)
    fit = fit_orbit(rotated, rotation_rate="fit", exponent=1.0)
    assert abs(fit.rotation_rate - omega) < 3 * fit.rotation_rate_stderr
    assert fit.passed


def test_orbit_needs_timestamps():
    with pytest.raises(NotIdentifiable, match="needs timestamps"):
        fit_orbit(simulate_orbit(exponent=1.0).shape_only())
