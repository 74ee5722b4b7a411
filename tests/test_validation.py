"""A fast slice of the validation matrix (benchmarks/validation.py): one replicate of every
family, for the estimators listed here; none may answer confidently wrong (passed, yet more
than 3 stated standard errors from the truth), and none may crash.

Each replicate is its own test, so that parallel workers share the slice's cost."""

import importlib.util
import sys
from functools import cache
from pathlib import Path

import numpy as np
import pytest

SCRIPT = Path(__file__).resolve().parents[1] / "benchmarks" / "validation.py"
SLICE_ESTIMATORS = ("orbit", "pendulum", "shape", "curvature", "acceleration", "projected")


def _load_matrix():
    spec = importlib.util.spec_from_file_location("validation_matrix", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module                       # its dataclasses look themselves up there
    spec.loader.exec_module(module)
    return module


MATRIX = _load_matrix()
SLICE = [task for task in MATRIX.tasks(replicates=1, slice_=True) if task[1] in SLICE_ESTIMATORS]


def _label(task) -> str:
    return f"{MATRIX.scenarios()[task[0]].family}-{task[1]}"


@cache
def _row(task):
    """One replicate's row, run once per worker."""
    return MATRIX.run_one(task)


@pytest.fixture(scope="module")
def matrix():
    return MATRIX


def test_every_family_is_in_the_slice(matrix):
    families = {matrix.scenarios()[task[0]].family for task in SLICE}
    first = {}
    for scenario in matrix.scenarios():
        first.setdefault(scenario.family, scenario)
    expected = {family for family, scenario in first.items()
                if set(scenario.estimators) & set(SLICE_ESTIMATORS)}
    assert families == expected and len(families) >= 12
    assert {task[1] for task in SLICE} == set(SLICE_ESTIMATORS)


@pytest.mark.parametrize("task", SLICE, ids=_label)
def test_no_confident_wrong_answer_and_no_crash(matrix, task):
    row = _row(task)
    assert row["cell"] == task[0] and row["estimator"] == task[1]
    assert row["outcome"] != "crash", row
    if row["outcome"] == "answered":
        assert abs(row["z"]) <= matrix.WRONG_Z, (matrix.scenarios()[task[0]].name, task[1], row["z"])


@pytest.mark.parametrize(("family", "estimator", "expected"),
                         [("near-circle", "orbit", "refused"), ("near-circle", "shape", "refused"),
                          ("screened", "orbit", "flagged"), ("screened", "shape", "flagged")])
def test_the_circle_is_refused_and_the_screened_force_flagged(matrix, family, estimator, expected):
    # e = 0: no exponent can be read; the screened force is not a power law, and it says so
    (task,) = [task for task in SLICE
               if matrix.scenarios()[task[0]].family == family and task[1] == estimator]
    assert _row(task)["outcome"] == expected


SHAPE_STUDY = ("baseline", "near-circle", "short arc", "long: 10 turns n=-1", "uneven", "sparse", "eccentric",
               "sigma column: right", "pendulum: a/L=0.05, length not given")
"""The cells where the shape fit answers (others refuse or flag, which the slice checks)."""


@pytest.mark.slow
def test_shape_errors_are_honest_across_the_matrix(matrix):
    # The trust rule for the shape fit over the families it answers, 10 replicates per cell: no
    # confident wrong answer, z = (n - truth) / stated error with SD within 0.8-1.25 and 90-98% of
    # the answers inside their 95% interval, pooled (both two-sided: errors stated too large fail
    # as surely as errors stated too small; common practice).
    tasks = [task for task in matrix.tasks(replicates=10, estimator="shape")
             if any(text in matrix.scenarios()[task[0]].name for text in SHAPE_STUDY)]
    rows = [matrix.run_one(task) for task in tasks]
    assert not [row for row in rows if row["outcome"] == "crash"]
    z = np.array([row["z"] for row in rows if row["outcome"] == "answered"])
    assert z.size > 0.6 * len(rows) and not np.any(np.abs(z) > matrix.WRONG_Z)
    assert 0.8 <= float(np.std(z)) <= 1.25
    assert 0.90 <= float(np.mean(np.abs(z) < 1.96)) <= 0.98
