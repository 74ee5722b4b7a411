"""A fast slice of the validation matrix (benchmarks/validation.py): one replicate of every
family, for the estimators listed here; none may answer confidently wrong (passed, yet more
than 3 stated standard errors from the truth), and none may crash."""

import importlib.util
import sys
from pathlib import Path

import pytest

SCRIPT = Path(__file__).resolve().parents[1] / "benchmarks" / "validation.py"
SLICE_ESTIMATORS = ("orbit", "pendulum")


@pytest.fixture(scope="module")
def matrix():
    spec = importlib.util.spec_from_file_location("validation_matrix", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module                       # its dataclasses look themselves up there
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def slice_rows(matrix):
    tasks = [task for task in matrix.tasks(replicates=1, slice_=True) if task[1] in SLICE_ESTIMATORS]
    return [matrix.run_one(task) for task in tasks]


def test_every_family_is_in_the_slice(matrix, slice_rows):
    families = {matrix.scenarios()[row["cell"]].family for row in slice_rows}
    first = {}
    for scenario in matrix.scenarios():
        first.setdefault(scenario.family, scenario)
    expected = {family for family, scenario in first.items()
                if set(scenario.estimators) & set(SLICE_ESTIMATORS)}
    assert families == expected and len(families) >= 12


def test_no_confident_wrong_answer_and_no_crash(matrix, slice_rows):
    crashes = [row for row in slice_rows if row["outcome"] == "crash"]
    assert not crashes, crashes
    wrong = [(matrix.scenarios()[row["cell"]].name, row["estimator"], row["z"]) for row in slice_rows
             if row["outcome"] == "answered" and abs(row["z"]) > matrix.WRONG_Z]
    assert not wrong, wrong


def test_the_circle_is_refused_and_the_screened_force_flagged(matrix, slice_rows):
    outcome = {matrix.scenarios()[row["cell"]].family: row["outcome"] for row in slice_rows
               if row["estimator"] == "orbit"}
    assert outcome["near-circle"] == "refused"                # e = 0: no exponent can be read
    assert outcome["screened"] == "flagged"                   # not a power law, and it says so
