"""Issue 18: tracking a marked body in a video (forcefit/reading/video.py), on invented scenes
written in the test with OpenCV's video writer (lossless FFV1) or PyAV (H.264, as phones write)."""

import json
import math
import sys

import cv2
import numpy as np
import pytest

from forcefit import fit_orbit, load_track, track_video
from forcefit.cli import main
from forcefit.errors import InputError
from forcefit.reading.scenes import add_marker, to_pixels, write_video

SIZE = (320, 240)                        # px, width and height
RATE = 30.0                              # frames per s
OMEGA = 1.9                              # rad/s
A, B, CENTRE = 100.0, 60.0, (160.0, 120.0)   # px: semi-axes and centre of the orbit in the image
HIDDEN = (100, 101, 102, 103, 200)       # frames where a dark hand passes in front of the marker


def _orbit(t):
    """x = a cos(wt), y = b sin(wt) about CENTRE, in px (image y grows downwards)."""
    return CENTRE[0] + A * np.cos(OMEGA * t), CENTRE[1] - B * np.sin(OMEGA * t)


def _backdrop():
    """A floor lit unevenly, with a lamp's reflection brighter than the marker (it never moves)."""
    rows, cols = np.mgrid[0:SIZE[1], 0:SIZE[0]]
    floor = 70.0 + 30.0 * rows / SIZE[1] + 8.0 * np.cos(4.0 * cols / SIZE[0])
    floor[40:46, 250:256] = 250.0
    return floor


def _write(path, pictures, *, colour=False):
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"FFV1"), RATE, SIZE, colour)
    for picture in pictures:
        writer.write(picture)
    writer.release()
    return path


def _exposure(t, *, exposure=1.0 / 60.0, steps=7):
    """Times during one frame's exposure (motion blur), s."""
    return t + exposure * (np.arange(steps) / (steps - 1) - 0.5)


@pytest.fixture(scope="module")
def hooke_video(tmp_path_factory):
    """300 frames of a 10-px bright marker on the orbit, 1/60 s exposure, 3 grey levels of noise."""
    rng = np.random.default_rng(18)
    floor = _backdrop()
    truth, pictures = [], []
    for frame in range(300):
        x, y = _orbit(_exposure(frame / RATE))
        truth.append((x.mean(), y.mean()))              # the blurred marker's light-weighted centre
        picture = add_marker(floor, x, y, radius=5.0, contrast=150.0)
        if frame in HIDDEN:
            picture = floor.copy()
            top, left = int(y.mean()) - 12, int(x.mean()) - 12
            picture[max(top, 0):top + 24, max(left, 0):left + 24] = 35.0            # the hand
        pictures.append(to_pixels(picture, noise=3.0, rng=rng))
    path = _write(tmp_path_factory.mktemp("video") / "hooke.avi", pictures)
    return path, np.array(truth)


@pytest.fixture(scope="module")
def hooke_tracked(hooke_video, digest):
    path, _ = hooke_video
    before = digest(path)
    tracked = track_video(path)
    assert digest(path) == before                                         # the input is never modified
    return tracked


def test_tracked_positions_are_within_a_tenth_of_a_pixel(hooke_video, hooke_tracked):
    _, truth = hooke_video
    tracked = hooke_tracked
    found = tracked.found
    assert tracked.lost_frames == HIDDEN
    assert np.allclose(tracked.t, np.arange(300) / RATE, atol=1e-9)       # the container's times, s
    error = np.hypot(tracked.x[found] - truth[found, 0], tracked.y[found] - truth[found, 1])
    assert math.sqrt(np.mean(error**2) / 2) < 0.1                        # px per coordinate (issue 18)


def test_the_orbit_fit_of_the_tracked_video_recovers_hooke_law(hooke_video):
    # Source: Newton 1687, Principia, Book I, Prop. X: x = a cos(wt), y = b sin(wt) needs F = k r
    # with n = 1, k = w**2. The exposure's blur scales the ellipse by sinc(w T / 2) and leaves k.
    path, _ = hooke_video
    track = load_track(path)
    assert track.metadata["dropped_rows"] == len(HIDDEN)
    assert track.length_unit == "px" and track.time_unit == "s"
    fit = fit_orbit(track)
    assert fit.passed
    assert abs(fit.exponent - 1.0) < 3 * fit.exponent_stderr
    assert abs(fit.strength - OMEGA**2) < 3 * fit.strength_stderr                     # s**-2
    assert np.allclose(fit.centre, CENTRE, atol=3 * max(fit.centre_stderr))           # px


def test_track_command_writes_a_track_file_every_command_reads(hooke_video, tmp_path, capsys):
    path, _ = hooke_video
    out, overlay = tmp_path / "hooke.csv", tmp_path / "hooke.png"
    assert main(["track", str(path), "--out", str(out), "--overlay", str(overlay)]) == 0
    printed = capsys.readouterr().out
    assert "lost in 5 (frames 100-103, 200)" in printed and "container (PyAV)" in printed
    lines = out.read_text().splitlines()
    assert "frame,t (s),x (px),y (px)" in lines
    assert lines[lines.index("frame,t (s),x (px),y (px)") + 101] == "100,3.333333,,"     # a lost frame
    picture = cv2.imread(str(overlay))
    assert picture.shape == (SIZE[1], SIZE[0], 3)
    assert main(["inspect", str(out)]) == 0
    assert "5 rows left out" in capsys.readouterr().out                   # named by row and time
    assert main(["fit", str(path), "--json"]) == 0                     # the video directly
    report = json.loads(capsys.readouterr().out)[0]
    assert report["video"]["n_lost"] == 5 and report["video"]["lost_frames"] == list(HIDDEN)
    assert abs(report["exponent"] - 1.0) < 3 * report["exponent_stderr"]


@pytest.fixture(scope="module")
def short_scene():
    """The first 60 frames' truth: blurred marker positions, px."""
    frames = np.arange(60)
    return frames / RATE, [_orbit(_exposure(t)) for t in frames / RATE]


def _rms(tracked, positions):
    truth = np.array([(x.mean(), y.mean()) for x, y in positions])
    found = tracked.found
    assert found.all()
    return math.sqrt(np.mean((tracked.x - truth[:, 0]) ** 2 + (tracked.y - truth[:, 1]) ** 2) / 2)


@pytest.mark.parametrize("centroid", ["weighted", "gaussian"])
def test_dark_marker_on_a_bright_floor(tmp_path, short_scene, centroid):
    _, positions = short_scene
    rng = np.random.default_rng(1)
    floor = 255.0 - _backdrop() * 0.5
    pictures = [to_pixels(add_marker(floor, x, y, radius=5.0, contrast=-120.0), noise=2.0, rng=rng)
                for x, y in positions]
    tracked = track_video(_write(tmp_path / "dark.avi", pictures), marker="dark", centroid=centroid)
    assert _rms(tracked, positions) < 0.1                                            # px


def test_coloured_marker_beside_a_red_one_of_equal_brightness(tmp_path, short_scene):
    _, positions = short_scene
    rng = np.random.default_rng(2)
    floor = np.repeat(_backdrop()[:, :, None], 3, axis=2)
    green, red = np.array([-40.0, 110.0, -40.0]), np.array([-40.0, -40.0, 110.0])     # BGR
    pictures = []
    for x, y in positions:
        picture = add_marker(floor, x, y, radius=5.0, contrast=green)
        picture = add_marker(picture, 320.0 - x, 240.0 - y, radius=5.0, contrast=red)   # a second ball
        pictures.append(to_pixels(picture, noise=2.0, rng=rng))
    path = _write(tmp_path / "colour.avi", pictures, colour=True)
    tracked = track_video(path, marker="colour", colour="green")
    assert _rms(tracked, positions) < 0.1                                            # px
    with pytest.raises(InputError, match="needs its colour"):
        track_video(path, marker="colour")


def test_region_and_minimum_blob_size_exclude_other_movers(tmp_path, short_scene):
    _, positions = short_scene
    rng = np.random.default_rng(3)
    floor = _backdrop()
    pictures = []
    for index, (x, y) in enumerate(positions):
        picture = add_marker(floor, x, y, radius=5.0, contrast=150.0)
        picture = add_marker(picture, np.array([300.0]), np.array([20.0 + index]), radius=8.0, contrast=200.0)
        picture = add_marker(picture, np.array([30.0 + index]), np.array([225.0]), radius=0.8, contrast=250.0)
        pictures.append(to_pixels(picture, noise=2.0, rng=rng))
    path = _write(tmp_path / "crowd.avi", pictures)
    fooled = track_video(path)                                    # the bigger, brighter stranger wins
    assert np.nanmedian(fooled.x) > 290 and "more than one blob" in " ".join(fooled.notes)
    tracked = track_video(path, region=(40, 40, 240, 150), min_area=12)
    assert _rms(tracked, positions) < 0.1                                            # px
    with pytest.raises(InputError, match="reaches outside"):
        track_video(path, region=(200, 100, 200, 100))


def test_opencv_reader_gives_the_same_track_of_a_constant_rate_video(hooke_video, hooke_tracked):
    path, _ = hooke_video
    container, fallback = hooke_tracked, track_video(path, reader="opencv")
    assert "OpenCV" in fallback.timestamps
    assert np.allclose(fallback.t, container.t, atol=1e-6)
    assert np.allclose(fallback.x, container.x, equal_nan=True)


def test_without_pyav_opencv_reads_and_says_so(tmp_path, short_scene, monkeypatch):
    _, positions = short_scene
    rng = np.random.default_rng(5)
    pictures = [to_pixels(add_marker(_backdrop(), x, y, radius=5.0, contrast=150.0), noise=2.0, rng=rng)
                for x, y in positions[:20]]
    path = _write(tmp_path / "short.avi", pictures)
    monkeypatch.setitem(sys.modules, "av", None)                 # as if PyAV were not installed
    tracked = track_video(path)
    assert "PyAV is not installed" in tracked.timestamps
    assert np.allclose(tracked.t, np.arange(20) / RATE, atol=1e-6)


def test_a_phone_video_keeps_its_variable_frame_rate(tmp_path):
    # A phone writes H.264 in .mp4 with a 90 kHz clock and uneven frame intervals (from memory);
    # here invented jitter of +-4 ms and one skipped frame. The tracker must return the container's
    # times exactly.
    rng = np.random.default_rng(4)
    times = np.arange(90) / RATE + rng.uniform(-0.004, 0.004, 90)
    times = np.delete(times, 40) - times[0]
    floor = _backdrop()
    pictures = [to_pixels(add_marker(floor, *_orbit(_exposure(t)), radius=5.0, contrast=150.0), noise=2.0,
                          rng=rng) for t in times]
    path = write_video(tmp_path / "phone.mp4", pictures, times)
    tracked = track_video(path)
    assert np.allclose(tracked.t, np.rint(times * 90000) / 90000, atol=1e-9)       # s
    assert tracked.variable_rate and "variable frame rate" in tracked.to_text()
    truth = np.array([[v.mean() for v in _orbit(_exposure(t))] for t in times])
    error = np.hypot(tracked.x - truth[:, 0], tracked.y - truth[:, 1])
    assert math.sqrt(np.mean(error**2) / 2) < 0.1                        # px, through H.264 at quality 18


def test_a_video_marked_as_turned_is_tracked_upright(tmp_path):
    # Phones store portrait videos sideways with a rotation in the container; players (and OpenCV)
    # turn them upright (common practice), and positions must refer to that upright picture.
    import av

    picture = np.full((48, 64), 40, np.uint8)
    path = tmp_path / "turned.mp4"
    with av.open(str(path), "w") as container:
        stream = container.add_stream("libx264", rate=30)
        stream.width, stream.height, stream.pix_fmt = 64, 48, "yuv420p"
        stream.set_display_rotation(90)
        for index in range(12):
            frame = picture.copy()
            frame[8:16, 10 + 3 * index:18 + 3 * index] = 230
            for packet in stream.encode(av.VideoFrame.from_ndarray(frame, format="gray")):
                container.mux(packet)
        for packet in stream.encode():
            container.mux(packet)
    tracked = track_video(path, background=False)
    upright = cv2.VideoCapture(str(path))
    ok, first = upright.read()
    assert ok and (tracked.width, tracked.height) == (first.shape[1], first.shape[0]) == (48, 64)
    rows, cols = np.nonzero(cv2.cvtColor(first, cv2.COLOR_BGR2GRAY) > 135)
    assert (tracked.x[0], tracked.y[0]) == pytest.approx((cols.mean(), rows.mean()), abs=0.5)
    assert "turned by 90 degrees" in " ".join(tracked.notes)


def test_refusals_name_the_file_and_the_fix(tmp_path, capsys):
    empty_floor = to_pixels(_backdrop(), noise=0.0, rng=np.random.default_rng(0))
    still = _write(tmp_path / "still.avi", [empty_floor] * 20)
    with pytest.raises(InputError, match=r"still.avi: the marker was found in 0 of 20 frames\. Check"):
        track_video(still)
    with pytest.raises(InputError, match="absent.mp4: file not found"):
        track_video(tmp_path / "absent.mp4")
    with pytest.raises(InputError, match='marker "shiny" is not one of'):
        track_video(still, marker="shiny")
    table = tmp_path / "run.csv"
    table.write_text("t (s),x (px),y (px)\n0,1,2\n1,2,3\n2,3,1\n")
    assert main(["fit", str(table), "--marker", "dark"]) == 2
    assert "tracking options apply to videos" in capsys.readouterr().err
    assert main(["track", str(table)]) == 2
    assert "not a video by its ending" in capsys.readouterr().err
