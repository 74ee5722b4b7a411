import numpy as np
import pytest

from forcefit.errors import InputError
from forcefit.track import Track


def test_track_is_read_only_and_converts_units():
    track = Track(t=[0.0, 1.0, 2.0], x=[1, 2, 3], y=[0, 1, 0], length_unit="Pixels", time_unit="seconds")
    assert (track.length_unit, track.time_unit) == ("px", "s")
    with pytest.raises(ValueError):
        track.x[0] = 5.0
    assert track.positions.shape == (3, 2)


@pytest.mark.parametrize(
    ("kwargs", "pattern"),
    [
        ({"x": [0, 1], "y": [0, 1]}, "2 points, at least 3"),
        ({"x": [0, 1, 2], "y": [0, 1]}, "x has 3 values but y has 2"),
        ({"x": [0, np.nan, 2], "y": [0, 1, 2]}, r"x\[1\] is nan"),
        ({"x": [0, 1e300, 2], "y": [0, 1, 2]}, r"x\[1\] is 1e\+300"),
        ({"x": [1, 1, 1], "y": [2, 2, 2]}, "never moved"),
        ({"t": [0, 1, 1], "x": [0, 1, 2], "y": [0, 1, 2]}, "repeats 1.0 at sample 2"),
        ({"t": [0, 2, 1], "x": [0, 1, 2], "y": [0, 1, 2]}, "goes back to 1.0"),
        ({"x": [0, 1, 2], "y": [0, 1, 2], "sigma": [0.1, 0.0, 0.1]}, "positive standard error"),
        ({"x": [[0, 1, 2]], "y": [0, 1, 2]}, "one-dimensional"),
    ],
)
def test_invalid_tracks_are_refused(kwargs, pattern):
    with pytest.raises(InputError, match=pattern):
        Track(**kwargs)


def test_select_and_shape_only_and_scalar_sigma():
    track = Track(t=np.arange(6.0), x=np.arange(6.0), y=np.arange(6.0) ** 2, sigma=0.5)
    part = track.select(slice(1, 5))
    assert part.n_points == 4 and part.t[0] == 1.0
    np.testing.assert_array_equal(part.sigma, 0.5)
    assert track.shape_only().t is None and np.isnan(track.shape_only().duration)
