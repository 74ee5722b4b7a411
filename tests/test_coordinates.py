"""Calibration of raw positions and the projection of 3-D positions onto their plane."""

import numpy as np
import pandas as pd
import pytest

from forcefit.errors import InputError
from forcefit.reading.coordinates import Calibration, project_to_plane
from forcefit.reading.loaders import load_track
from forcefit.track import Track


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


def test_scale_origin_rotation_flip_calibration():
    frame = pd.DataFrame({"x [px]": [100.0, 200.0, 100.0], "y [px]": [50.0, 50.0, 150.0]})
    calibration = Calibration(scale=2.0, unit="mm", origin=(100.0, 50.0), rotation=90.0, flip_y=True)
    track = load_track(frame, calibration=calibration)
    # (100, 0) px → (200, 0) mm → turned 90° → (0, 200); (0, 100) px → flipped (0, -100) → (200, 0) mm
    np.testing.assert_allclose(track.x, [0.0, 0.0, 200.0], atol=1e-12)
    np.testing.assert_allclose(track.y, [0.0, 200.0, 0.0], atol=1e-12)
    assert track.length_unit == "mm"



def test_two_mark_calibration():
    # A metre stick whose ends are imaged 625 px apart: 1.6 mm per pixel.
    calibration = Calibration.from_marks((100.0, 100.0), (475.0, 600.0), distance=1.0, unit="m")
    assert calibration.scale == pytest.approx(1.0 / 625.0)
    track = load_track(pd.DataFrame({"x": [0.0, 625.0, 0.0], "y": [0.0, 0.0, 625.0]}),
                       length_unit="px", calibration=calibration)
    assert track.x.max() == pytest.approx(1.0)



def test_plane_projection_recovers_a_known_normal():
    # Exact data on a tilted plane through the origin: normal recovered to 1e-9.
    normal = np.array([0.3, -0.5, 0.8]) / np.linalg.norm([0.3, -0.5, 0.8])
    e1 = np.cross(normal, [0.0, 0.0, 1.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(normal, e1)
    s = np.linspace(0.0, 5.0, 300)
    points = np.outer(2.0 * np.cos(s), e1) + np.outer(1.2 * np.sin(s), e2)
    plane = project_to_plane(*points.T)
    assert np.allclose(plane.normal, normal, atol=1e-9)
    assert plane.out_of_plane_rms < 1e-12
    # In-plane coordinates keep distances from the 3-D origin (where the Sun would be).
    np.testing.assert_allclose(np.hypot(plane.u, plane.v), np.linalg.norm(points, axis=1), rtol=1e-12)


def test_calibration_turns_counter_clockwise_after_flipping_and_scaling():
    # R(90 deg) maps (1, 0) to (0, 1) and (0, 1) to (-1, 0) (rotation matrices, common practice).
    calibration = Calibration(scale=0.5, unit="cm", origin=(10.0, 20.0), rotation=90.0)
    x, y = calibration.apply(np.array([12.0, 10.0]), np.array([20.0, 24.0]))
    np.testing.assert_allclose(x, [0.0, -2.0], atol=1e-12)
    np.testing.assert_allclose(y, [1.0, 0.0], atol=1e-12)
    flipped = Calibration(scale=1.0, unit="m", flip_y=True)
    assert flipped.apply(np.array([1.0]), np.array([3.0]))[1][0] == -3.0
    assert calibration.describe() == {"scale": 0.5, "unit": "cm", "origin": [10.0, 20.0],
                                      "rotation_deg": 90.0, "flip_y": False}


def test_the_plane_normal_follows_the_motion_and_a_line_has_no_plane():
    # The normal points along the angular momentum r x v (right-hand rule, common practice), so a
    # clockwise circle in the xy plane has normal -z and runs counter-clockwise in (u, v).
    s = np.linspace(0.0, 3.0, 100)
    plane = project_to_plane(np.cos(-s), np.sin(-s), np.zeros(s.size))
    np.testing.assert_allclose(plane.normal, [0.0, 0.0, -1.0], atol=1e-12)
    turn = np.unwrap(np.arctan2(plane.v, plane.u))
    assert turn[-1] - turn[0] == pytest.approx(3.0, rel=1e-9)
    with pytest.raises(InputError, match="lie on a line"):
        project_to_plane(s, 2 * s, 3 * s)
