"""Loader edge cases found in review of issue #2: each once gave a wrong number or a raw trace."""

import json

import numpy as np
import pandas as pd
import pytest

from forcefit.errors import ForcefitWarning, InputError
from forcefit.reading.coordinates import Calibration
from forcefit.reading.loaders import load_track, load_tracks
from forcefit.track import Track

ROWS = "\n".join(f"{t},{np.cos(t):.4f},{np.sin(t):.4f}" for t in np.arange(0, 2, 0.1))


def test_sigma_in_its_own_unit_is_converted_even_when_the_length_unit_is_given(write):
    text = "t [s],x [m],y [m],sigma [mm]\n" + "\n".join(
        f"{t},{np.cos(t)},{np.sin(t)},1" for t in np.arange(0, 2, 0.1))
    track = load_track(write("sig.csv", text), length_unit="m")
    np.testing.assert_allclose(track.sigma, 0.001)
    with pytest.raises(InputError, match=r'column "sigma \[mm\]".*calibration'):
        load_track(write("sig2.csv", text), length_unit="px")


def test_explicit_column_prefers_the_exact_header(write):
    text = "t [s],X,x,y\n" + "\n".join(f"{t},{100 + t},{np.cos(t)},{np.sin(t)}" for t in range(5))
    track = load_track(write("case.csv", text), x="x", length_unit="m")
    np.testing.assert_allclose(track.x, np.cos(np.arange(5)))


def test_thousands_separators_are_not_taken_for_decimal_commas(write):
    text = "t [s]\tx [px]\ty [px]\n0\t1,024\t5\n1\t1,010\t6\n2\t980\t7\n3\t1,001\t9\n"
    with pytest.raises(InputError, match="thousands separator"):
        load_track(write("thousands.tsv", text))


def test_a_named_index_is_kept_as_a_column(tmp_path):
    frame = pd.DataFrame({"t": np.arange(5.0), "x [m]": np.cos(np.arange(5.0)),
                          "y [m]": np.sin(np.arange(5.0))}).set_index("t")
    frame.to_parquet(tmp_path / "indexed.parquet")
    with pytest.warns(ForcefitWarning, match="assuming s"):
        track = load_track(tmp_path / "indexed.parquet")
    np.testing.assert_array_equal(track.t, np.arange(5.0))


def test_duplicate_headers_are_refused(write):
    with pytest.raises(InputError, match='columns 2 and 3 are both named "x"'):
        load_track(write("dup.csv", "t,x,x,y\n0,1,2,3\n1,2,3,4\n2,3,4,5\n"))


def test_numeric_and_empty_ids(write):
    rows = ["run,t [s],x [m],y [m]"] + [f"{r},{t},{np.cos(t + r)},{np.sin(t)}"
                                         for r in (1, 2) for t in range(4)]
    tracks = load_tracks(write("ids.csv", "\n".join(rows)))
    assert [t.name for t in tracks] == ["ids[1]", "ids[2]"]
    assert load_track(write("ids2.csv", "\n".join(rows)), track_id="2").name == "ids2[2]"
    rows[3] = rows[3].replace("1,", ",", 1)
    with pytest.raises(InputError, match='row 4, column "run": the id is empty'):
        load_tracks(write("ids3.csv", "\n".join(rows)))


def test_one_short_track_does_not_stop_reading_another(write):
    rows = ["run,t [s],x [m],y [m]"] + [f"a,{t},{np.cos(t)},{np.sin(t)}" for t in range(5)]
    rows += ["b,0,1,0", "b,1,2,1"]
    assert load_track(write("mixed.csv", "\n".join(rows)), track_id="a").n_points == 5


def test_headerless_file_warns_how_it_was_read(write):
    with pytest.warns(ForcefitWarning, match="read by position as t, x, y"):
        load_track(write("plain.csv", ROWS), length_unit="m", time_unit="s")


def test_decimal_comma_file_points_at_the_bad_cell(write):
    text = "t [s];x [m];y [m]\n0;1,5;0\n1;1,4;0,5\n2;oops;0,7\n3;1,1;0,9\n"
    with pytest.raises(InputError, match='row 4, column "x \\[m\\]": found "oops"'):
        load_track(write("dc.csv", text))


def test_unicode_minus_is_a_minus(write):
    text = "t [s];x [m];y [m]\n0;1,5;0\n1;\u22120,4;0,5\n2;0,1;0,7\n"
    assert load_track(write("minus.csv", text)).x[1] == -0.4


def test_unused_frame_column_with_empty_cells_drops_nothing(write):
    text = "frame,t [s],x [m],y [m]\n" + "\n".join(f",{t},{np.cos(t)},{np.sin(t)}" for t in range(6))
    assert load_track(write("frames.csv", text)).n_points == 6


def test_too_few_rows_names_the_emptiest_column(write):
    text = "t [s],x [m],y [m],sigma [m]\n" + "\n".join(f"{t},{np.cos(t)},{np.sin(t)}," for t in range(6))
    with pytest.raises(InputError, match='column "sigma \\[m\\]" has 6 empty cells'):
        load_track(write("empty_sigma.csv", text))


def test_utf16_file_is_read(write):
    path = write("utf16.csv", ("t [s],x [m],y [m]\n" + ROWS).encode("utf-16"))
    assert load_track(path).n_points == 20


def test_whitespace_file_with_decimal_commas_and_no_header(write):
    text = "\n".join(f"{t}   {np.cos(t):.3f}   {np.sin(t):.3f}".replace(".", ",") for t in range(6))
    with pytest.warns(ForcefitWarning):
        track = load_track(write("ws.txt", text), length_unit="m", time_unit="s")
    assert track.n_points == 6 and track.x[0] == 1.0


def test_comma_header_above_spaced_numbers_and_mixed_tabs(write):
    body = "\n".join(f"{t} {np.cos(t):.3f} {np.sin(t):.3f}" for t in range(6))
    assert load_track(write("lone.txt", "t [s],x [m],y [m]\n" + body)).n_points == 6
    mixed = "t [s] x [m]\ty [m]\n" + "\n".join(f"{t}\t{np.cos(t):.3f} {np.sin(t):.3f}" for t in range(6))
    assert load_track(write("mixed.txt", mixed)).n_points == 6


def test_clock_times_and_datetimes_become_seconds(write):
    text = "time,x [m],y [m]\n00:00:01.5,1,0\n00:00:02.0,0,1\n00:00:02.5,-1,0\n00:01:00,0,-1\n"
    track = load_track(write("clock.csv", text))
    np.testing.assert_allclose(track.t, [1.5, 2.0, 2.5, 60.0])
    frame = pd.DataFrame({"t": pd.to_datetime(["2026-01-01 00:00:00", "2026-01-01 00:00:02",
                                                "2026-01-01 00:00:03"]),
                          "x [m]": [1.0, 0.0, -1.0], "y [m]": [0.0, 1.0, 0.0]})
    np.testing.assert_allclose(load_track(frame).t, [0.0, 2.0, 3.0])


def test_excel_names_its_sheets_when_the_one_asked_for_is_missing(tmp_path):
    frame = pd.DataFrame({"t [s]": [0, 1, 2], "x [m]": [1.0, 0, -1], "y [m]": [0, 1.0, 0]})
    with pd.ExcelWriter(tmp_path / "book.xlsx") as writer:
        pd.DataFrame().to_excel(writer, sheet_name="notes")
        frame.to_excel(writer, sheet_name="run", index=False)
    with pytest.raises(InputError, match="sheet 'notes' is empty.*'run'"):
        load_track(tmp_path / "book.xlsx")
    with pytest.raises(InputError, match="has no sheet 'Data'"):
        load_track(tmp_path / "book.xlsx", sheet="Data")
    assert load_track(tmp_path / "book.xlsx", sheet="run").n_points == 3


@pytest.mark.parametrize(
    ("content", "pattern"),
    [("[]", "table is empty"), ("{}", "table is empty"),
     (json.dumps({"x": [1, 2, 3], "y": [1, 2]}), "different lengths")],
)
def test_empty_and_ragged_json(write, content, pattern):
    with pytest.raises(InputError, match=pattern):
        load_track(write("bad.json", content))


def test_odd_header_units_and_integer_column_names(write):
    with pytest.raises(InputError, match='column "x \\[-\\]".*unknown length unit'):
        load_track(write("dash.csv", "t [s],x [-],y [-]\n0,1,0\n1,0,1\n2,-1,0\n"))
    frame = pd.DataFrame({0: [0.0, 1, 2], 1: [1.0, 0, -1], 2: [0.0, 1, 0]})
    track = load_track(frame, t="0", x="1", y="2", length_unit="m", time_unit="s")
    assert track.n_points == 3
    with pytest.raises(InputError, match="table is empty"):
        load_track(pd.DataFrame())


def test_bad_calibrations_and_sigma_sizes_are_refused():
    with pytest.raises(InputError, match="not px"):
        Calibration(scale=1.0, unit="px")
    with pytest.raises(InputError, match="origin"):
        Calibration(scale=1.0, unit="mm", origin=(1.0, float("nan")))
    with pytest.raises(InputError, match="rotation"):
        Calibration(scale=1.0, unit="mm", rotation=float("inf"))
    with pytest.raises(InputError, match="sigma has 2 values"):
        Track(x=[1, 0, -1], y=[0, 1, 0], sigma=[1, 2])
    with pytest.raises(InputError, match="must be text"):
        Track(x=[1, 0, -1], y=[0, 1, 0], length_unit=None)  # type: ignore[arg-type]
