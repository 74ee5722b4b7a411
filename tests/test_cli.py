"""The forcefit command: help with examples, inspect, simulate, demo, exit codes."""

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from forcefit.cli import build_parser, main
from forcefit.estimators import ESTIMATORS
from forcefit.reading.loaders import load_track

from .conftest import DEMO


@pytest.mark.parametrize("command", [[], ["simulate"], ["inspect"]])
def test_help_shows_an_example(command, capsys):
    with pytest.raises(SystemExit) as caught:
        main([*command, "--help"])
    assert caught.value.code == 0
    assert "examples:" in capsys.readouterr().out


def test_inspect_prints_units_and_columns(capsys, digest):
    path = DEMO / "class_pendulum" / "run_03.csv"
    before = digest(path)
    assert main(["inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert "1051" in out and "35 s" in out and "px" in out and "t: t [s]" in out
    assert digest(path) == before


def test_inspect_with_calibration_and_json(capsys):
    path = DEMO / "stairwell_pendulum.csv"
    assert main(["inspect", str(path), "--length-unit", "px", "--scale", "1.6 mm",
                 "--origin", "958.3,541.7", "--flip-y", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)[0]
    assert report["length_unit"] == "mm" and report["dropped_rows"] == 54
    assert report["sample_rate"] == pytest.approx(30.0, rel=1e-4)
    assert report["x_range"][1] == pytest.approx(551.0, abs=3.0)


def test_bad_file_exits_2_with_one_line_and_no_traceback(tmp_path):
    bad = tmp_path / "puck_03.csv"
    bad.write_text("t [s],x_px,y_px\n0,1,2\n0.1,n/a,3\n0.2,2,2\n0.3,3,1\n")
    result = subprocess.run([sys.executable, "-m", "forcefit.cli", "inspect", str(bad)],
                            capture_output=True, text=True, check=False)
    assert result.returncode == 2
    assert "Traceback" not in result.stderr
    assert 'puck_03.csv, row 3, column "x_px": found "n/a", expected a number' in result.stderr


def test_simulate_writes_a_track_that_reads_back(tmp_path, capsys):
    out = tmp_path / "rosette.csv"
    assert main(["simulate", "--exponent", "-1.5", "--duration", "20", "--rate", "30",
                 "--noise", "0.005", "--seed", "4", "--out", str(out)]) == 0
    track = load_track(out)
    assert track.n_points == 601 and track.length_unit == "m"
    assert np.median(track.sigma) == pytest.approx(0.005)
    assert "exponent" in out.read_text().splitlines()[1]          # truth in a comment line


def test_simulate_pendulum_and_shape_only_to_stdout(capsys):
    assert main(["simulate", "--pendulum", "2.4", "--start", "0.2,0", "--velocity", "0,0.1",
                 "--duration", "3", "--rate", "10", "--shape-only"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "x [m],y [m]" and len(lines) == 32


def test_simulate_without_a_law_exits_2(capsys):
    assert main(["simulate"]) == 2
    assert "--exponent" in capsys.readouterr().err


@pytest.mark.slow  # about two minutes; `make demo` runs the same
def test_demo_runs_the_main_job_on_every_bundled_run(capsys, tmp_path):
    assert main(["demo", "--out", str(tmp_path / "report")]) == 0
    out = capsys.readouterr().out
    for name in ("stairwell_pendulum", "airtable_puck", "comet_heliocentric", "run_01", "run_11"):
        assert name in out
    assert "load error" in out and "row 904" in out and "converged" in out
    assert (tmp_path / "report" / "index.html").exists()


def test_fit_prints_a_table_with_units(capsys):
    path = DEMO / "class_pendulum" / "run_01.csv"
    status = main(["fit", str(path), "--method", "curvature", "--profile", "5"])
    out = capsys.readouterr().out
    assert status == 0                                     # run_01 passes every check of the fit
    assert "exponent n" in out and "px" in out and "s^-2" in out and "force profile" in out


def test_fit_json_of_the_comet_with_the_sun_as_centre(capsys):
    # The demo comet was simulated with n = -2 and k = 0.01720209895^2 au^3/d^2 (Gauss 1809).
    assert main(["fit", str(DEMO / "comet_heliocentric.csv"), "--centre", "0,0", "--json"]) == 0
    (report,) = json.loads(capsys.readouterr().out)
    assert report["method"] == "orbit" and report["strength_unit"] == "au^3 d^-2"
    assert abs(report["exponent"] + 2.0) < 4 * report["exponent_stderr"]
    assert abs(report["strength"] - 0.01720209895**2) < 4 * report["strength_stderr"]
    assert 0 < report["strength_stderr"] < 1e-5 * report["strength"]


def test_fit_of_a_circle_exits_2_with_the_reason(tmp_path, capsys):
    t = np.linspace(0.0, 10.0, 300)
    path = tmp_path / "circle.csv"
    path.write_text("t [s],x [m],y [m]\n" + "\n".join(
        f"{a},{np.cos(a)},{np.sin(a)}" for a in t))
    assert main(["fit", str(path), "--centre", "0,0"]) == 2
    assert "circular orbit exists for every exponent" in capsys.readouterr().err


def test_fit_uses_the_orbit_method_with_drag_and_comparison(capsys):
    # The demo puck: n = 1, k = (2 pi / 2.2 s)^2, linear drag 0.04 1/s (datasets_demo/README.md).
    status = main(["fit", str(DEMO / "airtable_puck.tsv"), "--drag", "linear", "--compare", "1,-2",
                   "--json"])
    (report,) = json.loads(capsys.readouterr().out)
    assert status == 0 and report["method"] == "orbit"
    assert abs(report["exponent"] - 1.0) < 4 * report["exponent_stderr"]
    assert abs(report["strength"] - (2 * np.pi / 2.2) ** 2) < 4 * report["strength_stderr"]
    assert abs(report["details"]["drag"] - 0.04) < 4 * report["details"]["drag_stderr"]
    assert 0 < report["strength_stderr"] < 1e-3 * report["strength"]
    assert 0 < report["details"]["drag_stderr"] < 1e-4
    laws = {row["law"]: row for row in report["comparison"]}
    assert laws["n = 1"]["p_value"] > 0.01 and laws["n = -2"]["p_value"] < 1e-6


def test_fit_offers_every_registered_estimator(capsys):
    with pytest.raises(SystemExit):
        main(["fit", "--help"])
    assert "{" + ",".join(sorted(ESTIMATORS)) + "}" in capsys.readouterr().out


def test_orbit_options_are_refused_for_time_free_methods(capsys):
    assert main(["fit", str(DEMO / "airtable_puck.tsv"), "--method", "shape", "--drag", "linear"]) == 2
    assert "--drag applies to the orbit method only" in capsys.readouterr().err


def test_sample_reports_an_unconverged_run_and_resumes_it(tmp_path, capsys):
    path = str(DEMO / "class_pendulum" / "run_02.csv")
    chain = tmp_path / "chain.h5"
    assert main(["sample", path, "--max-steps", "50", "--seed", "1", "--save", str(chain),
                 "--json"]) == 1
    (report,) = json.loads(capsys.readouterr().out)
    assert report["posterior"]["converged"] is False and "Run longer" in report["posterior"]["reason"]
    assert main(["sample", path, "--max-steps", "100", "--resume", str(chain), "--json",
                 "--figures", str(tmp_path / "plots")]) == 1     # 100 steps are still too few
    (report,) = json.loads(capsys.readouterr().out)
    assert report["posterior"]["converged"] is False and "after 100 steps" in report["posterior"]["reason"]
    assert report["posterior"]["n_steps"] == 100
    assert (tmp_path / "plots" / "run_02_corner.png").stat().st_size > 10_000
    assert main(["sample", path, "--save", str(chain), "--resume", str(chain)]) == 2


def test_apsides_of_the_stairwell_pendulum_leave_no_anomaly(capsys):
    # The demo pendulum (datasets_demo/README.md): L = 11.0 m, g = 9.8105 m/s^2, latitude 52 deg;
    # its precession is the Airy rate (3/8) a b omega / L^2 minus the Earth's Omega_E sin 52.
    assert main(["apsides", str(DEMO / "stairwell_pendulum.csv"), "--length-unit", "px",
                 "--scale", "1.6 mm", "--origin", "958.3,541.7", "--flip-y", "--pendulum-length",
                 "11.0", "--gravity", "9.8105", "--latitude", "52", "--json"]) == 0
    (report,) = json.loads(capsys.readouterr().out)
    rates = report["precession_rad_per_s"]
    assert abs(rates["anomalous"]) < 3 * rates["anomalous_stderr"]
    assert rates["finite_amplitude"] > 3e-4 and rates["earth_rotation"] < 0


def test_apsides_rates_are_the_same_for_a_track_in_seconds_and_in_milliseconds(tmp_path, capsys):
    # The same stairwell pendulum with its times written in ms: every rate printed per second
    # or per century must come out the same (a unit conversion, common practice).
    lines = (DEMO / "stairwell_pendulum.csv").read_text().splitlines()
    header = lines.index("frame,t [s],x [px],y [px]")
    rows = [line.split(",") for line in lines[header + 1:]]
    in_ms = tmp_path / "stairwell_ms.csv"
    in_ms.write_text("frame,t [ms],x [px],y [px]\n" + "".join(
        f"{row[0]},{float(row[1]) * 1000:.1f},{row[2]},{row[3]}\n" for row in rows))
    options = ["--length-unit", "px", "--scale", "1.6 mm", "--origin", "958.3,541.7", "--flip-y",
               "--pendulum-length", "11.0", "--gravity", "9.8105", "--latitude", "52", "--json"]
    reports = []
    for path in (DEMO / "stairwell_pendulum.csv", in_ms):
        assert main(["apsides", str(path), *options]) == 0
        (report,) = json.loads(capsys.readouterr().out)
        reports.append(report)
    seconds, millis = reports
    assert millis["precession_rate_unit"] == "rad/ms"
    assert millis["precession_rate"] * 1000 == pytest.approx(seconds["precession_rate"], rel=1e-3)
    for key, value in seconds["precession_rad_per_s"].items():
        assert millis["precession_rad_per_s"][key] == pytest.approx(value, rel=1e-3, abs=1e-12), key
    assert millis["precession_arcsec_per_century"] == pytest.approx(
        seconds["precession_arcsec_per_century"], rel=1e-3)


def test_dual_and_plan_commands(tmp_path, capsys):
    hooke = tmp_path / "hooke.csv"
    main(["simulate", "--exponent", "1", "--strength", "4", "--start", "1.4,0", "--velocity", "0,1.6",
          "--duration", "10", "--rate", "60", "--noise", "0.001", "--seed", "1", "--out", str(hooke)])
    assert main(["dual", str(hooke), "--exponent", "1", "--centre", "0,0", "--out",
                 str(tmp_path / "image.csv")]) == 0
    assert main(["fit", str(tmp_path / "image.csv"), "--centre", "0,0", "--json"]) == 0
    capsys.readouterr()
    assert main(["fit", str(hooke), "--check-duality", "--json"]) == 0
    (report,) = json.loads(capsys.readouterr().out.split("\n", 0)[0])
    assert report["duality"]["passed"] is True
    assert main(["plan", "--pendulum", "2.4", "--semi-axes", "0.2,0.1", "--duration", "30",
                 "--rate", "30", "--noise", "0.001", "--target", "1e-4", "--json"]) == 0
    plan = json.loads(capsys.readouterr().out)
    assert 0 < plan["exponent_stderr"] < 1e-3 and plan["needs"]["duration"] > 30


@pytest.mark.parametrize(("content", "expected"), [
    ("temps (s);abscisse (px);ordonnée (px);luminosité\n0,0;100,0;50,0;3\n0,1;101,0;51,0;3\n"
     "0,2;102,5;53,0;3\n0,3;103,0;55,5;3\n",
     ("t: temps (s), x: abscisse (px), y: ordonnée (px)", "length px (header), time s (header)")),
    ("Bild;Zeit [ms];x-Position [mm];y-Position [mm]\n1;0;10,0;5,0\n2;40;11,0;5,5\n3;80;12,5;6,2\n"
     "4;120;13,0;7,5\n",
     ("t: Zeit [ms], x: x-Position [mm], y: y-Position [mm]", "length mm (header), time ms (header)")),
], ids=["french", "german"])
def test_inspect_finds_t_x_y_and_their_units_in_french_and_german_headers(tmp_path, capsys, content,
                                                                          expected):
    # issue 15, "Done when": inspect on a French and a German header finds t, x, y and their units
    path = tmp_path / "export.csv"
    path.write_text(content, encoding="utf-8")
    assert main(["inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert expected[0] in out and expected[1] in out


def _simulated_pendulum(path: Path, *, length: str, start: str, velocity: str, duration: str,
                        seed: str) -> Path:
    """A pendulum (m, s) simulated by the command line at 30 frames per second, 0.2 mm noise."""
    assert main(["simulate", "--pendulum", length, "--start", start, "--velocity", velocity,
                 "--duration", duration, "--rate", "30", "--noise", "0.0002", "--seed", seed,
                 "--out", str(path)]) == 0
    return path


def test_a_pendulum_length_that_cannot_be_used_says_why(tmp_path, capsys):
    # --pendulum-length takes the finite swing off an orbit fit near n = 1; a swing of 0.7 of
    # its length reads n far below 1 (the large-swing pendulum is no Hooke oscillator), and a
    # curvature fit is no orbit fit: each says why the correction is left out, never silently.
    path = _simulated_pendulum(tmp_path / "wide.csv", length="1.0", start="0.7,0", velocity="0,0.6",
                               duration="8", seed="3")
    capsys.readouterr()
    main(["fit", str(path), "--pendulum-length", "1.0 m", "--json"])
    (report,) = json.loads(capsys.readouterr().out)
    assert abs(report["exponent"] - 1.0) >= 0.1
    assert report["pendulum"]["applied"] is False and "n = " in report["pendulum"]["reason"]
    main(["fit", str(path), "--pendulum-length", "1.0 m", "--method", "curvature", "--json"])
    (report,) = json.loads(capsys.readouterr().out)
    assert report["pendulum"]["applied"] is False and "orbit fit" in report["pendulum"]["reason"]


def test_fit_prints_k_at_the_nominal_exponent_g_and_the_deviation(tmp_path, capsys):
    # issue 15, item 6: the strength at n = 1 (omega^2 in s^-2), g with --pendulum-length, and the
    # deviation from the nominal law with its significance
    path = _simulated_pendulum(tmp_path / "bob.csv", length="2.0", start="0.06,0", velocity="0,0.05",
                               duration="20", seed="2")
    capsys.readouterr()
    assert main(["fit", str(path), "--pendulum-length", "2.000+-0.002 m", "--center", "0,0"]) == 0
    out = capsys.readouterr().out
    assert "against Hooke's law (a linear restoring force), n = 1:" in out
    k = re.search(r"k at n = 1 +([0-9.]+) ± ([0-9.]+) s\^-2", out)
    g = re.search(r"g = k L +([0-9.]+) ± ([0-9.]+) m/s\^2", out)
    assert k and g and float(k[1]) == pytest.approx(4.905, rel=2e-3)
    assert float(g[1]) == pytest.approx(9.81, rel=2e-3) and float(g[2]) == pytest.approx(0.0098, rel=0.1)
    assert re.search(r"deviation from n = 1 +-?[0-9.]+ ± [0-9.]+ \([0-9.]+ standard errors?, p", out)
    # beside the raw values, the same with the finite swing taken off (an ideal pendulum of this swing)
    corrected = re.search(r"exponent, finite amplitude removed +([-0-9.]+) ± ([0-9.]+)", out)
    assert corrected and abs(float(corrected[1]) - 1.0) < 3 * float(corrected[2])
    # g with the swing taken off carries the length's 0.1 % too: 9.81 within its stated error
    g_corrected = re.search(r"\n  g +([0-9.]+) ± ([0-9.]+) m/s\^2", out)
    assert g_corrected and float(g_corrected[2]) == pytest.approx(0.0098, rel=0.1)
    assert abs(float(g_corrected[1]) - 9.81) < 3 * float(g_corrected[2])
    assert main(["fit", str(path), "--json", "--nominal", "1"]) == 0
    report = json.loads(capsys.readouterr().out)[0]
    assert report["deviation"]["nominal"] == 1.0 and report["deviation"]["strength_unit"] == "s^-2"
    assert "pendulum" not in report                                   # no length, no correction


def test_simulate_pendulum_writes_the_units_asked_for(tmp_path, capsys):
    # issue 15: simulate --pendulum ... --length-unit mm still wrote metres
    out = tmp_path / "bob.csv"
    assert main(["simulate", "--pendulum", "2.4", "--start", "0.2,0", "--velocity", "0,0.1",
                 "--duration", "3", "--rate", "10", "--length-unit", "mm", "--time-unit", "ms",
                 "--out", str(out)]) == 0
    track = load_track(out)
    assert (track.length_unit, track.time_unit) == ("mm", "ms")
    assert track.x[0] == pytest.approx(200.0) and track.t[-1] == pytest.approx(3000.0)
    assert "'units': {'length': 'm', 'time': 's'}" in out.read_text().splitlines()[1]


def test_center_is_accepted_as_centre(capsys):
    args = build_parser().parse_args(["fit", "run.csv", "--center", "1.5,-2"])
    assert args.centre == (1.5, -2.0)


def test_the_command_list_loads_no_command_and_no_heavy_library():
    # `forcefit --help` lists the commands from a table; a command's module (and numpy, scipy,
    # pandas, matplotlib, numba) is imported only when that command is used.
    code = ("import sys\nfrom forcefit.cli import main\ntry:\n    main(['--help'])\nexcept SystemExit:\n"
            "    pass\nheavy = [m for m in ('numpy', 'scipy', 'pandas', 'matplotlib', 'numba', 'pint') "
            "if m in sys.modules]\ncommands = [m for m in sys.modules if m.startswith('forcefit.cli.cmd_')]\n"
            "print(heavy, commands, file=sys.stderr)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stderr.strip() == "[] []"
    assert "calibrate-lens" in result.stdout and "fit F = -k r^n" in result.stdout


@pytest.mark.parametrize("command", ["fit", "sample", "track"])
def test_a_commands_help_loads_none_of_the_numerical_libraries(command):
    code = (f"import sys\nfrom forcefit.cli import main\ntry:\n    main(['{command}', '--help'])\n"
            "except SystemExit:\n    pass\nheavy = [m for m in ('scipy', 'matplotlib', 'numba', 'lmfit', "
            "'emcee', 'cv2', 'av', 'pint') if m in sys.modules]\nprint(heavy, file=sys.stderr)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stderr.strip() == "[]" and "usage: forcefit " + command in result.stdout


@pytest.mark.parametrize(("command", "absent"), [
    (["fit", "--method", "shape"], ("lmfit", "emcee", "scipy.stats", "matplotlib")),
    (["apsides"], ("lmfit", "emcee", "scipy.stats", "matplotlib")),
])
def test_the_time_free_fit_and_apsides_load_no_sampler_and_no_figures(command, absent):
    # emcee (the sampler), scipy.stats and matplotlib (the report's figures) are slow to import:
    # only `sample`, the law comparison and `--report` need them
    path = str(DEMO / "class_pendulum" / "run_02.csv")
    code = (f"import sys\nfrom forcefit.cli import main\nmain({[command[0], path, *command[1:]]!r})\n"
            f"print([m for m in {absent!r} if m in sys.modules], file=sys.stderr)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stderr.strip().splitlines()[-1] == "[]"
    assert ("shape fit" if command[0] == "fit" else "apsidal angle") in result.stdout


def test_a_report_without_a_posterior_loads_no_sampler(tmp_path):
    # The report draws a posterior's figures only when given one: emcee and scipy.stats (about
    # 0.8 s to import, paid again by every worker process of a batch grading) stay unloaded.
    path = str(DEMO / "class_pendulum" / "run_02.csv")
    absent = ("emcee", "scipy.stats")
    code = (f"import sys\nfrom forcefit.cli import main\n"
            f"main(['fit', {path!r}, '--report', {str(tmp_path)!r}])\n"
            f"print([m for m in {absent!r} if m in sys.modules], file=sys.stderr)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stderr.strip().splitlines()[-1] == "[]"
    assert (tmp_path / "run_02.html").exists()


@pytest.mark.parametrize(("command", "absent", "shown"), [
    ("apsides", ("scipy.stats", "scipy.signal", "dask", "pint", "lmfit", "numba", "matplotlib"),
     "apsidal angle"),
    ("inspect", ("scipy", "dask", "pint", "lmfit", "numba", "matplotlib"), "points"),
    ("fit", ("lmfit", "scipy.stats", "scipy.signal", "scipy.interpolate", "matplotlib", "dask", "pint",
             "emcee", "forcefit.geometry.path"), "orbit fit"),
])
def test_apsides_inspect_and_fit_load_only_what_they_use(command, absent, shown):
    # Start-up: scipy.stats (behind scipy.signal), pint (with dask behind it), lmfit, matplotlib and
    # numba each take longer to import than these commands take to run on a few thousand samples.
    # The orbit fit (fit's default with timestamps) needs numpy, pandas, scipy.optimize,
    # scipy.integrate (DOP853's tables), scipy.fft (the residuals' correlation) and numba; not the
    # smoothed path (scipy's splines), the statistics module, the sampler or the figures.
    path = str(DEMO / "class_pendulum" / "run_02.csv")
    code = (f"import sys\nfrom forcefit.cli import main\nmain([{command!r}, {path!r}])\n"
            f"print([m for m in {absent!r} if m in sys.modules], file=sys.stderr)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stderr.strip().splitlines()[-1] == "[]"
    assert shown in result.stdout


def test_the_fit_commands_methods_are_the_registrys():
    from forcefit.cli.cmd_fit import METHODS

    assert METHODS == tuple(sorted(ESTIMATORS))


def test_the_command_tables_help_is_each_commands_own():
    from forcefit.cli import COMMANDS

    full = build_parser()
    choices = next(action for action in full._actions if action.dest == "command")
    helps = {action.dest: action.help for action in choices._choices_actions}
    assert helps == {name: help_text for name, (_, help_text) in COMMANDS.items()}


@pytest.mark.parametrize("words, expected", [
    (["fit"], "forcefit fit: missing FILE."),
    (["fit", "x.csv", "--method", "nonsense"], "forcefit fit: --method takes one of"),
    (["simulate", "--exponent", "abc"], "forcefit simulate: --exponent takes a number, not 'abc'."),
    (["apsides", "x.csv", "--pendulum-length", "six metres"],
     'forcefit apsides: --pendulum-length: expected a length with its unit such as "1.6 mm"'),
])
def test_a_command_line_it_cannot_use_is_answered_in_one_line_of_its_own(words, expected, capsys):
    with pytest.raises(SystemExit) as caught:
        main(words)
    assert caught.value.code == 2
    err = capsys.readouterr().err
    assert err.startswith(expected) and err.count("\n") == 1
    assert "usage:" not in err and "error:" not in err
