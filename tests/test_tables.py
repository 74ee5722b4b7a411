"""Reading raw tables: text layouts and encodings, decimal commas, Excel sheets, JSON, indexes.

Edge cases found in review of issue #2: each once gave a wrong number or a raw trace."""

import json

import numpy as np
import pandas as pd
import pytest

from forcefit.errors import ForcefitWarning, InputError
from forcefit.reading.loaders import load_track

ROWS = "\n".join(f"{t},{np.cos(t):.4f},{np.sin(t):.4f}" for t in np.arange(0, 2, 0.1))


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



def test_headerless_file_warns_how_it_was_read(write):
    with pytest.warns(ForcefitWarning, match="read by position as t, x, y"):
        load_track(write("plain.csv", ROWS), length_unit="m", time_unit="s")



def test_decimal_comma_file_points_at_the_bad_cell(write):
    text = "t [s];x [m];y [m]\n0;1,5;0\n1;1,4;0,5\n2;oops;0,7\n3;1,1;0,9\n"
    with pytest.raises(InputError, match='row 4, column "x \\[m\\]": found "oops"'):
        load_track(write("dc.csv", text))



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
