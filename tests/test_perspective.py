"""Issue 18: a camera that looks at the plane of motion at an angle, corrected by a homography
from plane marks (forcefit/reading/perspective.py), and lens distortion measured from chessboard
photographs (forcefit/reading/lens.py)."""

import functools
import json
import math

import cv2
import numpy as np
import pytest

from forcefit import Track, fit_orbit, load_track
from forcefit.cli import main
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import InputError
from forcefit.reading import PlaneMapping, fit_homography
from forcefit.reading.lens import LensModel, calibrate_lens, load_lens
from forcefit.reading.scenes import add_marker, to_pixels

SIZE = (320, 240)                                   # px, width and height
CORNERS = np.array([(-0.4, -0.3), (0.4, -0.3), (0.4, 0.3), (-0.4, 0.3)])   # m, a 0.8 x 0.6 m rectangle


def pinhole(tilt_deg, *, focal=300.0, centre=(160.0, 120.0), distance=1.6):
    """A pinhole camera x = K R [I | -C] X looking at the origin of the plane Z = 0 from `distance`
    (m), its axis tilted by `tilt_deg` from the plane's normal about the plane's x axis.
    Source: Hartley & Zisserman 2003, Multiple View Geometry, 2nd ed., ch. 6 (the finite projective
    camera); written out by hand here, independent of forcefit and OpenCV."""
    tilt = math.radians(tilt_deg)
    camera_centre = np.array([0.0, -distance * math.sin(tilt), distance * math.cos(tilt)])
    forward = -camera_centre / np.linalg.norm(camera_centre)
    right = np.array([1.0, 0.0, 0.0])
    down = np.cross(forward, right)                 # image rows grow downwards

    def project(x, y):
        ray = np.stack([x, y, np.zeros_like(x)], axis=-1) - camera_centre
        depth = ray @ forward
        return centre[0] + focal * (ray @ right) / depth, centre[1] + focal * (ray @ down) / depth

    return project


def test_homography_maps_a_tilted_pinhole_view_back_onto_the_plane():
    # Source: a plane seen by a pinhole camera is a homography of the image (Hartley & Zisserman
    # 2003, Sec. 2.3 and ch. 6); four marks fix it (Alg. 4.2, normalised DLT), and then every other
    # image point maps back onto its plane point.
    project = pinhole(25.0)
    marks = np.column_stack(project(CORNERS[:, 0], CORNERS[:, 1]))
    matrix = fit_homography(marks, CORNERS)
    rng = np.random.default_rng(3)
    plane = rng.uniform(-0.5, 0.5, (200, 2))
    image = np.column_stack(project(plane[:, 0], plane[:, 1]))
    back = np.column_stack((image, np.ones(200))) @ matrix.T
    assert np.abs(back[:, :2] / back[:, 2:] - plane).max() < 1e-9          # m
    # OpenCV's own least-squares homography agrees (an independent implementation).
    reference, _ = cv2.findHomography(marks, CORNERS, 0)
    assert np.allclose(matrix, reference / reference[2, 2], atol=1e-9)


def test_more_marks_than_four_fit_by_least_squares_and_report_their_spread():
    project = pinhole(20.0)
    points = np.array([(-0.4, -0.3), (0.0, -0.3), (0.4, -0.3), (0.4, 0.3), (0.0, 0.3), (-0.4, 0.3)])
    marks = np.column_stack(project(points[:, 0], points[:, 1]))
    rng = np.random.default_rng(4)
    mapping = PlaneMapping.from_marks(marks + rng.normal(0, 0.2, marks.shape), points, unit="m")
    assert 0 < mapping.mark_rms < 3e-3                                     # m, from 0.2 px clicks
    assert "6 plane marks" in mapping.to_text() and "RMS" in mapping.to_text()


@pytest.mark.parametrize(("marks", "points", "pattern"), [
    ([(0, 0), (10, 0), (20, 0), (5, 9)], CORNERS, "plane marks 1, 2, 3 lie (nearly) on one line"),
    ([(0, 0), (10, 0), (10, 10)], CORNERS[:3], "at least 4"),
    ([(0, 0), (10, 0), (10, 10), (0, 10)], CORNERS[:3], "4 plane marks but 3 plane points"),
    ([(0, 0), (10, 0), (0, 10), (10, 10)], CORNERS, "different orders"),
])
def test_marks_that_cannot_fix_the_plane_are_refused(marks, points, pattern):
    with pytest.raises(InputError, match=pattern.replace("(", r"\(").replace(")", r"\)")):
        PlaneMapping.from_marks(marks, points, unit="m")


def test_a_position_beyond_the_horizon_is_refused():
    project = pinhole(60.0)
    marks = np.column_stack(project(CORNERS[:, 0], CORNERS[:, 1]))
    mapping = PlaneMapping.from_marks(marks, CORNERS, unit="m")
    horizon_row = min(marks[:, 1]) - 400.0                  # far above the marks: the sky
    with pytest.raises(InputError, match="beyond the horizon"):
        mapping.apply(np.array([160.0, 160.0]), np.array([120.0, horizon_row]), source="run.csv")


def _tilted_track(tilt_deg, *, noise_px=0.05, seed=2):
    """A Hooke orbit on the plane (m) seen through the tilted pinhole camera, in px."""
    omega = 2.0 * math.pi / 2.2                                           # rad/s
    truth = simulate_orbit(exponent=1.0, strength=omega**2, start=(0.30, 0.0), velocity=(0.0, 0.12 * omega),
                           duration=10.0, rate=30.0, noise=0.0, centre=(0.05, 0.02), length_unit="m", rng=1)
    u, v = pinhole(tilt_deg)(truth.x, truth.y)
    rng = np.random.default_rng(seed)
    return truth, omega, u + rng.normal(0, noise_px, u.size), v + rng.normal(0, noise_px, v.size)


def test_tilted_view_fails_uncorrected_and_passes_corrected():
    # Source: Newton 1687, Principia, Book I, Prop. X: an ellipse about its centre needs F = k r
    # (n = 1), k = omega**2. Seen at 25 degrees the image is still an ellipse, but the force centre
    # no longer projects onto its centre and the scale changes across the picture.
    truth, omega, u, v = _tilted_track(25.0)
    uncorrected = fit_orbit(Track(t=truth.t, x=u, y=v, length_unit="px"))
    assert not uncorrected.passed
    assert {"residuals", "correlation"} & {name for name, check in uncorrected.diagnostics.items()
                                           if check.passed is False}
    marks = np.column_stack(pinhole(25.0)(CORNERS[:, 0], CORNERS[:, 1]))
    mapping = PlaneMapping.from_marks(marks, CORNERS, unit="m")
    x, y = mapping.apply(u, v)
    fit = fit_orbit(Track(t=truth.t, x=x, y=y, length_unit="m"))
    assert fit.passed
    assert abs(fit.exponent - 1.0) < 3 * fit.exponent_stderr
    assert abs(fit.strength - omega**2) < 3 * fit.strength_stderr                    # s**-2
    assert np.allclose(fit.centre, (0.05, 0.02), atol=3 * max(fit.centre_stderr))   # m


def test_plane_marks_apply_on_loading_and_are_recorded(tmp_path, capsys, digest):
    truth, omega, u, v = _tilted_track(25.0)
    path = tmp_path / "tilted.csv"
    path.write_text("t (s),x (px),y (px)\n" + "\n".join(f"{a:.5f},{b:.4f},{c:.4f}" for a, b, c in
                                                        zip(truth.t, u, v)) + "\n")
    before = digest(path)
    marks = np.column_stack(pinhole(25.0)(CORNERS[:, 0], CORNERS[:, 1]))
    # Listed counter-clockwise as the picture shows them, from the corner that becomes the origin:
    # the camera looks from the -y side, so the far edge (y = +0.3 m) is at the top of the picture
    # and the corners in CORNERS' order run bottom-left, bottom-right, top-right, top-left.
    order = [0, 1, 2, 3]
    listed = ",".join(f"{x:.4f},{y:.4f}" for x, y in marks[order])
    plane = ["--plane-marks", listed, "--plane-rectangle", "0.8x0.6 m"]
    assert main(["fit", str(path), *plane, "--json"]) == 0
    report = json.loads(capsys.readouterr().out)[0]
    assert report["length_unit"] == "m" and report["passed"]
    # The rectangle's first corner is the origin, its first side the x axis: centre (0.05, 0.02) m
    # becomes (0.45, 0.32) m, unmirrored.
    assert np.allclose(report["centre"], (0.45, 0.32), atol=3 * max(report["centre_stderr"]))
    assert report["plane_mapping"]["method"].startswith("normalised DLT")
    assert main(["inspect", str(path), *plane]) == 0
    assert "plane: homography from 4 plane marks to m" in capsys.readouterr().out
    assert main(["fit", str(path)]) == 1                          # uncorrected: the checks fail
    track = load_track(path, plane_mapping=PlaneMapping.from_rectangle(marks[order], width=0.8,
                                                                      height=0.6, unit="m"))
    assert track.metadata["plane_mapping"]["unit"] == "m"
    assert digest(path) == before


def test_plane_options_are_checked(tmp_path, capsys):
    path = tmp_path / "run.csv"
    path.write_text("t (s),x (px),y (px)\n0,1,2\n1,2,3\n2,3,1\n3,1,1\n")
    for extra, pattern in [
        (["--plane-marks", "0,0,10,0,10,10,0,10"], "--plane-rectangle"),
        (["--plane-rectangle", "1x1 m"], "need --plane-marks"),
        (["--plane-marks", "0,0,10,0,10,10,0,10", "--plane-points", "0,0,1,0,1,1,0,1"], "--plane-unit"),
        (["--plane-marks", "0,0,10,0,10,10,0,10", "--plane-rectangle", "1x1 m", "--scale", "1 mm"],
         "Give one of them"),
        (["--plane-marks", "0,0,10,0,10", "--plane-rectangle", "1x1 m"], "pairs"),
    ]:
        assert main(["inspect", str(path), *extra]) == 2, extra
        assert pattern in capsys.readouterr().err, (extra, pattern)


# Lens distortion ---------------------------------------------------------------------------------

LENS_SIZE = (480, 360)
K_TRUE = np.array([[420.0, 0.0, 243.0], [0.0, 420.0, 178.0], [0.0, 0.0, 1.0]])
DISTORTION = (-0.28, 0.09, 0.0, 0.0, 0.0)          # k1, k2, p1, p2, k3: a wide phone lens (invented)


def _distort(x, y):
    """Brown 1966 radial model on normalised coordinates: x_d = x (1 + k1 r^2 + k2 r^4)."""
    r2 = x * x + y * y
    factor = 1.0 + DISTORTION[0] * r2 + DISTORTION[1] * r2 * r2
    return x * factor, y * factor


def _undistort_normalised(xd, yd):
    """The inverse of `_distort` by fixed-point iteration (common practice)."""
    x, y = xd.copy(), yd.copy()
    for _ in range(60):
        r2 = x * x + y * y
        factor = 1.0 + DISTORTION[0] * r2 + DISTORTION[1] * r2 * r2
        x, y = xd / factor, yd / factor
    return x, y


def _rotation(rx, ry, rz):
    cx, sx, cy, sy, cz, sz = (f(math.radians(a)) for a in (rx, ry, rz) for f in (math.cos, math.sin))
    rot_x = np.array([[1, 0, 0], [0, cx, -sx], [0, sx, cx]])
    rot_y = np.array([[cy, 0, sy], [0, 1, 0], [-sy, 0, cy]])
    rot_z = np.array([[cz, -sz, 0], [sz, cz, 0], [0, 0, 1]])
    return rot_z @ rot_y @ rot_x


@functools.cache
def _pixel_rays(supersample):
    """Each (sub-)pixel's ray through the distorted lens, (x, y, 1) in normalised coordinates: the
    same for every view, so traced once."""
    width, height = LENS_SIZE
    offsets = (np.arange(supersample) + 0.5) / supersample - 0.5
    cols = (np.arange(width)[:, None] + offsets).ravel()
    rows = (np.arange(height)[:, None] + offsets).ravel()
    u, v = np.meshgrid(cols, rows)
    xn, yn = _undistort_normalised((u - K_TRUE[0, 2]) / K_TRUE[0, 0], (v - K_TRUE[1, 2]) / K_TRUE[1, 1])
    return np.stack([xn, yn, np.ones_like(xn)], axis=-1)


def _chessboard_view(rotation, translation, *, square=0.03, squares=(10, 7), supersample=2):
    """A photograph of a flat chessboard through the distorted lens, rendered by tracing each
    (sub-)pixel's ray back to the board plane."""
    width, height = LENS_SIZE
    rays = _pixel_rays(supersample)
    normal, origin = rotation[:, 2], translation                 # board plane in camera coordinates
    depth = (origin @ normal) / (rays @ normal)
    local = (rays * depth[..., None] - origin) @ rotation         # board coordinates (m)
    i = np.floor(local[..., 0] / square + 1.0).astype(int)
    j = np.floor(local[..., 1] / square + 1.0).astype(int)
    inside = (i >= 0) & (i < squares[0]) & (j >= 0) & (j < squares[1]) & (depth > 0)
    value = np.where(inside, np.where((i + j) % 2 == 0, 30.0, 225.0), 140.0)
    picture = value.reshape(height, supersample, width, supersample).mean(axis=(1, 3))
    return np.clip(np.rint(picture), 0, 255).astype(np.uint8)


@pytest.fixture(scope="module")
def chessboard_photos(tmp_path_factory):
    folder = tmp_path_factory.mktemp("board")
    # Tilted views near the middle, and four that reach into the corners, where distortion is largest.
    poses = [(0, 0, 0, (-0.12, -0.08, 0.42)), (25, 0, 5, (-0.13, -0.08, 0.45)),
             (-25, 10, -5, (-0.12, -0.09, 0.44)), (10, 30, 0, (-0.10, -0.08, 0.45)),
             (-10, -30, 10, (-0.15, -0.07, 0.46)), (5, 5, 0, (-0.25, -0.18, 0.5)),
             (-5, 5, 0, (0.0, -0.18, 0.5)), (5, -5, 0, (-0.25, 0.02, 0.5)), (-5, -5, 0, (0.0, 0.02, 0.5))]
    paths = []
    for number, (rx, ry, rz, shift) in enumerate(poses):
        path = folder / f"board_{number}.png"
        cv2.imwrite(str(path), _chessboard_view(_rotation(rx, ry, rz), np.array(shift)))
        paths.append(path)
    return paths


def test_lens_distortion_is_measured_from_chessboard_photographs(chessboard_photos, tmp_path, capsys):
    # Source: Zhang 2000, A flexible new technique for camera calibration (OpenCV's calibrateCamera);
    # distortion model Brown 1966. Judged by what matters: where it puts the pixels.
    lens = calibrate_lens(chessboard_photos, inner_corners=(9, 6))
    assert lens.reprojection_rms < 0.25                                            # px
    assert lens.focal_length == pytest.approx((420.0, 420.0), rel=0.01)
    grid = np.array([(u, v) for u in range(20, 480, 40) for v in range(20, 360, 40)], dtype=float)
    xn, yn = (grid[:, 0] - K_TRUE[0, 2]) / K_TRUE[0, 0], (grid[:, 1] - K_TRUE[1, 2]) / K_TRUE[1, 1]
    xd, yd = _distort(xn, yn)
    seen_u, seen_v = K_TRUE[0, 0] * xd + K_TRUE[0, 2], K_TRUE[1, 1] * yd + K_TRUE[1, 2]
    ideal_u, ideal_v = lens.undistort(seen_u, seen_v)
    # The measured K may differ slightly from the true one: compare in normalised coordinates.
    (fx, fy), (cx, cy) = lens.focal_length, lens.principal_point
    error = np.hypot((ideal_u - cx) / fx - xn, (ideal_v - cy) / fy - yn) * 420.0              # px
    displacement = np.hypot(seen_u - grid[:, 0], seen_v - grid[:, 1])                  # px, uncorrected
    assert displacement.max() > 25.0
    assert np.sqrt(np.mean(error**2)) < 0.5 and error.max() < 1.5
    # The model survives a trip through TOML, and the command line writes the same.
    assert LensModel.from_toml(lens.to_toml()) == lens
    out = tmp_path / "phone.toml"
    assert main(["calibrate-lens", *map(str, chessboard_photos), "--out", str(out)]) == 0
    assert "corners fit to" in capsys.readouterr().out
    assert load_lens(out).focal_length == pytest.approx(lens.focal_length, rel=1e-9)


def test_lens_then_homography_recover_plane_positions(chessboard_photos):
    lens = calibrate_lens(chessboard_photos, inner_corners=(9, 6))
    # A plane seen by the distorted camera: project by the pinhole, then distort.
    project = pinhole(20.0, focal=420.0, centre=(243.0, 178.0), distance=1.4)

    def seen(x, y):
        u, v = project(x, y)
        xd, yd = _distort((u - 243.0) / 420.0, (v - 178.0) / 420.0)
        return 420.0 * xd + 243.0, 420.0 * yd + 178.0

    marks = np.column_stack(seen(CORNERS[:, 0] * 1.2, CORNERS[:, 1] * 1.2))
    points = CORNERS * 1.2
    rng = np.random.default_rng(5)
    plane = rng.uniform(-0.45, 0.45, (100, 2))
    u, v = seen(plane[:, 0], plane[:, 1])
    corrected = PlaneMapping.from_marks(marks, points, unit="m", lens=lens)
    plain = PlaneMapping.from_marks(marks, points, unit="m")
    error = np.hypot(*(np.column_stack(corrected.apply(u, v)) - plane).T)
    error_plain = np.hypot(*(np.column_stack(plain.apply(u, v)) - plane).T)
    assert error.max() < 1e-3 and error_plain.max() > 10 * error.max()                # m


def test_lens_refusals(tmp_path, chessboard_photos):
    blank = tmp_path / "blank.png"
    cv2.imwrite(str(blank), np.full((360, 480), 128, np.uint8))
    with pytest.raises(InputError, match="found in 2 photograph"):
        calibrate_lens([*chessboard_photos[:2], blank])
    text = tmp_path / "notes.png"
    text.write_text("not a picture")
    with pytest.raises(InputError, match="notes.png: cannot be read as an image"):
        calibrate_lens([text])
    broken = tmp_path / "lens.toml"
    broken.write_text("[lens]\nfocal_length = [1.0]\n")
    with pytest.raises(InputError, match="lens.toml: lacks a"):
        load_lens(broken)


def test_marker_seen_in_a_tilted_video_is_corrected_by_plane_marks(tmp_path, capsys):
    """End to end: a tilted video (the marker drawn where the camera sees it) → forcefit fit VIDEO."""
    truth, omega, _, _ = _tilted_track(25.0, noise_px=0.0)
    project = pinhole(25.0)
    marks = np.column_stack(project(CORNERS[:, 0], CORNERS[:, 1]))
    rows, cols = np.mgrid[0:SIZE[1], 0:SIZE[0]]
    backdrop = 60.0 + 20.0 * rows / SIZE[1]
    for mx, my in marks:                                          # dark tape crosses at the corners
        backdrop[int(round(my)) - 3:int(round(my)) + 4, int(round(mx))] = 20.0
        backdrop[int(round(my)), int(round(mx)) - 3:int(round(mx)) + 4] = 20.0
    rng = np.random.default_rng(6)
    path = tmp_path / "tilted.mkv"
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"FFV1"), 30.0, SIZE, False)
    for t in truth.t:
        steps = t + (np.arange(5) / 4 - 0.5) / 120.0                         # 1/120 s exposure
        x_plane = np.interp(steps, truth.t, truth.x)
        y_plane = np.interp(steps, truth.t, truth.y)
        u, v = project(x_plane, y_plane)
        writer.write(to_pixels(add_marker(backdrop, u, v, radius=4.0, contrast=160.0), noise=2.0, rng=rng))
    writer.release()
    listed = ",".join(f"{x:.3f},{y:.3f}" for x, y in marks)
    assert main(["fit", str(path), "--plane-marks", listed, "--plane-rectangle", "0.8x0.6 m", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)[0]
    assert abs(report["exponent"] - 1.0) < 3 * report["exponent_stderr"]
    assert abs(report["strength"] - omega**2) < 3 * report["strength_stderr"]
    assert report["video"]["frames"] == truth.t.size
