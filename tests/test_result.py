"""Results: the numbers a LawFit derives, its rows, text and JSON, immutability, and the orbit
fit's typed extras."""

import json
import math
from dataclasses import replace

import numpy as np
import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.estimators import fit_orbit
from forcefit.estimators.result import Diagnostic, LawFit


def _pendulum(**changes):
    """A hand-made fit: n = 0.99 with F(r_ref = 0.2 m) = 0.8 m s^-2."""
    values = dict(exponent=0.99, exponent_stderr=0.002, strength=4.1, strength_stderr=0.01,
                  strength_per_h2=1e3, strength_per_h2_stderr=2.0, centre=(0.0, 0.1),
                  centre_stderr=(1e-3, 1e-3), method="shape", n_points=500, chi2=510.0,
                  reduced_chi2=1.02, parameter_names=("exponent", "log_force"),
                  covariance=np.array([[4.0, 1.2], [1.2, 1.0]]), residuals=np.zeros(500),
                  length_unit="m", time_unit="s", reference_radius=0.2, force_at_reference=0.8,
                  force_at_reference_stderr=0.004,
                  diagnostics={"power law": Diagnostic(True, "fine."), "noise": Diagnostic(None, "as given")},
                  track_name="bob")
    values.update(changes)
    return LawFit(**values)


def test_strength_at_a_nominal_exponent_keeps_the_force_at_the_reference_radius():
    # For Hooke's law F = w^2 r, so w^2 = F(r_ref) / r_ref (common practice).
    k, error = _pendulum().strength_at_exponent(1.0)
    assert k == pytest.approx(0.8 / 0.2) and error == pytest.approx(0.004 / 0.2)


def test_correlation_of_two_parameters():
    # rho = C_ij / sqrt(C_ii C_jj) (definition, common practice)
    fit = _pendulum()
    assert fit.correlation("exponent", "log_force") == pytest.approx(1.2 / 2.0)
    assert math.isnan(fit.correlation("exponent", "drag"))


def test_text_shows_the_brief_rows_and_every_check():
    fit = _pendulum()
    text = fit.to_text()
    assert text.splitlines()[0] == "bob — shape fit of F = -k r^n"
    assert "  exponent n    0.9900 ± 0.0020" in text and "4.100 ± 0.010 m^0.01 s^-2" in text
    assert "✓ power law  fine." in text and "· noise      as given" in text
    # issue 15: our own marks, not the bracketed tags of a system's start-up log
    assert "[ok  ]" not in text and "[note]" not in text and "[FAIL]" not in text
    assert "reference radius" not in text                       # a row for the report page only
    labels = [row.label for row in fit.rows()]
    assert "k for n = 1 (same force at r_ref)" in labels     # n is not a whole number
    assert "k for n = 1 (same force at r_ref)" not in [row.label for row in
                                                       _pendulum(exponent=1.0).rows()]


def test_without_timestamps_the_strength_is_not_determined():
    fit = _pendulum(strength=math.nan, strength_stderr=math.nan, time_unit=None,
                    force_at_reference=math.nan, force_at_reference_stderr=math.nan)
    assert "strength k    not determined (no timestamps)" in fit.to_text()
    # issue 15: no placeholder unit leaks out ("k = nan T^-2")
    assert fit.strength_unit == "" and "T^-2" not in fit.to_text() and "nan" not in fit.to_text()


def test_json_form_and_the_verdict():
    fit = _pendulum(diagnostics={"power law": Diagnostic(False, "bends.")})
    report = json.loads(json.dumps(fit.to_dict()))
    assert report["passed"] is False and not fit.passed
    assert report["covariance"] == [[4.0, 1.2], [1.2, 1.0]] and report["details"] == {}
    assert json.loads(json.dumps(_pendulum(strength=math.nan).to_dict()))["strength"] is None


def test_a_result_keeps_its_own_read_only_copies():
    covariance = np.array([[4.0, 1.2], [1.2, 1.0]])
    fit = _pendulum(covariance=covariance)
    covariance[0, 0] = 99.0
    assert fit.covariance[0, 0] == 4.0 and not fit.covariance.flags.writeable
    with pytest.raises(TypeError):
        fit.diagnostics["new"] = Diagnostic(True, "")


@pytest.fixture(scope="module")
def hooke():
    track = simulate_orbit(exponent=1.0, strength=4.0, start=(0.3, 0.0), velocity=(0.0, 0.3),
                           duration=12.0, rate=30.0, noise=1e-4, rng=1)
    return track, fit_orbit(track)


def test_the_orbit_fit_predicts_its_own_fitted_positions(hooke):
    track, fit = hooke
    np.testing.assert_array_equal(fit.predict(), fit.fitted_positions)
    assert np.sqrt(np.mean((fit.fitted_positions - track.positions) ** 2)) < 2e-4   # at the noise level
    moved = fit.vector.copy()
    moved[fit.model.index("centre_x")] += 0.01
    np.testing.assert_allclose(fit.predict(moved)[:, 0] - fit.fitted_positions[:, 0], 0.01, rtol=1e-6)


def test_the_orbit_fits_typed_extras(hooke):
    track, fit = hooke
    assert set(fit.values) == set(fit.model.names) and set(fit.parameter_names) <= set(fit.values)
    assert fit.sigma.shape == (track.n_points,) and not fit.sigma.flags.writeable
    assert fit.sigma_known and fit.loss == "linear" and fit.converged and fit.evaluations > 0
    assert fit.n_tracks == 1 and fit.epochs == (float(track.t[track.n_points // 2]),)
    # h = x0 vy0 - y0 vx0 is conserved: it equals the launch's 0.3 x 0.3 (common practice)
    assert fit.angular_momentum == pytest.approx(0.09, rel=1e-3)
    assert set(fit.states) == {"x0", "y0", "vx0", "vy0"}
    assert math.isnan(fit.drag) and math.isnan(fit.rotation_rate_stderr)
    assert fit.stderrs["exponent"] == pytest.approx(fit.exponent_stderr)
    details = fit.to_dict()["details"]
    assert details["n_tracks"] == 1 and "drag" not in details and details["states"]["x0"] == fit.states["x0"]


def test_drag_is_shown_in_its_own_unit(hooke):
    _, fit = hooke
    quadratic = replace(fit, model=replace(fit.model, drag="quadratic"), drag=0.2, drag_stderr=0.01)
    (row,) = [row for row in quadratic.rows() if row.label == "drag"]
    assert (row.value, row.unit, row.brief) == ("0.200 ± 0.010", "1/m", False)
    assert quadratic.to_dict()["details"]["drag"] == 0.2
