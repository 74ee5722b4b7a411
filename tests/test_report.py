"""Report pages: every row of the result with its unit, the figures written beside the page,
the posterior and apsides sections, the class page, failed fits marked, safe file names."""

import json
import re
from html.parser import HTMLParser

import numpy as np
import pytest

from forcefit.analysis.apsides import measure_apsides
from forcefit.cli import main
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.estimators import fit_orbit
from forcefit.outputs.report import Verdict, write_class_report, write_report
from forcefit.reading.loaders import save_track
from forcefit.track import Track


class _Cells(HTMLParser):
    """The text of every table cell, in order."""

    def __init__(self):
        super().__init__()
        self.cells, self._inside = [], False

    def handle_starttag(self, tag, attrs):
        if tag in ("td", "th"):
            self._inside = True
            self.cells.append("")

    def handle_endtag(self, tag):
        if tag in ("td", "th"):
            self._inside = False

    def handle_data(self, data):
        if self._inside:
            self.cells[-1] += data


def _cells(page):
    parser = _Cells()
    parser.feed(page.read_text(encoding="utf-8"))
    return [cell.strip() for cell in parser.cells]


@pytest.fixture(scope="module")
def hooke():
    track = simulate_orbit(exponent=1.0, strength=4.0, duration=20.0, rate=30.0, noise=1e-3, rng=2,
                           name="hooke")
    return track, fit_orbit(track, drag="linear")


def test_the_page_shows_every_row_and_writes_the_figures(hooke, tmp_path):
    track, fit = hooke
    page = write_report(fit, tmp_path, track=track)
    cells = _cells(page)
    for row in fit.rows():
        index = cells.index(row.label)
        assert cells[index + 1] == row.value and cells[index + 2] == row.unit
    assert "drag" in cells and cells[cells.index("drag") + 2] == "1/s"
    for key in ("path", "residuals"):
        assert (tmp_path / f"hooke_{key}.png").read_bytes().startswith(b"\x89PNG")
    assert not (tmp_path / "hooke_relation.png").exists()      # the orbit fit draws no curvature relation
    assert "CHECKS PASSED" in page.read_text() or "CHECKS FAILED" in page.read_text()


def test_apsides_and_a_verdict_are_shown(hooke, tmp_path):
    track, fit = hooke
    apsides = measure_apsides(track)
    page = write_report(fit, tmp_path, track=track, apsides=apsides,
                        verdict=Verdict("PASS", True, ("all good",)))
    cells, text = _cells(page), page.read_text()
    for row in apsides.rows():
        assert row.value in cells
    assert "PASS" in text and "all good" in text and (tmp_path / "hooke_apsides.png").exists()


def test_the_class_page_lists_every_run(tmp_path):
    rows = [{"run": "run_a", "passed": True, "exponent": 1.01, "exponent_stderr": 0.02,
             "strength_at_expected": 4.1, "strength_at_expected_stderr": 0.1, "reason": "",
             "report": "runs/run_a.html"},
            {"run": "run_b", "passed": False, "exponent": float("nan"), "reason": "load error: row 3"}]
    page = write_class_report(rows, tmp_path, expect=1.0, tolerance=0.05, strength=4.0875,
                              strength_tolerance=0.03, strength_unit="s^-2", title="week 3")
    cells = _cells(page)
    # two significant digits of the error (forcefit.formatting.measurement)
    assert "run_a" in cells and "1.010 ± 0.020" in cells and "4.10 ± 0.10 s^-2" in cells
    assert "load error: row 3" in cells and (tmp_path / "exponents.png").exists()


def test_a_failed_fit_is_marked_in_every_output(screened, tmp_path, capsys):
    # the table (fit.to_text() and what the command adds), the page (write_report) and the JSON
    # (fit.to_dict()), each as the command line writes them: two fits of the track in all
    path = tmp_path / "screened.csv"
    save_track(screened(), path)
    assert main(["fit", str(path), "--report", str(tmp_path / "report")]) == 1     # 1: checks failed
    text = capsys.readouterr().out
    assert "✗ " in text and "[FAIL]" not in text
    (page,) = (tmp_path / "report").glob("*.html")
    assert "CHECKS FAILED" in page.read_text()
    assert main(["fit", str(path), "--json"]) == 1
    assert json.loads(capsys.readouterr().out)[0]["passed"] is False


def test_run_names_cannot_escape_the_output_folder(tmp_path):
    t = np.linspace(0, 10, 300)
    track = Track(t=t, x=np.cos(t), y=0.5 * np.sin(t), name="../../x")
    page = write_report(fit_orbit(track, centre=(0.0, 0.0)), tmp_path / "out", track=track)
    assert page.parent == tmp_path / "out"
    assert all(p.resolve().is_relative_to((tmp_path / "out").resolve()) for p in tmp_path.rglob("*")
               if p.is_file())
    assert not re.search(r"\.\./", page.name)


def test_the_page_records_calibration_latitude_and_every_option(tmp_path):
    # issue 15, item 7: the report records the calibration, the latitude and every option used
    track = simulate_orbit(exponent=1.0, noise=1e-3, rng=2).with_metadata(
        source="bob.csv", columns={"t": "t [s]", "x": "x [px]", "y": "y [px]"},
        units_from={"length": "header", "time": "header"},
        calibration={"scale": 1.6, "unit": "mm", "origin": [958.3, 541.7], "rotation": 0.0, "flip_y": True})
    page = write_report(fit_orbit(track), tmp_path, track=track,
                        options={"latitude": 52.0, "drag": "linear", "robust": False})
    cells = _cells(page)
    assert "calibration" in cells and any("scale 1.6" in cell and "flip_y True" in cell for cell in cells)
    assert "option latitude" in cells and "52" in cells and "option drag" in cells
    assert "option robust" not in cells                                   # an option not set
    assert "length m (header), time s (header)" in cells


def test_the_checks_on_the_page_carry_our_marks_and_words(tmp_path):
    track = simulate_orbit(exponent=1.0, noise=1e-3, rng=2)
    cells = _cells(write_report(fit_orbit(track), tmp_path, track=track))
    assert "✓ holds" in cells and "✔" not in "".join(cells)
