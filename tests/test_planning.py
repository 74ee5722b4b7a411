"""Planning: the Fisher forecast against a Monte Carlo study of the orbit fit."""

import numpy as np
import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import InputError, NotIdentifiable
from forcefit.estimators import fit_orbit
from forcefit.inference.planning import forecast_precision, pendulum_law, required_duration, required_rate

PLAN = {"exponent": -1.5, "strength": 1.0, "start": (1.0, 0.0), "velocity": (0.0, 0.8), "rate": 15.0,
        "noise": 0.005}


def test_forecast_agrees_with_the_fits_stated_errors():
    # The Cramer-Rao bound (Fisher 1925; Rao 1945; Cramer 1946; common practice) is the inverse
    # Fisher matrix J^T J / sigma^2 at the truth; the orbit fit states the same matrix at its
    # estimate (sigma given, residuals independent), so the two agree to within the change of
    # J over a few standard errors: 5% here. The scatter of replicate fits against the forecast
    # is the slow study below.
    forecast = forecast_precision(duration=20.0, **PLAN)
    for seed in range(3):
        fit = fit_orbit(simulate_orbit(duration=20.0, rng=seed, **PLAN))
        assert fit.correlation_time == 1.0
        assert fit.exponent_stderr == pytest.approx(forecast.exponent_stderr, rel=0.05)
    wider = forecast_precision(duration=20.0, **{**PLAN, "noise": 2 * PLAN["noise"]})
    assert wider.exponent_stderr == pytest.approx(2 * forecast.exponent_stderr, rel=1e-6)


@pytest.mark.slow
def test_forecast_agrees_with_monte_carlo_within_fifteen_percent():
    # The Cramer-Rao bound (Fisher 1925; Rao 1945; Cramer 1946; common practice) against the
    # scatter of 120 replicate fits.
    forecast = forecast_precision(duration=20.0, **PLAN)
    fitted = [fit_orbit(simulate_orbit(duration=20.0, rng=seed, **{k: v for k, v in PLAN.items()})).exponent
              for seed in range(120)]
    assert np.std(fitted, ddof=1) == pytest.approx(forecast.exponent_stderr, rel=0.15)


def test_needs_for_a_target_precision():
    forecast = forecast_precision(duration=20.0, **PLAN)
    target = forecast.exponent_stderr / 2
    longer = required_duration(target, **PLAN)
    assert forecast_precision(duration=longer, **PLAN).exponent_stderr == pytest.approx(target, rel=0.02)
    faster = required_rate(target, duration=20.0, **{k: v for k, v in PLAN.items()})
    plan = {**PLAN, "rate": faster}
    assert forecast_precision(duration=20.0, **plan).exponent_stderr == pytest.approx(target, rel=0.05)


def test_a_target_out_of_reach_is_refused():
    with pytest.raises(NotIdentifiable, match="even 40 time units"):
        required_duration(1e-9, longest=40.0, **PLAN)


def test_bad_plans_are_refused():
    with pytest.raises(InputError, match="positive"):
        forecast_precision(duration=-1.0, **PLAN)
    with pytest.raises(InputError, match="unknown free"):
        forecast_precision(duration=5.0, free=("mass",), **PLAN)


def test_a_pendulum_plan_and_explicit_plan_keywords():
    # A pendulum of length L is Hooke's law with k = g / L (small angles, common practice).
    plan = pendulum_law(2.4, (0.2, 0.1), gravity=9.81)
    assert plan["strength"] == pytest.approx(9.81 / 2.4) and plan["start"] == (0.2, 0.0)
    assert plan["velocity"] == pytest.approx((0.0, 0.1 * np.sqrt(9.81 / 2.4)))
    with pytest.raises(TypeError):
        required_rate(1e-4, duration=30.0, rate=30.0, noise=1e-3, durations=3, **plan)
