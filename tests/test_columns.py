"""Column roles from headers and explicit names, numeric cells, clock times, track ids.

Edge cases found in review of issue #2: each once gave a wrong number or a raw trace."""

import warnings

import numpy as np
import pandas as pd
import pytest

from forcefit.errors import ForcefitWarning, InputError
from forcefit.reading.columns import classify
from forcefit.reading.loaders import load_track, load_tracks


def test_explicit_column_prefers_the_exact_header(write):
    text = "t [s],X,x,y\n" + "\n".join(f"{t},{100 + t},{np.cos(t)},{np.sin(t)}" for t in range(5))
    track = load_track(write("case.csv", text), x="x", length_unit="m")
    np.testing.assert_allclose(track.x, np.cos(np.arange(5)))



def test_numeric_and_empty_ids(write):
    rows = ["run,t [s],x [m],y [m]"] + [f"{r},{t},{np.cos(t + r)},{np.sin(t)}"
                                         for r in (1, 2) for t in range(4)]
    tracks = load_tracks(write("ids.csv", "\n".join(rows)))
    assert [t.name for t in tracks] == ["ids[1]", "ids[2]"]
    assert load_track(write("ids2.csv", "\n".join(rows)), track_id="2").name == "ids2[2]"
    rows[3] = rows[3].replace("1,", ",", 1)
    with pytest.raises(InputError, match='row 4, column "run": the id is empty'):
        load_tracks(write("ids3.csv", "\n".join(rows)))



def test_unicode_minus_is_a_minus(write):
    text = "t [s];x [m];y [m]\n0;1,5;0\n1;\u22120,4;0,5\n2;0,1;0,7\n"
    assert load_track(write("minus.csv", text)).x[1] == -0.4



def test_clock_times_and_datetimes_become_seconds(write):
    text = "time,x [m],y [m]\n00:00:01.5,1,0\n00:00:02.0,0,1\n00:00:02.5,-1,0\n00:01:00,0,-1\n"
    track = load_track(write("clock.csv", text))
    np.testing.assert_allclose(track.t, [1.5, 2.0, 2.5, 60.0])
    frame = pd.DataFrame({"t": pd.to_datetime(["2026-01-01 00:00:00", "2026-01-01 00:00:02",
                                                "2026-01-01 00:00:03"]),
                          "x [m]": [1.0, 0.0, -1.0], "y [m]": [0.0, 1.0, 0.0]})
    np.testing.assert_allclose(load_track(frame).t, [0.0, 2.0, 3.0])



def test_odd_header_units_and_integer_column_names(write):
    with pytest.raises(InputError, match='column "x \\[-\\]".*unknown length unit'):
        load_track(write("dash.csv", "t [s],x [-],y [-]\n0,1,0\n1,0,1\n2,-1,0\n"))
    frame = pd.DataFrame({0: [0.0, 1, 2], 1: [1.0, 0, -1], 2: [0.0, 1, 0]})
    track = load_track(frame, t="0", x="1", y="2", length_unit="m", time_unit="s")
    assert track.n_points == 3
    with pytest.raises(InputError, match="table is empty"):
        load_track(pd.DataFrame())


# Issue 15, "Columns": headers in the languages a lab is likely to use, Julian dates, date-times,
# the columns left unused, a title line above the header, fix-it examples in the CLI's syntax.

@pytest.mark.parametrize(("header", "role", "unit"), [
    ("Bild", "frame", None), ("JDTDB", "t", None), ("JD_TDB", "t", None), ("BJD", "t", None),
    ("MJD", "t", None), ("JD (TDB)", "t", None), ("temps (s)", "t", "s"), ("tiempo", "t", None),
    ("Zeit [ms]", "t", "ms"), ("tempo (s)", "t", "s"), ("posición x", "x", None),
    ("Posição Y (mm)", "y", "mm"), ("posizione_x [px]", "x", "px"), ("x-Position [mm]", "x", "mm"),
    ("abscisse (px)", "x", "px"), ("ordonnée (px)", "y", "px"), ("cuadro", "frame", None),
    ("image", "frame", None), ("fotogramma", "frame", None),
])
def test_headers_of_many_languages_are_recognised(header, role, unit):
    column = classify(header)
    assert column is not None and (column.role, column.unit) == (role, unit)


def test_a_julian_date_column_is_read_in_days(write):
    text = "JDTDB,x [au],y [au]\n" + "\n".join(
        f"{2460000.5 + d},{np.cos(d / 30)},{np.sin(d / 30)}" for d in range(0, 40, 4))
    track = load_track(write("asteroid.csv", text))
    assert track.time_unit == "d" and track.t[1] - track.t[0] == pytest.approx(4.0)
    assert track.metadata["units_from"]["time"] == "header (Julian date)"


def test_iso_date_times_become_seconds_from_the_first(write):
    text = ("time,x [mm],y [mm]\n2026-03-05 14:02:03.000,1,0\n2026-03-05 14:02:03.040,0,1\n"
            "2026-03-05T14:02:03.080,-1,0\n2026-03-05 14:02:04.000,0,-1\n")
    track = load_track(write("phone.csv", text))
    np.testing.assert_allclose(track.t, [0.0, 0.04, 0.08, 1.0])
    assert track.time_unit == "s" and track.metadata["time_origin"].startswith("2026-03-05T14:02:03")


def test_unrecognised_columns_are_listed_and_a_missing_time_column_is_not_silent(write):
    text = "tiemp0,pos x [px],pos y [px],brillo\n" + "\n".join(
        f"{t / 10},{np.cos(t)},{np.sin(t)},7" for t in range(6))
    with pytest.warns(ForcefitWarning, match='no time column was recognised.*--column t="tiemp0"'):
        track = load_track(write("run.csv", text))
    assert track.t is None
    assert track.metadata["unrecognised_columns"] == ["tiemp0", "brillo"]


def test_a_title_line_above_the_header_is_skipped_with_a_note(write):
    text = "object: bob 1\nt [s],x [mm],y [mm]\n" + "\n".join(
        f"{t / 10},{np.cos(t)},{np.sin(t)}" for t in range(6))
    with pytest.warns(ForcefitWarning, match="title.*object: bob 1"):
        track = load_track(write("titled.csv", text))
    assert track.n_points == 6 and track.metadata["columns"]["x"] == "x [mm]"
    assert track.source_rows.tolist() == [3, 4, 5, 6, 7, 8]


def test_fix_it_examples_use_the_command_line_and_a_plausible_column(write):
    text = "tiempo (s),horizontal,vertical\n0,1,0\n1,0,1\n2,-1,0\n"
    with pytest.raises(InputError, match='found no x column') as caught:
        load_track(write("es.csv", text))
    message = str(caught.value)
    assert '--column x="horizontal"' in message and 'x="tiempo (s)"' not in message


def test_a_column_named_on_the_command_line_keeps_the_unit_its_header_states(write):
    text = "temps (s),abscisse (px),vertical (px)\n0,100,50\n0.1,101,52\n0.2,103,55\n"
    with warnings.catch_warnings():
        warnings.simplefilter("error", ForcefitWarning)          # no false "no length unit" note
        track = load_track(write("fr.csv", text), y="vertical (px)")
    assert track.length_unit == "px" and track.metadata["units_from"]["length"] == "header"
    track = load_track(write("fr2.csv", text.replace("abscisse", "colonne A")), x="colonne A (px)",
                       y="vertical (px)")
    assert track.length_unit == "px"
