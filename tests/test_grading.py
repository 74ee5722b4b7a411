"""Grading the demo class set, locally and on dask; resuming; reports that are safe to open."""

import dataclasses
import os
import re
import shutil
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import forcefit.apps.grading as grading
from forcefit.apps.grading import GradingRule, grade_runs, read_results
from forcefit.dynamics.simulate import simulate_pendulum
from forcefit.outputs.report import safe_name

from .conftest import DEMO

# The demo class set's card (datasets_demo/README.md): n = 1 within 0.05, k = g/L = 9.81/2.40 s^-2
# within 3%; runs 9-12 fail for the stated reasons.
RULE = GradingRule(expect=1.0, tolerance=0.05, strength=9.81 / 2.40, strength_tolerance=0.03,
                   load_options={"length_unit": "px"})
CLASS = DEMO / "class_pendulum"


@pytest.fixture(scope="module")
def graded(tmp_path_factory):
    out = tmp_path_factory.mktemp("graded")
    return out, grade_runs(CLASS, RULE, out, workers=2, progress=False)


def test_demo_class_set_is_graded_with_reasons(graded):
    out, frame = graded
    result = dict(zip(frame["run"], zip(frame["passed"], frame["reason"])))
    assert len(result) == 12
    assert all(result[f"run_{i:02d}"][0] for i in range(1, 9))
    assert not result["run_09"][0] and result["run_09"][1].startswith("strength outside tolerance")
    assert not result["run_10"][0] and "exponent outside tolerance" in result["run_10"][1]
    assert not result["run_11"][0] and "too short" in result["run_11"][1]
    assert not result["run_12"][0]
    assert "load error" in result["run_12"][1] and "row 904" in result["run_12"][1]
    # issue 16: the card's stated causes are what the feedback names
    advice = dict(zip(frame["run"], frame["advice"]))
    assert "(30/25)^2" in advice["run_09"] and "too short" in advice["run_11"]
    assert all(not advice[f"run_{i:02d}"] for i in range(1, 9))
    table = pd.read_csv(out / "results.csv")
    assert "strength_at_expected [s^-2]" in table.columns and "duration [s]" in table.columns


class _Checker(HTMLParser):
    """Checks that every non-void element is closed in order."""

    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.problems, self.images, self.links = [], [], [], []

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        if tag == "img":
            self.images.append(attributes.get("src", ""))
        if tag == "a":
            self.links.append(attributes.get("href", ""))
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack.pop() != tag:
            self.problems.append(tag)


def _check_page(path: Path) -> _Checker:
    checker = _Checker()
    checker.feed(path.read_text(encoding="utf-8"))
    assert not checker.problems and not checker.stack, (path, checker.problems, checker.stack)
    return checker


def test_reports_are_well_formed_and_every_figure_exists(graded):
    out, _ = graded
    index = _check_page(out / "index.html")
    assert (out / "exponents.png").stat().st_size > 5000
    pages = [out / link for link in index.links]
    assert len(pages) == 11                                   # the unreadable run has no page
    for page in pages:
        checker = _check_page(page)
        assert checker.images and all(src.startswith("data:image/png;base64,") for src in checker.images)
        for name in re.findall(r"\((run_\d+_\w+\.png)\)", page.read_text()):
            assert (page.parent / name).stat().st_size > 1000


def test_text_from_files_is_escaped(tmp_path):
    hostile = "run<img src=x onerror=alert(1)>"
    shutil.copy(CLASS / "run_02.csv", tmp_path / f"{hostile}.csv")
    out = tmp_path / "out"
    frame = grade_runs(tmp_path, RULE, out, workers=1, progress=False)
    assert frame["run"].tolist() == [hostile]
    for page in (out / "index.html", out / "runs" / f"{safe_name(hostile)}.html"):
        text = page.read_text()
        assert "<img src=x" not in text and "&lt;img src=x onerror=alert(1)&gt;" in text
    assert safe_name("../../x") == "x"
    assert all(p.resolve().is_relative_to(out.resolve()) for p in out.rglob("*"))


def test_an_interrupted_batch_resumes_without_redoing_or_losing_runs(tmp_path):
    runs = sorted(CLASS.glob("run_0[1-4].csv"))
    out = tmp_path / "out"
    grade_runs(runs[:2], RULE, out, workers=1, progress=False)            # interrupted after two
    first = {p.name: p.stat().st_mtime_ns for p in (out / "runs").glob("*.html")}
    frame = grade_runs(runs, RULE, out, workers=1, progress=False, resume=True)
    assert sorted(frame["run"]) == ["run_01", "run_02", "run_03", "run_04"]
    for name, stamp in first.items():
        assert (out / "runs" / name).stat().st_mtime_ns == stamp          # not graded again
    assert len(read_results(out / "results.csv")) == 4


@pytest.mark.slow  # starts a local cluster
def test_dask_local_cluster_gives_the_same_table(graded):
    distributed = pytest.importorskip("dask.distributed")
    out, local = graded
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        on_dask = grade_runs(CLASS, RULE, out.parent / "dask", scheduler=cluster.scheduler_address,
                             progress=False)
    columns = ["run", "passed", "reason", "exponent", "strength_at_expected"]
    pd.testing.assert_frame_equal(local[columns], on_dask[columns], check_exact=False, rtol=1e-9)


@pytest.mark.slow
def test_report_renders_in_headless_chromium(graded, tmp_path):
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None:
        pytest.skip("chromium is not installed (apt install chromium)")
    import subprocess

    out, _ = graded
    page = next((out / "runs").glob("run_01.html"))
    shot = tmp_path / "shot.png"
    subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                    "--no-first-run", "--disable-background-networking", "--disable-component-update",
                    "--disable-sync", f"--user-data-dir={tmp_path / 'profile'}",
                    f"--screenshot={shot}", "--window-size=1200,2400", page.as_uri()],
                   check=True, capture_output=True, timeout=120, env={**os.environ})
    from matplotlib.image import imread

    image = imread(shot)
    assert image.shape[0] >= 2000
    # the figures are drawn: pixels of the data colour (Okabe-Ito blue #0072B2) and many of the
    # fitted-orbit colour (vermillion #D55E00)
    def count(red, green, blue):
        return int(((abs(image[..., 0] - red / 255) < 0.08) & (abs(image[..., 1] - green / 255) < 0.08)
                    & (abs(image[..., 2] - blue / 255) < 0.08)).sum())

    assert count(0x00, 0x72, 0xB2) > 500 and count(0xD5, 0x5E, 0x00) > 2000


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


# Issue 15, "Units": a class with one run in ms and mm. Each run's strength is converted into the
# rule's unit (s^-2) before comparing; the table and the class page state one unit per column.

def _pendulum_run(folder, name, *, length_unit="px", time_unit="s", scale=1000.0, time_scale=1.0,
                  seed=1, duration=9.0, header=None):
    """A 2.00 m pendulum (g = 9.81 m/s^2, so k = g/L = 4.905 s^-2) filmed from above at 30 fps,
    written with positions times ``scale`` and times times ``time_scale``."""
    track = simulate_pendulum(length=2.0, gravity=9.81, start=(0.12, 0.0), velocity=(0.0, 0.1),
                              duration=duration, rate=30.0, noise=0.0005, rng=seed)
    names = header or (f"t [{time_unit}]", f"x [{length_unit}]", f"y [{length_unit}]")
    lines = [",".join(names)] + [f"{t * time_scale:.6f},{x * scale:.5f},{y * scale:.5f}"
                                 for t, x, y in zip(track.t, track.x, track.y)]
    path = folder / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_a_run_in_ms_and_mm_is_graded_in_the_rules_units(tmp_path):
    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "anna.csv", seed=1)                                        # px and s
    _pendulum_run(runs, "bruno.csv", length_unit="mm", time_unit="ms", time_scale=1000.0, seed=2)
    rule = GradingRule(expect=1.0, tolerance=0.05, strength=4.905, strength_tolerance=0.03,
                       load_options={"length_unit": "px"})              # k in s^-2 unless said
    out = tmp_path / "out"
    frame = grade_runs(runs, rule, out, workers=1, progress=False)
    assert frame["passed"].all(), frame["reason"].tolist()
    table = pd.read_csv(out / "results.csv")
    assert "strength_at_expected [s^-2]" in table.columns and "duration [s]" in table.columns
    np.testing.assert_allclose(table["strength_at_expected [s^-2]"], 4.905, rtol=0.03)
    np.testing.assert_allclose(table["duration [s]"], 9.0, rtol=0.01)
    page = (out / "index.html").read_text()
    assert page.count(" s^-2</td>") == 2 and "e-06" not in page
    assert "ms^-2" not in page and "k, class mean" in page                # issue 16: the class's mean
    # issue 16: k against the rule beside n, and a student column for the gradebook
    assert (out / "strengths.png").read_bytes().startswith(b"\x89PNG") and "<td>bruno</td>" in page
    assert read_results(out / "results.csv")["student"].tolist() == ["anna", "bruno"]


def test_a_strength_given_in_another_unit_is_converted(tmp_path):
    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "carla.csv", length_unit="mm", time_unit="ms", time_scale=1000.0)
    rule = GradingRule(expect=1.0, tolerance=0.05, strength=4.905e-6, strength_unit="ms^-2",
                       strength_tolerance=0.03)
    frame = grade_runs(runs, rule, tmp_path / "out", workers=1, progress=False)
    assert frame["passed"].all(), frame["reason"].tolist()
    assert pd.read_csv(tmp_path / "out" / "results.csv").columns.str.contains(r"\[ms\^-2\]").any()


def test_a_run_without_times_says_its_strength_is_not_determined(tmp_path):
    # issue 15: a placeholder unit leaked out as "k = nan T^-2"
    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "dora.csv", header=("Stempel", "x [px]", "y [px]"))       # time not found
    rule = GradingRule(expect=1.0, tolerance=0.05, strength=4.905, strength_tolerance=0.03)
    reason = grade_runs(runs, rule, tmp_path / "out", workers=1, progress=False)["reason"][0]
    assert "strength not checked: not determined without timestamps" in reason
    assert "nan" not in reason and "T^-2" not in reason


# Issue 16: grading a class all term.

def _grade(folder, rule, out, **options):
    return grade_runs(folder, rule, out, workers=1, progress=False, **options)


HOOKE = GradingRule(expect=1.0, tolerance=0.05, strength=4.905, strength_tolerance=0.03,
                    load_options={"length_unit": "mm"})


@pytest.mark.slow
def test_resume_regrades_a_run_whose_rule_or_file_changed(tmp_path):
    # issue 16: after tightening the tolerance a run still passed on --resume, and a fixed header
    # kept its old load error
    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "anna.csv", length_unit="mm", seed=1)
    _pendulum_run(runs, "bruno.csv", length_unit="mm", seed=2, header=("t [s]", "x [mm]"))
    out = tmp_path / "out"
    first = _grade(runs, HOOKE, out).set_index("run")
    assert first.loc["anna", "passed"] and "load error" in first.loc["bruno", "reason"]
    _pendulum_run(runs, "bruno.csv", length_unit="mm", seed=2)                 # the header fixed
    strict = dataclasses.replace(HOOKE, tolerance=1e-9)
    again = _grade(runs, strict, out, resume=True).set_index("run")
    assert not again.loc["anna", "passed"] and "exponent outside tolerance" in again.loc["anna", "reason"]
    assert "load error" not in again.loc["bruno", "reason"]
    stamp = (out / "results.csv").read_text()
    untouched = _grade(runs, strict, out, resume=True)                         # nothing changed
    assert untouched["fingerprint"].tolist() == again["fingerprint"].tolist()
    assert (out / "results.csv").read_text() == stamp


@pytest.mark.slow
def test_only_data_files_are_runs(tmp_path):
    # issue 16: notes.txt and last week's results.csv in the folder counted as failed runs
    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "anna.csv", length_unit="mm")
    (runs / "notes.txt").write_text("Week 3: the long pendulum, 2.00 m. Bring a tape measure.\n")
    (runs / "photo.jpg").write_bytes(b"\xff\xd8\xff\xe0")
    _grade(runs, HOOKE, runs)                                 # a grading written into the folder itself
    frame = _grade(runs, HOOKE, tmp_path / "out")
    assert frame["run"].tolist() == ["anna"]
    page = (tmp_path / "out" / "index.html").read_text()
    assert "notes.txt" in page and "not a table of numbers" in page
    assert "results.csv" in page and "an earlier grading" in page and "1 of 1 runs" in page


def test_the_class_page_is_readable_by_others(tmp_path):
    # issue 16: every output file was owner-only (0600)
    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "anna.csv", length_unit="mm", duration=4.0)
    old = os.umask(0o022)
    try:
        _grade(runs, HOOKE, tmp_path / "out")
    finally:
        os.umask(old)
    for name in ("index.html", "results.csv", "exponents.png", "runs/anna.html"):
        assert (tmp_path / "out" / name).stat().st_mode & 0o044 == 0o044, name


@pytest.mark.slow
def test_warnings_go_into_the_rows_notes_not_the_terminal(tmp_path, capsys):
    # issue 16: raw warnings (with the interpreter's path and a source line) leaked even with --quiet
    import warnings

    from forcefit.cli import main

    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "anna.csv", length_unit="mm", duration=4.0)            # header mm, option px
    rule = GradingRule(expect=1.0, tolerance=0.05, load_options={"length_unit": "px"})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        frame = _grade(runs, rule, tmp_path / "out")
    assert not caught
    assert "the header says mm" in frame["notes"][0]
    main(["grade", str(runs), "--expect", "1", "--tolerance", "0.05", "--length-unit", "px",
          "--out", str(tmp_path / "cli"), "--workers", "1", "--quiet"])
    captured = capsys.readouterr()
    assert "Warning" not in captured.err and "warnings.warn" not in captured.err


def test_a_run_named_like_a_formula_is_escaped_in_the_table(tmp_path):
    # issue 16: a run named =HYPERLINK(...) or +1+1 went into results.csv as a formula. OWASP,
    # "CSV Injection": prefix cells beginning with = + - @ tab or CR with an apostrophe.
    runs = tmp_path / "runs"
    runs.mkdir()
    for name in ('=HYPERLINK("http:__example.invalid").csv', "+1+1.csv", "@SUM(A1).csv"):
        (runs / name).write_text("t,x,y\n0,1,0\n1,0,1\n2,-1,0\n3,0,-1\n")
    frame = _grade(runs, HOOKE, tmp_path / "out")
    cells = pd.read_csv(tmp_path / "out" / "results.csv", dtype=str)["run"].tolist()
    assert sorted(cells) == ["'+1+1", "'=HYPERLINK(\"http:__example.invalid\")", "'@SUM(A1)"]
    assert sorted(read_results(tmp_path / "out" / "results.csv")["run"]) == sorted(frame["run"])
    assert any(run.startswith("=HYPERLINK") for run in frame["run"])              # the names as given


def test_excel_reading_is_in_the_default_install():
    # issue 16: .xlsx files failed after a plain install until an extra was added
    import tomllib

    project = tomllib.loads((Path(__file__).parents[1] / "pyproject.toml").read_text())["project"]
    assert any(requirement.startswith("openpyxl") for requirement in project["dependencies"])


@pytest.mark.slow
@pytest.mark.parametrize("case, expected", [
    ("ms_labelled_s", "milliseconds labelled as s"),
    ("frame_index", "a frame counter was used as the time"),
    ("wrong_frame_rate", "(30/25)^2"),
    ("too_short", "too short"),
    ("truncated", "cut short"),
])
def test_a_failing_run_names_its_likely_mistake(tmp_path, case, expected):
    # issue 16: failing rows stated the fact but not the likely mistake
    runs = tmp_path / "runs"
    runs.mkdir()
    rule = HOOKE
    if case == "ms_labelled_s":
        _pendulum_run(runs, "run.csv", length_unit="mm", time_scale=1000.0, duration=6.0)  # ms written as s
    elif case == "frame_index":
        _pendulum_run(runs, "run.csv", length_unit="mm", time_scale=30.0, duration=6.0)    # frame numbers
    elif case == "wrong_frame_rate":
        _pendulum_run(runs, "run.csv", length_unit="mm", time_scale=25.0 / 30.0, duration=6.0)
    elif case == "too_short":
        _pendulum_run(runs, "run.csv", length_unit="mm", duration=1.8)
        rule = dataclasses.replace(HOOKE, min_turns=1.0)
    else:
        path = _pendulum_run(runs, "run.csv", length_unit="mm", duration=4.0)
        path.write_text(path.read_text()[:-14])                                 # the last line cut
    row = _grade(runs, rule, tmp_path / "out").iloc[0]
    assert not row["passed"] and expected in row["advice"], row["advice"]
    assert expected in (tmp_path / "out" / "index.html").read_text()


def test_a_runs_warnings_are_kept_in_its_row(tmp_path):
    # issue 16 (fast form): grade_run records the loader's warnings in the row and lets none out
    import warnings

    path = tmp_path / "anna.csv"
    path.write_text("t [s],x [mm],y [mm]\n0,1,0\n1,0,1\n2,-1,0\n3,0,-1\n")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        row = grading.grade_run(path, GradingRule(expect=1.0, tolerance=0.05,
                                                   load_options={"length_unit": "px"}))
    assert not caught and "the header says mm" in row["notes"]
    assert len(row["fingerprint"]) == 32


@pytest.mark.slow
def test_a_mixed_class_grades_in_one_command_with_its_settings_file(tmp_path, capsys):
    # issue 16: a class whose files differ (px, ms without a unit, a 25 fps frame column among
    # 30 fps runs) is graded in one batch with one settings file beside the runs
    from forcefit.cli import main

    runs = tmp_path / "runs"
    runs.mkdir()
    _pendulum_run(runs, "anna.csv", scale=1000.0 / 1.6, header=("t", "x", "y"))     # px, s
    _pendulum_run(runs, "bruno.csv", time_scale=1000.0, header=("t", "x", "y"), seed=2)   # ms, no unit
    swing = simulate_pendulum(length=2.0, gravity=9.81, start=(0.12, 0.0), velocity=(0.0, 0.1),
                              duration=9.0, rate=25.0, noise=0.0005, rng=3)
    (runs / "carla.csv").write_text("frame,x,y\n" + "".join(
        f"{i},{x * 625:.4f},{y * 625:.4f}\n" for i, (x, y) in enumerate(zip(swing.x, swing.y))))
    (runs / "forcefit-class.toml").write_text(
        '[rule]\nexpect = 1\ntolerance = 0.05\nstrength = 4.905\nstrength_tolerance = 0.03\n'
        '[reading]\nlength_unit = "px"\n'
        '[[file]]\nmatch = "bruno.csv"\ntime_unit = "ms"\n'
        '[[file]]\nmatch = "carla.csv"\nframe_rate = 25\n')
    out = tmp_path / "out"
    assert main(["grade", str(runs), "--out", str(out), "--workers", "1", "--quiet"]) == 0
    assert "3 of 3 runs meet the rule" in capsys.readouterr().out
    assert "frame_rate 25" in (out / "runs" / "carla.html").read_text()
    # with the class's usual 30 fps for carla and nothing for bruno, both fail, their mistakes named
    (runs / "forcefit-class.toml").write_text(
        '[rule]\nexpect = 1\ntolerance = 0.05\nstrength = 4.905\nstrength_tolerance = 0.03\n'
        '[reading]\nlength_unit = "px"\n[[file]]\nmatch = "carla.csv"\nframe_rate = 30\n')
    assert main(["grade", str(runs), "--out", str(out), "--workers", "1", "--quiet", "--resume"]) == 1
    table = read_results(out / "results.csv").set_index("run")
    assert table.loc["anna", "passed"] and not table.loc["bruno", "passed"]
    assert "milliseconds" in table.loc["bruno", "advice"] and "(30/25)^2" in table.loc["carla", "advice"]


@pytest.mark.parametrize("side", [-1.0, 1.0])
def test_the_band_is_two_sided_and_holds_its_edges(side):
    # A run passes when |n - N| <= T (the class rule, common practice): just inside on either
    # side passes, exactly at the edge passes, just outside on either side fails.
    rule = GradingRule(expect=1.0, tolerance=0.02, strength=4.905, strength_tolerance=0.05)
    for offset, inside in ((0.02 - 1e-6, True), (0.02 + 1e-6, False), (0.0, True)):
        assert rule.exponent_within(1.0 + side * offset) is inside, (side, offset)
    assert rule.exponent_within(1.0 + side * 0.015625) and not rule.exponent_within(1.0 + side * 0.5)
    edge = GradingRule(expect=1.0, tolerance=0.25)        # edges exact in binary
    assert edge.exponent_within(1.0 + side * 0.25)
    for ratio, inside in ((0.05 - 1e-6, True), (0.05 + 1e-6, False)):
        assert rule.strength_within(4.905 * (1 + side * ratio)) is inside, (side, ratio)
    strength_edge = GradingRule(expect=1.0, tolerance=0.25, strength=2.0, strength_tolerance=0.25)
    assert strength_edge.strength_within(2.0 * (1 + side * 0.25))   # k / K - 1 = -+0.25 exactly
    assert GradingRule(expect=1.0, tolerance=0.02).strength_within(123.0)   # no strength asked


def test_a_class_without_settings_is_graded_by_the_starting_files_rule():
    # The starting settings file states the rule's defaults (and --min-turns' help says "default
    # 1"): a class graded with no settings file and one graded with the untouched starting file
    # must meet the same rule, or the file would mislead whoever edits it.
    import tomllib

    from forcefit.apps.class_settings import STARTING_FILE
    from forcefit.apps.grading import rule_with_settings

    written = tomllib.loads(STARTING_FILE)["rule"]
    rule = rule_with_settings(None, rule={"expect": written["expect"], "tolerance": written["tolerance"]},
                              options={})
    assert rule.min_turns == written["min_turns"] == 1.0
    assert (rule.strength, rule.strength_tolerance, rule.strength_unit) == (None, None, None)


@pytest.mark.parametrize(("expect", "units", "unit"), [
    (1.0, (None, "s"), "s^-2"), (2.0, ("m", "s"), "m^-1 s^-2"), (-2.0, ("m", "s"), "m^3 s^-2"),
    (0.5, ("m", "s"), "m^0.5 s^-2")])
def test_a_rule_without_a_strength_unit_is_in_metres_and_seconds(expect, units, unit):
    # F = -k r^n per unit mass gives k the dimension L^(1-n) T^-2 (dimensional analysis; common
    # practice): in metres and seconds unless the rule says otherwise, with no length at n = 1.
    rule = GradingRule(expect=expect, tolerance=0.05)
    assert rule.units == units and rule.unit == unit
