"""Column roles from headers and explicit names, numeric cells, clock times, track ids.

Edge cases found in review of issue #2: each once gave a wrong number or a raw trace."""

import numpy as np
import pandas as pd
import pytest

from forcefit.errors import InputError
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
