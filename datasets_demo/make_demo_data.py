"""Regenerate every file in datasets_demo/ from fixed seeds: `python datasets_demo/make_demo_data.py`.

An optional argument names another folder to write into (the tests use it to check that
the bundled files come out the same).

All scenarios are invented for forcefit's demo; datasets_demo/README.md has a card for
each (scenario, units, the true values used). Numbers are written with fixed
decimals, so the files come out the same byte for byte on every run.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

from forcefit.dynamics.propagate import Drag, propagate_reference
from forcefit.dynamics.simulate import simulate_orbit, simulate_pendulum
from forcefit.reading.scenes import add_marker, to_pixels, write_video

HERE = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parent
CLASS = HERE / "class_pendulum"
GAUSS_K2 = 0.01720209895**2  # au^3 / d^2, Gaussian gravitational constant squared (IAU 1976)


def _write(path: Path, comments: list[str], header: list[str], columns: list[np.ndarray],
           formats: list[str], delimiter: str = ",", decimal_comma: bool = False) -> None:
    lines = [f"# {text}" for text in comments] + [delimiter.join(header)]
    for row in zip(*columns):
        cells = ["" if (isinstance(v, float) and math.isnan(v)) else f % v
                 for f, v in zip(formats, row)]
        if decimal_comma:
            cells = [cell.replace(".", ",") for cell in cells]
        lines.append(delimiter.join(cells))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _to_pixels(x_m: np.ndarray, y_m: np.ndarray, *, mm_per_px: float, pivot_px: tuple[float, float],
               turn_deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Lab metres → image pixels of a camera looking down (image rows grow downwards)."""
    c, s = math.cos(math.radians(turn_deg)), math.sin(math.radians(turn_deg))
    u = (c * x_m + s * y_m) * 1000.0 / mm_per_px
    v = (-s * x_m + c * y_m) * 1000.0 / mm_per_px
    return pivot_px[0] + u, pivot_px[1] - v


def stairwell_pendulum() -> dict:
    """An 11.0 m pendulum in a four-storey stairwell, filmed from the top landing at 30 fps."""
    rng = np.random.default_rng(20261201)
    length, gravity, latitude = 11.0, 9.8105, 52.0
    track = simulate_pendulum(length=length, gravity=gravity, start=(0.55, 0.0),
                              velocity=(0.0, 0.25), duration=60.0, rate=30.0,
                              latitude=latitude, rng=rng)
    x_px, y_px = _to_pixels(track.x, track.y, mm_per_px=1.6, pivot_px=(958.3, 541.7), turn_deg=0.0)
    frames = np.arange(1801)
    x_all, y_all = np.full(1801, np.nan), np.full(1801, np.nan)
    seen = np.rint(track.t * 30.0).astype(int)
    x_all[seen], y_all[seen] = x_px, y_px
    lost = rng.choice(np.arange(5, 1796), size=54, replace=False)   # tracker lost the bob
    x_all[lost] = y_all[lost] = np.nan
    x_all += rng.normal(0.0, 0.6, 1801)
    y_all += rng.normal(0.0, 0.6, 1801)
    _write(HERE / "stairwell_pendulum.csv",
           ["forcefit demo data (invented scenario): 11.0 m pendulum in a stairwell, camera on the",
            "top landing looking straight down, 30 frames per second, 60 s; bob centre in image",
            "pixels (rows grow downwards); empty cells are frames where the tracker lost the bob.",
            "Calibration: 1.6 mm per pixel, pivot image at (958.3, 541.7) px.",
            "Truth: n = 1 (finite amplitude lowers a fit to about 0.997), k = g/L = 0.89186 s^-2."],
           ["frame", "t [s]", "x [px]", "y [px]"],
           [frames, frames / 30.0, x_all, y_all], ["%d", "%.4f", "%.2f", "%.2f"])
    return {"file": "stairwell_pendulum.csv", "title": "stairwell pendulum (11.0 m, 30 fps, pixels)",
            "load": {"length_unit": "px",
                     "calibration": {"scale": 1.6, "unit": "mm", "origin": [958.3, 541.7],
                                     "flip_y": True}},
            "fit": {"rotation_rate": "fit"},
            "expected": {"exponent": 1.0, "strength": gravity / length, "strength_unit": "s^-2",
                         "pendulum_length_m": length, "gravity_m_s2": gravity,
                         "latitude_deg": latitude}}


def airtable_puck() -> dict:
    """A puck tethered by a zero-length elastic cord on an air table, damped, 120 fps."""
    rng = np.random.default_rng(7)
    omega = 2.0 * math.pi / 2.2
    track = simulate_orbit(exponent=1.0, strength=omega**2, start=(180.0, 0.0),
                           velocity=(0.0, 300.0), duration=15.0, rate=120.0, noise=0.25,
                           drag=Drag("linear", 0.04), centre=(412.0, 305.5), dropped=0.01,
                           length_unit="mm", rng=rng)
    _write(HERE / "airtable_puck.tsv",
           ["forcefit demo data (invented scenario): air-table puck on a zero-length elastic cord,",
            "overhead camera at 120 frames per second, 15 s, positions in table millimetres.",
            "Truth: n = 1, k = (2 pi / 2.2 s)^2 = 8.1567 s^-2, linear drag 0.04 s^-1,",
            "centre (412.0, 305.5) mm, noise 0.25 mm."],
           ["time (s)", "x (mm)", "y (mm)"], [track.t, track.x, track.y],
           ["%.5f", "%.3f", "%.3f"], delimiter="\t")
    return {"file": "airtable_puck.tsv", "title": "air-table puck (120 fps, mm, damped)", "load": {},
            "fit": {"drag": "linear"},
            "expected": {"exponent": 1.0, "strength": omega**2, "strength_unit": "s^-2",
                         "drag_linear_per_s": 0.04, "centre_mm": [412.0, 305.5]}}


def comet() -> dict:
    """Heliocentric positions of an invented comet around perihelion, with per-point sigma."""
    rng = np.random.default_rng(31)
    a, e = 3.1, 0.62
    q = a * (1 - e)
    speed = math.sqrt(GAUSS_K2 * (1 + e) / q)
    steps = rng.uniform(1.0, 4.0, 400).cumsum()
    t = np.concatenate(([0.0], steps))
    t = t[(t <= 420.0) & ~((t > 250.0) & (t < 290.0))]          # solar conjunction gap
    states = propagate_reference([q, 0.0], [0.0, speed], t, exponent=-2.0, strength=GAUSS_K2,
                                 epoch=160.0)
    incl, node, peri = (math.radians(v) for v in (23.4, 71.0, 150.0))

    def rotation(angle: float, axis: int) -> np.ndarray:
        c, s = math.cos(angle), math.sin(angle)
        i, j = [k for k in range(3) if k != axis]
        m = np.eye(3)
        m[i, i], m[i, j], m[j, i], m[j, j] = c, -s, s, c
        return m

    turn = rotation(node, 2) @ rotation(incl, 0) @ rotation(peri, 2)
    xyz = np.column_stack((states.position, np.zeros(t.size))) @ turn.T
    r = np.linalg.norm(xyz, axis=1)
    sigma = 2.0e-7 * r
    xyz += sigma[:, None] * rng.standard_normal(xyz.shape)
    epoch0 = 2463100.5
    _write(HERE / "comet_heliocentric.csv",
           ["forcefit demo data (invented scenario): heliocentric ecliptic positions of a fictional",
            "short-period comet, 420 days around perihelion with a 40-day conjunction gap.",
            "Units: t in days (Julian date), x, y, z and sigma in au (sigma per coordinate).",
            "Truth: n = -2, k = 0.01720209895^2 = 2.959122e-4 au^3 d^-2, a = 3.1 au, e = 0.62,",
            "the Sun at the origin."],
           ["t [d]", "x [au]", "y [au]", "z [au]", "sigma [au]"],
           [epoch0 + t, xyz[:, 0], xyz[:, 1], xyz[:, 2], sigma],
           ["%.5f", "%.10f", "%.10f", "%.10f", "%.2e"])
    return {"file": "comet_heliocentric.csv", "title": "fictional comet (3-D, au, days, sigma)",
            "load": {}, "fit": {"centre": [0.0, 0.0]},
            "expected": {"exponent": -2.0, "strength": GAUSS_K2, "strength_unit": "au^3 d^-2",
                         "semi_major_axis_au": a, "eccentricity": e, "centre_au": [0.0, 0.0]}}


def _magnet_run(rng: np.random.Generator, k: float, duration: float) -> tuple[np.ndarray, ...]:
    """A pendulum bob pulled also by a magnet under its lowest point (not a power law)."""
    pull, depth = 0.0017, 0.05   # m^3 s^-2 and m: softened attraction c r / (r^2 + d^2)^1.5

    def derivative(_: float, s: np.ndarray) -> np.ndarray:
        r2 = s[0] ** 2 + s[1] ** 2
        factor = k + pull / (r2 + depth**2) ** 1.5
        return np.array([s[2], s[3], -factor * s[0], -factor * s[1]])

    t = np.arange(int(duration * 30) + 1) / 30.0
    sol = solve_ivp(derivative, (0, t[-1]), [0.16, 0.0, 0.0, 0.2], method="DOP853",
                    t_eval=t, rtol=1e-12, atol=1e-14)
    return t, sol.y[0], sol.y[1]


def class_set() -> dict:
    """Twelve student runs of the 2.40 m pendulum lab, each filmed from above with a phone."""
    CLASS.mkdir(parents=True, exist_ok=True)
    length, gravity = 2.40, 9.81
    k = gravity / length
    rng = np.random.default_rng(1203)
    good = [  # (start m, velocity m/s, duration s, mm per px, noise px, layout)
        ((0.20, 0.00), (0.00, 0.15), 30.0, 1.2, 0.8, "csv"),
        ((0.15, 0.05), (-0.05, 0.20), 25.0, 1.0, 1.0, "csv"),
        ((0.25, 0.00), (0.00, 0.08), 35.0, 1.5, 0.6, "semicolon"),
        ((0.10, 0.00), (0.00, 0.18), 30.0, 0.9, 1.2, "csv"),
        ((0.18, 0.10), (-0.10, 0.12), 40.0, 1.3, 0.7, "tsv"),
        ((0.22, 0.00), (0.00, 0.25), 28.0, 1.4, 1.5, "csv"),
        ((0.12, 0.00), (0.00, 0.05), 30.0, 1.1, 0.9, "whitespace"),
        ((0.16, 0.04), (0.02, 0.22), 32.0, 1.2, 1.0, "csv"),
    ]
    runs = []
    for number, (start, velocity, duration, mm_px, noise, layout) in enumerate(good, start=1):
        track = simulate_pendulum(length=length, gravity=gravity, start=start, velocity=velocity,
                                  duration=duration, rate=30.0, rng=rng)
        x, y = _to_pixels(track.x, track.y, mm_per_px=mm_px,
                          pivot_px=tuple(rng.uniform(500, 700, 2)), turn_deg=rng.uniform(0, 360))
        x, y = x + rng.normal(0, noise, x.size), y + rng.normal(0, noise, y.size)
        name = f"run_{number:02d}"
        note = [f"forcefit demo data (invented scenario): pendulum lab, {name}, 2.40 m pendulum,",
                "phone above the pivot at 30 frames per second; bob centre in image pixels."]
        if layout == "semicolon":
            _write(CLASS / f"{name}.csv", note, ["t [s]", "x [px]", "y [px]"], [track.t, x, y],
                   ["%.4f", "%.2f", "%.2f"], delimiter=";", decimal_comma=True)
        elif layout == "tsv":
            _write(CLASS / f"{name}.tsv", note, ["t [s]", "x [px]", "y [px]"], [track.t, x, y],
                   ["%.4f", "%.2f", "%.2f"], delimiter="\t")
        elif layout == "whitespace":
            _write(CLASS / f"{name}.txt", note, ["t [s]", "x [px]", "y [px]"], [track.t, x, y],
                   ["%.4f", "%9.2f", "%9.2f"], delimiter="  ")
        else:
            _write(CLASS / f"{name}.csv", note, ["t [s]", "x [px]", "y [px]"], [track.t, x, y],
                   ["%.4f", "%.2f", "%.2f"])
        runs.append({"run": name, "expected": "pass"})
    # run 09: the camera ran at 25 fps, but the times were written as frame / 30.
    track = simulate_pendulum(length=length, gravity=gravity, start=(0.18, 0.0),
                              velocity=(0.0, 0.14), duration=30.0, rate=25.0, rng=rng)
    x, y = _to_pixels(track.x, track.y, mm_per_px=1.2, pivot_px=(640.0, 360.0), turn_deg=30.0)
    x, y = x + rng.normal(0, 0.8, x.size), y + rng.normal(0, 0.8, y.size)
    _write(CLASS / "run_09.csv",
           ["forcefit demo data (invented scenario): pendulum lab, run_09, 2.40 m pendulum,",
            "phone above the pivot; bob centre in image pixels."],
           ["t [s]", "x [px]", "y [px]"], [np.arange(x.size) / 30.0, x, y], ["%.4f", "%.2f", "%.2f"])
    runs.append({"run": "run_09", "expected": "fail: strength about 1.44 k (times assume 30 fps, "
                                              "the camera ran at 25 fps)"})
    # run 10: a magnet under the lowest point adds a pull that is not a power law.
    t, x_m, y_m = _magnet_run(rng, k, 30.0)
    x, y = _to_pixels(x_m, y_m, mm_per_px=1.0, pivot_px=(620.0, 410.0), turn_deg=75.0)
    x, y = x + rng.normal(0, 0.8, x.size), y + rng.normal(0, 0.8, y.size)
    _write(CLASS / "run_10.csv",
           ["forcefit demo data (invented scenario): pendulum lab, run_10, 2.40 m pendulum,",
            "phone above the pivot at 30 frames per second; bob centre in image pixels."],
           ["t [s]", "x [px]", "y [px]"], [t, x, y], ["%.4f", "%.2f", "%.2f"])
    runs.append({"run": "run_10", "expected": "fail: exponent well below 1 (a magnet under the "
                                              "table adds a pull)"})
    # run 11: stopped after 1.8 s, less than one period (3.11 s).
    track = simulate_pendulum(length=length, gravity=gravity, start=(0.2, 0.0),
                              velocity=(0.0, 0.12), duration=1.8, rate=30.0, rng=rng)
    x, y = _to_pixels(track.x, track.y, mm_per_px=1.2, pivot_px=(600.0, 400.0), turn_deg=0.0)
    x, y = x + rng.normal(0, 0.8, x.size), y + rng.normal(0, 0.8, y.size)
    _write(CLASS / "run_11.csv",
           ["forcefit demo data (invented scenario): pendulum lab, run_11, 2.40 m pendulum,",
            "recording stopped after 1.8 s."],
           ["t [s]", "x [px]", "y [px]"], [track.t, x, y], ["%.4f", "%.2f", "%.2f"])
    runs.append({"run": "run_11", "expected": "fail: shorter than one period"})
    # run 12: a spreadsheet export with an error cell and a line cut short.
    lines = (CLASS / "run_01.csv").read_text().splitlines()
    lines[0] = "# forcefit demo data (invented scenario): pendulum lab, run_12, a damaged export."
    lines[1] = "# (copied from another run, then damaged: an error cell and a truncated line)"
    row = lines[214].split(",")
    lines[214] = ",".join([row[0], "#DIV/0!", row[2]])
    lines[-1] = lines[-1][:7]
    (CLASS / "run_12.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    runs.append({"run": "run_12", "expected": "fail: the file cannot be read (a line cut short "
                                              "at row 904, an error cell at row 215)"})
    return {"folder": "class_pendulum", "title": "pendulum lab class set (12 runs)",
            "load": {"length_unit": "px"},
            "expected": {"exponent": 1.0, "exponent_tolerance": 0.05, "strength": k,
                         "strength_tolerance": 0.03, "strength_unit": "s^-2",
                         "pendulum_length_m": length, "gravity_m_s2": gravity},
            "runs": runs}


def _tripod_camera(tilt_deg: float, *, target: tuple[float, float], distance: float, focal: float,
                   centre: tuple[float, float]):
    """A pinhole camera above the table's front edge, its axis tilted from the vertical by tilt_deg.

    Returns project(x, y) -> (u, v, depth): image px (rows downwards) and depth along the axis (m)
    of table points (m)."""
    tilt = math.radians(tilt_deg)
    eye = np.array([target[0], target[1] - distance * math.sin(tilt), distance * math.cos(tilt)])
    forward = (np.array([target[0], target[1], 0.0]) - eye) / distance
    right = np.array([1.0, 0.0, 0.0])
    down = np.cross(forward, right)

    def project(x, y):
        ray = np.stack([x, y, np.zeros_like(x)], axis=-1) - eye
        depth = ray @ forward
        return centre[0] + focal * (ray @ right) / depth, centre[1] + focal * (ray @ down) / depth, depth

    return project


def tilted_airtable() -> dict:
    """A puck on an air table filmed by a phone on a tripod at 25 degrees from the vertical."""
    import cv2

    rng = np.random.default_rng(1825)
    width, height, focal, puck = 480, 270, 380.0, 0.03            # px, px, px, m (radius)
    project = _tripod_camera(25.0, target=(0.40, 0.30), distance=1.5, focal=focal, centre=(240.0, 135.0))
    omega, turn = 2.0 * math.pi / 2.2, math.radians(20.0)         # rad/s; the ellipse's tilt
    semi_major, semi_minor, post = 0.25, 0.12, (0.40, 0.30)       # m

    def position(t):
        a, b = semi_major * np.cos(omega * t), semi_minor * np.sin(omega * t)
        return (post[0] + a * math.cos(turn) - b * math.sin(turn),
                post[1] + a * math.sin(turn) + b * math.cos(turn))

    times = np.arange(301) / 30.0 + rng.uniform(-0.003, 0.003, 301)
    times = np.delete(times - times[0], 150)                     # the phone skipped a frame
    rows, cols = np.mgrid[0:height, 0:width]
    light = 1.0 - 0.25 * ((cols - 240.0) ** 2 + (rows - 120.0) ** 2) / 240.0**2     # vignetting
    table = np.array([p for p in zip(*project(np.array([-0.1, 0.9, 0.9, -0.1]),
                                              np.array([-0.1, -0.1, 0.7, 0.7]))[:2])])
    scene = np.full((height, width, 3), (150.0, 150.0, 150.0))              # BGR, the floor
    mask = np.zeros((height, width), np.uint8)
    cv2.fillPoly(mask, [np.rint(table * 16).astype(np.int32)], 1, cv2.LINE_AA, 4)
    scene[mask > 0] = (110.0, 60.0, 25.0)                                    # the table, dark blue
    corners = [(0.0, 0.0), (0.8, 0.0), (0.8, 0.6), (0.0, 0.6)]               # tape marks, m
    marks = [(float(u), float(v)) for u, v, _ in (project(np.array(x), np.array(y)) for x, y in corners)]
    for u, v in marks:
        for du, dv in ((6, 0), (0, 6)):
            start, end = (int(16 * (u - du)), int(16 * (v - dv))), (int(16 * (u + du)), int(16 * (v + dv)))
            cv2.line(scene, start, end, (235.0, 235.0, 235.0), 2, cv2.LINE_AA, 4)
    scene *= light[:, :, None]
    frames = []
    for index, t in enumerate(times):
        x, y = position(t + (np.arange(5) / 4 - 0.5) / 120.0)              # 1/120 s exposure
        u, v, depth = project(np.asarray(x), np.asarray(y))
        radius = focal * puck / float(np.mean(depth))
        picture = add_marker(scene, u, v, radius=radius, contrast=np.array([125.0, 175.0, 210.0]) * 0.9)
        if 200 <= index < 204:                        # a dark sleeve reaches in from above the puck
            bottom, left = int(np.mean(v)) + 16, int(np.mean(u)) - 30 + 4 * (index - 200)
            picture[:bottom, max(left, 0):left + 60] = (35.0, 30.0, 30.0)
        frames.append(to_pixels(picture, noise=2.0, rng=rng))
    write_video(HERE / "airtable_tilted.mp4", frames, times, codec="libx264", quality=20)
    marks_px = [[round(u, 2), round(v, 2)] for u, v in marks]
    return {"file": "airtable_tilted.mp4",
            "title": "air-table puck filmed at 25 degrees (phone video, variable frame rate)",
            "load": {"plane_mapping": {"marks": marks_px, "rectangle": [0.8, 0.6], "unit": "m"}},
            "fit": {},
            "expected": {"exponent": 1.0, "strength": omega**2, "strength_unit": "s^-2",
                         "centre_m": list(post), "camera_tilt_deg": 25.0, "frames": int(times.size),
                         "hidden_frames": [200, 201, 202, 203]}}


def main() -> None:
    HERE.mkdir(parents=True, exist_ok=True)
    manifest = {"about": "Invented demo scenarios for forcefit; see README.md in this folder.",
                "datasets": [stairwell_pendulum(), airtable_puck(), comet(), class_set(), tilted_airtable()]}
    (HERE / "manifest.json").write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
