"""Issue #8: failed fits are marked everywhere, nothing is lost, outputs are safe."""

import os
import re

import numpy as np
import pytest

import forcefit._atomic as atomic
import forcefit.apps.grading as grading
from forcefit.apps.grading import GradingRule, grade_runs, read_results
from forcefit.estimators import fit_orbit
from forcefit.reading.loaders import save_track

from .conftest import DEMO, ROOT, screened_track


def _screened(tmp_path):
    """A screened force exp(-r)/r^2 (no power law describes it), and its file."""
    track = screened_track(1200)
    path = tmp_path / "screened.csv"
    save_track(track, path)
    return track, path


def test_an_unconverged_fit_fails_its_convergence_check(tmp_path):
    track, _ = _screened(tmp_path)
    fit = fit_orbit(track, max_evaluations=2)
    assert fit.diagnostics["convergence"].passed is False and not fit.passed


def test_a_fit_that_runs_away_is_refused_not_returned_with_infinities():
    # Found by the slow property suite: 12 samples, each a third of a turn apart, of an n = 3
    # orbit; the optimiser wanders to n ~ -256 where the strength overflows.
    from forcefit.dynamics.simulate import simulate_orbit
    from forcefit.errors import FitError

    track = simulate_orbit(exponent=3.0, duration=21.02, rate=11 / 21.02, noise=1e-4,
                           rng=np.random.default_rng(9), velocity=(0.0, 1.25))
    with pytest.raises(FitError, match="ran away|no well-determined solution"):
        fit_orbit(track)


def test_outputs_are_written_whole_or_not_at_all(tmp_path, monkeypatch):
    target = tmp_path / "results.csv"
    target.write_text("old, complete contents\n")

    def broken_replace(source, destination):
        raise OSError("disk full")

    monkeypatch.setattr(atomic.os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        atomic.write_atomic(target, "new contents that never arrive\n")
    assert target.read_text() == "old, complete contents\n"
    assert [p.name for p in tmp_path.iterdir()] == ["results.csv"]       # no temporary left over


def test_an_interrupted_batch_keeps_every_finished_row(tmp_path, monkeypatch):
    runs = sorted((DEMO / "class_pendulum").glob("run_0[1-4].csv"))
    real = grading.grade_run
    calls = []

    def interrupted(path, rule, out_dir=None):
        calls.append(path)
        if len(calls) == 3:
            raise KeyboardInterrupt                                        # Ctrl-C during run 3
        return real(path, rule, out_dir)

    monkeypatch.setattr(grading, "grade_run", interrupted)
    rule = GradingRule(expect=1.0, tolerance=0.05, load_options={"length_unit": "px"})
    with pytest.raises(KeyboardInterrupt):
        grade_runs(runs, rule, tmp_path, workers=1, progress=False)
    assert sorted(read_results(tmp_path / "results.csv")["run"]) == ["run_01", "run_02"]


def test_no_eval_pickle_or_unsafe_yaml_on_user_data():
    source = "\n".join(p.read_text() for p in (ROOT / "forcefit").rglob("*.py"))
    for pattern in (r"\beval\(", r"\bexec\(", r"\bpickle\b", r"yaml\.load\(", r"\bmarshal\b",
                    r"allow_pickle=True"):
        assert not re.search(pattern, source), pattern
    assert os.path.exists(ROOT / "forcefit" / "outputs" / "templates" / "run.html.j2")
