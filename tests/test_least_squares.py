"""The least squares shared by the orbit and projected fits: held parameters, bounds, the evaluation
budget and its count, refusals in our own words."""

from __future__ import annotations

import math

import numpy as np
import pytest

from forcefit.errors import FitError
from forcefit.estimators._least_squares import ParameterVector, run_least_squares

X = np.linspace(-1.0, 2.0, 40)
NOISE = np.random.default_rng(3).normal(0.0, 0.05, X.size)


def _quadratic(vector: np.ndarray) -> np.ndarray:
    a, b, c = vector
    return a + b * X + c * X**2


def _quadratic_jacobian(vector: np.ndarray, columns: list[int]) -> np.ndarray:
    return -np.column_stack((np.ones_like(X), X, X**2))[:, columns]


def test_a_held_parameter_stays_and_the_others_match_the_linear_solution():
    # The normal-equations solution of the linear problem with c held (common practice), by
    # numpy's lstsq, is the independent reference.
    data = 1.0 - 0.5 * X + 0.25 * X**2 + NOISE
    start = ParameterVector.of(("a", "b", "c"), np.array([0.0, 0.0, 0.3]), lambda name: name == "c")
    optimum = run_least_squares(lambda v: data - _quadratic(v), _quadratic_jacobian, start, "linear", 50)
    design = np.column_stack((np.ones_like(X), X))
    expected = np.linalg.lstsq(design, data - 0.3 * X**2, rcond=None)[0]
    assert optimum.success and optimum.parameters.varying == ("a", "b")
    assert optimum.values["c"] == 0.3
    assert optimum.values["a"] == pytest.approx(expected[0], rel=1e-9)
    assert optimum.values["b"] == pytest.approx(expected[1], rel=1e-9)
    assert optimum.residual == pytest.approx(data - _quadratic(optimum.parameters.values), abs=1e-12)


def test_a_bound_holds_the_parameter_at_its_edge():
    # Unbounded, b comes out near -0.5; held below -0.6 it sits on the bound.
    data = 1.0 - 0.5 * X + 0.25 * X**2 + NOISE
    start = ParameterVector(names=("a", "b", "c"), values=np.array([0.0, -0.8, 0.0]), held=np.zeros(3, bool),
                            lower=np.full(3, -math.inf), upper=np.array([math.inf, -0.6, math.inf]))
    optimum = run_least_squares(lambda v: data - _quadratic(v), _quadratic_jacobian, start, "linear", 100)
    assert optimum.values["b"] == pytest.approx(-0.6, abs=1e-8)


def _decay(vector: np.ndarray) -> np.ndarray:
    amplitude, rate = vector
    return amplitude * np.exp(-rate * X)


def _decay_jacobian(vector: np.ndarray, columns: list[int]) -> np.ndarray:
    amplitude, rate = vector
    full = -np.column_stack((np.exp(-rate * X), -amplitude * X * np.exp(-rate * X)))
    return full[:, columns]


def test_the_budget_of_evaluations_is_kept_and_counted():
    data = _decay(np.array([2.0, 1.3]))                       # noise-free: the truth is the optimum
    start = ParameterVector.of(("amplitude", "rate"), np.array([0.5, 0.1]), lambda name: False)
    calls = []

    def residual(vector: np.ndarray) -> np.ndarray:
        calls.append(vector)
        return data - _decay(vector)

    short = run_least_squares(residual, _decay_jacobian, start, "linear", 3)
    assert not short.success and short.evaluations == 3 and "budget" in short.message
    assert len(calls) == 4                                     # three, and once more where it stopped
    full = run_least_squares(residual, _decay_jacobian, start, "linear", 200)
    assert full.success and 3 < full.evaluations < 200
    assert full.values["amplitude"] == pytest.approx(2.0, rel=1e-8)
    assert full.values["rate"] == pytest.approx(1.3, rel=1e-8)
    # where the budget ran out the point kept is one the optimiser accepted: no worse than the start
    assert np.sum(short.residual**2) <= np.sum((data - _decay(start.values))**2)


def test_a_non_finite_residual_is_refused_in_our_words():
    start = ParameterVector.of(("amplitude", "rate"), np.array([0.5, 0.1]), lambda name: False)
    with pytest.raises(FitError, match="residuals are not finite at a trial step") as caught:
        run_least_squares(lambda v: np.full(X.size, np.nan), _decay_jacobian, start, "linear", 20,
                          what="the test fit")
    assert str(caught.value).startswith("the test fit failed")
    assert caught.value.last_params == {"amplitude": 0.5, "rate": 0.1}


def test_a_parameter_vector_is_read_only_and_checks_its_shapes():
    vector = ParameterVector.of(("a", "b"), np.array([1.0, 2.0]), lambda name: name == "b")
    assert not vector.values.flags.writeable and vector.columns == [0]
    assert list(vector.full(np.array([5.0]))) == [5.0, 2.0]
    with pytest.raises(ValueError, match="one value"):
        ParameterVector(names=("a", "b"), values=np.array([1.0]), held=np.zeros(2, bool))
