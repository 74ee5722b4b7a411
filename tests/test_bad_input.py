"""Issue #8: every kind of bad input gets a clear refusal — the same through the API and the
command line — naming the file (and the row and column where there is one) and the fix, and the
input file is never changed."""

import json
import math

import numpy as np
import pytest

from forcefit.cli import main
from forcefit.errors import ForcefitError, GeometryError, InputError, NotIdentifiable
from forcefit.estimators import fit
from forcefit.reading.loaders import load_tracks


def _rows(t, x, y, header="t [s],x [m],y [m]"):
    return header + "\n" + "\n".join(f"{a:.6f},{b:.6f},{c:.6f}" for a, b, c in zip(t, x, y)) + "\n"


T = np.linspace(0.0, 20.0, 400)
ELLIPSE = _rows(T, 0.3 * np.cos(2 * T) + 0.01 * np.sin(7 * T), 0.1 * np.sin(2 * T))
GOOD = _rows(T, 0.3 * np.cos(2 * T), 0.12 * np.sin(2 * T))
LINES = GOOD.splitlines()


def _replace(row, text):
    lines = list(LINES)
    lines[row - 1] = text                       # rows as a spreadsheet counts them (header = 1)
    return "\n".join(lines) + "\n"


CASES = [
    # (id, file name, content, extra CLI options, error type, patterns the message must hold)
    ("empty file", "run.csv", "", [], InputError, ["run.csv", "empty", "Export"]),
    ("header only", "run.csv", "t [s],x [m],y [m]\n", [], InputError, ["run.csv", "no data rows"]),
    ("one row", "run.csv", "t [s],x [m],y [m]\n0,1,0\n", [], InputError,
     ["run.csv", "1 usable row", "at least 3"]),
    ("too few rows for the method", "run.csv", _rows(T[:8], np.cos(T[:8]), np.sin(T[:8])), [],
     GeometryError, ["run.csv", "too few", "at least 12", "longer stretch"]),
    ("NaN cells", "run.csv", _rows(T, [math.nan] * T.size, np.sin(T)).replace("nan", "NaN"), [],
     InputError, ["run.csv", "0 usable rows", 'column "x [m]" has 400 empty cells']),
    ("inf cell", "run.csv", _replace(40, "1.95,inf,0.0"), [], InputError,
     ["run.csv", "row 40", 'column "x [m]"', "inf", "Correct the value"]),
    ("text in a numeric column", "run.csv", _replace(118, "5.87,n/a,0.0"), [], InputError,
     ["run.csv", "row 118", 'column "x [m]"', 'found "n/a"', "Fill the value in"]),
    ("duplicate timestamps", "run.csv", _replace(12, LINES[10].replace(",", ",9,", 0)), [],
     InputError, ["run.csv", "row 12", 'column "t [s]"', "repeats row 11", "Delete the duplicate"]),
    ("decreasing timestamps", "run.csv", _replace(30, "0.01,0.3,0.0"), [], InputError,
     ["run.csv", "row 30", "earlier than", "Sort the samples"]),
    ("decimal commas in a comma-separated file", "run.csv", _replace(7, "0,3,0,29,0,01"), [],
     InputError, ["run.csv", "row 7", "6 cells but the header names 3 columns"]),
    ("huge value", "run.csv", _replace(9, "0.4,1e300,0.0"), [], InputError,
     ["run.csv", "row 9", "1e+300", "below 1e+20"]),
    ("all points identical", "run.csv", _rows(T, np.ones(T.size), np.ones(T.size)), [], InputError,
     ["run.csv", "never moved", "tracker"]),
    ("straight path", "run.csv", _rows(T, 0.01 * T, 0.02 * T + 0.001 * np.sin(40 * T)), [],
     NotIdentifiable, ["run.csv", "straight", "Check that the body moved"]),
    ("circular path", "run.csv", _rows(T, np.cos(T), np.sin(T)), ["--centre", "0,0"], NotIdentifiable,
     ["run.csv", "circular orbit exists for every exponent", "Launch the body off-circular"]),
    ("path winding back about the centre", "run.csv", GOOD, ["--centre", "2,0"], GeometryError,
     ["run.csv", "winds back", "Check the centre"]),
    ("3-D points far from any plane", "run.csv",
     "x [m],y [m],z [m]\n" + "\n".join(f"{a},{b},{c}" for a, b, c in
                                       np.random.default_rng(1).uniform(-1, 1, (60, 3))),
     [], InputError, ["run.csv", "far from any plane", "Check the z column"]),
    ("wrong unit name", "run.csv", GOOD, ["--length-unit", "furlongs-ish"], InputError,
     ['unknown length unit "furlongs-ish"', "usual symbol"]),
    ("unreadable Excel file", "run.xlsx", b"PK\x03\x04 this is no workbook", [], InputError,
     ["run.xlsx", "Excel workbook", "save it again as .xlsx"]),
    ("binary file", "run.csv", b"\x00\x01\x02\x03binary", [], InputError,
     ["run.csv", "binary data", "Export the samples"]),
    ("frame numbers without a frame rate", "run.csv",
     "frame,x [px],y [px]\n" + "\n".join(f"{i},{np.cos(i / 9)},{np.sin(i / 9)}" for i in range(50)),
     [], InputError, ["run.csv", "frame numbers", "--frame-rate"]),
    ("duplicate column names", "run.csv", GOOD.replace("y [m]", "x [m]", 1), [], InputError,
     ["run.csv", 'both named "x [m]"', "Rename one"]),
    ("empty id cell", "run.csv",
     "run,t [s],x [m],y [m]\n" + "\n".join(f"{'' if i == 5 else 'a'},{t},{np.cos(t)},{np.sin(t)}"
                                            for i, t in enumerate(T[:20])),
     [], InputError, ["run.csv", "row 7", 'column "run"', "id is empty"]),
    ("unreadable video", "run.mp4", b"\x00\x00\x00\x18ftypmp42 and then nothing", [], InputError,
     ["run.mp4", "cannot be read as a video", "copy the file again"]),
    ("ragged JSON", "run.json", json.dumps({"t": [0, 1, 2], "x": [1, 0], "y": [0, 1, 0]}), [],
     InputError, ["run.json", "different lengths"]),
]


def _api(path, extra):
    """What `forcefit fit` does, through the API."""
    options = dict(zip(extra[::2], extra[1::2]))
    tracks = load_tracks(path, length_unit=options.get("--length-unit"))
    centre = tuple(map(float, options["--centre"].split(","))) if "--centre" in options else None
    for track in tracks:
        fit(track, centre=centre)


@pytest.mark.parametrize(("case", "name", "content", "extra", "error", "patterns"), CASES,
                         ids=[case[0] for case in CASES])
def test_refused_through_api_and_cli(tmp_path, capsys, digest, case, name, content, extra, error,
                                    patterns):
    path = tmp_path / name
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")
    before = digest(path)
    with pytest.raises(error) as caught:
        _api(path, extra)
    assert isinstance(caught.value, ForcefitError)
    for pattern in patterns:
        assert pattern in str(caught.value), (pattern, str(caught.value))
    assert main(["fit", str(path), *extra]) == 2
    captured = capsys.readouterr()
    assert captured.err.startswith("forcefit: ") and "Traceback" not in captured.err
    for pattern in patterns:
        assert pattern in captured.err
    assert digest(path) == before                       # the input is never modified


def test_missing_file_through_api_and_cli(tmp_path, capsys):
    with pytest.raises(InputError, match="file not found"):
        _api(tmp_path / "absent.csv", [])
    assert main(["fit", str(tmp_path / "absent.csv")]) == 2
    assert "absent.csv: file not found. Check the path" in capsys.readouterr().err


@pytest.mark.parametrize("variant", ["bom", "mixed line endings"])
def test_byte_order_mark_and_mixed_line_endings_are_read(tmp_path, capsys, variant):
    # Not errors: forcefit reads these as the same samples and fits them.
    text = ELLIPSE if variant == "mixed line endings" else "\ufeff" + ELLIPSE
    if variant == "mixed line endings":
        text = text.replace("\n", "\r\n", 150).replace("\n", "\r", 3)
    path = tmp_path / "run.csv"
    path.write_bytes(text.encode("utf-8"))
    assert load_tracks(path)[0].n_points == 400
    # ELLIPSE carries a sin(7t) wobble, not a power law: read whole, fitted, and its residual checks fail
    assert main(["fit", str(path), "--json"]) == 1
    assert json.loads(capsys.readouterr().out)[0]["n_points"] == 400
