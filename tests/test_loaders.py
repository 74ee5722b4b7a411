"""Every reading format, column and unit detection, calibration, 3-D projection, refusals."""

import json
import warnings

import numpy as np
import pandas as pd
import pytest

from forcefit.errors import ForcefitWarning, InputError
from forcefit.reading.loaders import load_track, load_tracks, save_track

T = np.round(np.linspace(0.0, 2.0, 21), 3)
X = np.round(np.cos(T) * 100.0, 3)
Y = np.round(np.sin(T) * 50.0, 3)


def _csv(delimiter=",", header=("t [s]", "x [px]", "y [px]"), decimal_comma=False):
    lines = [delimiter.join(header)]
    for row in zip(T, X, Y):
        cells = [repr(float(v)) for v in row]
        if decimal_comma:
            cells = [c.replace(".", ",") for c in cells]
        lines.append(delimiter.join(cells))
    return "\n".join(lines) + "\n"


def _check(track, length_unit="px", time_unit="s"):
    np.testing.assert_array_equal(track.t, T)
    np.testing.assert_array_equal(track.x, X)
    np.testing.assert_array_equal(track.y, Y)
    assert (track.length_unit, track.time_unit) == (length_unit, time_unit)


@pytest.mark.parametrize(
    ("name", "content"),
    [
        ("run.csv", _csv(",")),
        ("run.tsv", _csv("\t")),
        ("run.txt", _csv(" ").replace("t [s] x [px] y [px]", "t [s]   x [px]   y [px]")),
        ("run.csv", _csv(";", decimal_comma=True)),
        ("run.csv", "\ufeff" + _csv(",")),                         # UTF-8 byte-order mark
        ("run.csv", _csv(",").replace("\n", "\r\n", 10)),          # mixed line endings
        ("run.csv", "# tracker export\n# camera 2\n\n" + _csv(",")),  # comments and blanks
    ],
    ids=["comma", "tab", "whitespace", "semicolon-decimal-comma", "bom", "mixed-eol", "comments"],
)
def test_text_layouts(write, name, content):
    _check(load_track(write(name, content)))


def test_semicolon_file_reports_decimal_commas(write):
    track = load_track(write("run.csv", _csv(";", decimal_comma=True)))
    assert track.metadata["decimal_comma"] is True
    assert track.metadata["layout"] == "semicolon"


def test_excel_parquet_json_and_dataframe(tmp_path):
    frame = pd.DataFrame({"t [s]": T, "x [px]": X, "y [px]": Y})
    frame.to_excel(tmp_path / "run.xlsx", index=False)
    frame.to_parquet(tmp_path / "run.parquet")
    (tmp_path / "run.json").write_text(json.dumps(frame.to_dict("records")))
    for source in (tmp_path / "run.xlsx", tmp_path / "run.parquet", tmp_path / "run.json", frame):
        _check(load_track(source))


def test_json_object_of_columns(write):
    path = write("run.json", json.dumps({"t": T.tolist(), "x": X.tolist(), "y": Y.tolist()}))
    _check(load_track(path, length_unit="px", time_unit="s"))


def test_header_detection_is_case_insensitive_with_units_in_several_styles(write):
    text = _csv(",", header=("Time (ms)", "X_px", "Pos Y [px]"))
    track = load_track(write("run.csv", text))
    assert (track.time_unit, track.length_unit) == ("ms", "px")
    assert track.metadata["columns"] == {"t": "Time (ms)", "x": "X_px", "y": "Pos Y [px]"}


def test_explicit_mapping_and_units_override_detection(write):
    text = _csv(",", header=("Zeit", "Spalte B", "Spalte C"))
    track = load_track(write("run.csv", text), t="zeit", x="Spalte B", y="SPALTE C",
                       length_unit="mm", time_unit="s")
    _check(track, length_unit="mm")
    assert track.metadata["units_from"] == {"length": "given", "time": "given"}


def test_missing_units_default_with_a_warning(write):
    with pytest.warns(ForcefitWarning, match="assuming m"):
        track = load_track(write("run.csv", _csv(",", header=("t [s]", "x", "y"))))
    assert track.metadata["units_from"]["length"] == "default"


def test_headerless_file_is_read_by_position(write):
    text = "\n".join(f"{t} {x} {y}" for t, x, y in zip(T, X, Y))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ForcefitWarning)
        track = load_track(write("run.dat", text), length_unit="px")
    _check(track)


def test_shape_only_file_has_no_times(write):
    track = load_track(write("path.csv", "x [m],y [m]\n0,0\n1,1\n2,0\n3,1\n"))
    assert track.t is None and track.n_points == 4


def test_frame_column_with_frame_rate(write):
    text = "frame,x [px],y [px]\n" + "\n".join(f"{i},{i * 2.0},{i % 3}" for i in range(10))
    track = load_track(write("run.csv", text), frame_rate=240)
    np.testing.assert_allclose(track.t, np.arange(10) / 240)
    with pytest.raises(InputError, match="frame rate"):
        load_track(write("run2.csv", text))


def test_dropped_frames_are_dropped_and_counted(write):
    lines = _csv(",").splitlines()
    lines[5] = f"{T[4]},,"
    lines[9] = f"{T[8]},nan,{Y[8]}"
    track = load_track(write("run.csv", "\n".join(lines)))
    assert track.n_points == 19
    assert track.metadata["dropped_rows"] == 2
    assert track.metadata["dropped_row_numbers"] == [6, 10]


def test_several_tracks_by_id_column(write):
    rows = ["run,t [s],x [m],y [m]"]
    for run in ("A", "B"):
        rows += [f"{run},{t},{x},{y}" for t, x, y in zip(T, X, Y)]
    path = write("class.csv", "\n".join(rows))
    tracks = load_tracks(path)
    assert [t.name for t in tracks] == ["class[A]", "class[B]"]
    assert load_track(path, track_id="B").name == "class[B]"
    with pytest.raises(InputError, match="holds 2 tracks"):
        load_track(path)


def test_three_d_file_projected_and_reported(write):
    # A planar ellipse with a systematic 0.01 au wobble out of its plane, sigma 1e-4 au.
    s = np.linspace(0.0, 4.0, 200)
    rows = ["t [d],x [au],y [au],z [au],sigma [au]"] + [
        f"{t},{np.cos(t)},{np.sin(t) * 0.6},{np.sin(t) * 0.8 + 0.01 * np.sin(7 * t)},1e-4"
        for t in s]
    with pytest.warns(ForcefitWarning, match="off their best-fit plane"):
        track = load_track(write("orbit.csv", "\n".join(rows)))
    # The plane's normal is (0, -0.8, 0.6): the z wobble is 0.6 x 0.01 / sqrt(2) RMS off it.
    assert track.metadata["plane"]["out_of_plane_rms"] == pytest.approx(0.0042, rel=0.05)
    assert (track.length_unit, track.time_unit) == ("au", "d")


def test_three_d_points_far_from_any_plane_are_refused(write):
    rng = np.random.default_rng(5)
    rows = ["x,y,z"] + [",".join(map(str, rng.uniform(-1, 1, 3))) for _ in range(50)]
    with pytest.raises(InputError, match="far from any plane"):
        load_track(write("cloud.csv", "\n".join(rows)), length_unit="m")


# --- refusals: each names the file, the row and the column, and the fix ---------------------


def _lines(**replace):
    lines = _csv(",").splitlines()
    for index, text in replace.items():
        lines[int(index[1:])] = text
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize(
    ("content", "pattern"),
    [
        ("", "file is empty"),
        ("t [s],x [px],y [px]\n", "no data rows"),
        ("t [s],x [px],y [px]\n0,1,2\n", "1 usable row.*at least 3"),
        ("t [s],x [px],y [px]\n0,1,2\n1,2,3\n", "2 usable rows.*at least 3"),
        (_lines(r7="0.6,n/a,3"), r'row 8, column "x \[px\]": found "n/a", expected a number'),
        (_lines(r4=f"{T[2]},{X[3]},{Y[3]}"), r'row 5, column "t \[s\]": time .* repeats row 4'),
        (_lines(r4=f"0.05,{X[3]},{Y[3]}"), r"row 5.*earlier than.*Sort the samples"),
        (_lines(r3="0.2,inf,1"), r'row 4, column "x \[px\]": found inf'),
        (_lines(r3="0.2,1e300,1"), r'row 4, column "x \[px\]": found 1e\+300'),
        ("t,x [px],y [px]\n0,5,5\n1,5,5\n2,5,5\n", "same; the body never moved"),
        (_lines(r6="0.5,1"), r"row 7: 2 cells but the header names 3 columns"),
        (_lines(r6="0.5,1,2,3"), r"row 7: 4 cells but the header names 3 columns"),
        ("a,b,c\n1,2,3\n4,5,6\n7,8,9\n", "found no x column"),
        ("# only a comment\n", "no rows"),
        (b"\x00\x01\x02binary", "binary data"),
    ],
    ids=["empty", "header-only", "one-row", "two-rows", "text-cell", "duplicate-time",
         "decreasing-time", "inf", "huge", "identical", "short-row", "long-row", "no-x",
         "comments-only", "binary"],
)
def test_refusals_name_file_row_column_and_fix(write, digest, content, pattern):
    path = write("bad.csv", content)
    before = digest(path)
    with pytest.raises(InputError, match=pattern) as caught:
        load_track(path)
    assert "bad.csv" in str(caught.value)
    assert digest(path) == before          # the input is never modified


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        load_track(tmp_path / "nope.csv")
    with pytest.raises(InputError, match="is a folder"):
        load_track(tmp_path)


def test_unreadable_excel_is_refused_with_a_fix(write):
    with pytest.raises(InputError, match="save it again as .xlsx"):
        load_track(write("broken.xlsx", b"PK\x03\x04 this is not a workbook"))


def test_wrong_unit_name_is_refused(write):
    with pytest.raises(InputError, match='unknown length unit "furlongs-ish"'):
        load_track(write("run.csv", _csv(",")), length_unit="furlongs-ish")


def test_two_columns_for_one_role_asks_which(write):
    with pytest.raises(InputError, match='both look like x.*x="xpos"'):
        load_track(write("run.csv", "t,x,xpos,y\n0,1,1,0\n1,2,2,1\n2,3,3,0\n"))


def test_negative_sigma_is_refused(write):
    text = "t,x,y,sigma\n0,1,0,0.1\n1,0,1,-0.1\n2,-1,0,0.1\n"
    with pytest.raises(InputError, match=r'row 3, column "sigma": found -0.1'):
        load_track(write("run.csv", text), length_unit="m", time_unit="s")


def test_save_then_load_round_trip(tmp_path):
    frame = pd.DataFrame({"t [s]": T, "x [mm]": X, "y [mm]": Y, "sigma [mm]": 0.1})
    track = load_track(frame)
    save_track(track, tmp_path / "copy.csv")
    again = load_track(tmp_path / "copy.csv")
    _check(again, length_unit="mm")
    np.testing.assert_allclose(again.sigma, 0.1)
    assert not list(tmp_path.glob(".*tmp"))              # no temporary file left behind


def test_sigma_in_its_own_unit_is_converted_even_when_the_length_unit_is_given(write):
    text = "t [s],x [m],y [m],sigma [mm]\n" + "\n".join(
        f"{t},{np.cos(t)},{np.sin(t)},1" for t in np.arange(0, 2, 0.1))
    track = load_track(write("sig.csv", text), length_unit="m")
    np.testing.assert_allclose(track.sigma, 0.001)
    with pytest.raises(InputError, match=r'column "sigma \[mm\]".*calibration'):
        load_track(write("sig2.csv", text), length_unit="px", force_units=True)



def test_one_short_track_does_not_stop_reading_another(write):
    rows = ["run,t [s],x [m],y [m]"] + [f"a,{t},{np.cos(t)},{np.sin(t)}" for t in range(5)]
    rows += ["b,0,1,0", "b,1,2,1"]
    assert load_track(write("mixed.csv", "\n".join(rows)), track_id="a").n_points == 5



def test_unused_frame_column_with_empty_cells_drops_nothing(write):
    text = "frame,t [s],x [m],y [m]\n" + "\n".join(f",{t},{np.cos(t)},{np.sin(t)}" for t in range(6))
    assert load_track(write("frames.csv", text)).n_points == 6



def test_too_few_rows_names_the_emptiest_column(write):
    text = "t [s],x [m],y [m],sigma [m]\n" + "\n".join(f"{t},{np.cos(t)},{np.sin(t)}," for t in range(6))
    with pytest.raises(InputError, match='column "sigma \\[m\\]" has 6 empty cells'):
        load_track(write("empty_sigma.csv", text))


# Issue 15, "Units": a unit the header states wins over an option, which fills in where the header
# is silent, unless force_units says otherwise; the note says which was used.

def test_a_header_unit_wins_over_a_given_one_and_says_so(write):
    path = write("run_mm.csv", _csv(",", header=("t [s]", "x [mm]", "y [mm]")))
    with pytest.warns(ForcefitWarning, match="header says mm.*so mm is used.*--force-units"):
        track = load_track(path, length_unit="px")
    _check(track, length_unit="mm")
    with pytest.warns(ForcefitWarning, match="using px"):
        forced = load_track(path, length_unit="px", force_units=True)
    _check(forced, length_unit="px")
    assert forced.metadata["units_from"]["length"] == "given (forced over the header)"
    silent = load_track(write("run_silent.csv", _csv(",", header=("t", "x", "y"))), length_unit="px",
                        time_unit="ms")
    _check(silent, length_unit="px", time_unit="ms")


def test_rows_left_out_for_empty_cells_are_named_with_their_time(write):
    lines = _csv(",").splitlines()
    lines[14] = f"{T[13]},nan,{Y[13]}"
    with pytest.warns(ForcefitWarning, match=r"1 row left out.*row 15 \(empty: x \[px\]; t \[s\] = 1\.3\)"):
        track = load_track(write("run.csv", "\n".join(lines)))
    assert track.metadata["dropped_row_numbers"] == [15]
    assert 15 not in track.source_rows and track.source_rows[13] == 16
