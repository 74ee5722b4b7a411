"""A class settings file: the rule, reading defaults and per-file options, read with tomllib."""

import pytest

from forcefit.apps.class_settings import SETTINGS_NAME, STARTING_FILE, options_for, read_settings
from forcefit.apps.grading import rule_with_settings
from forcefit.cli import build_parser
from forcefit.cli.cmd_grade import _given
from forcefit.errors import InputError
from forcefit.reading.coordinates import Calibration

SETTINGS = """
[rule]
expect = 1
tolerance = 0.05
strength = 4.905
strength_unit = "s^-2"

[reading]
length_unit = "px"
frame_rate = 30
scale = "1.6 mm"
origin = [958.3, 541.7]
flip_y = true

[[file]]
match = "bruno*.csv"
length_unit = "mm"
columns = { t = "tiempo", x = "posición x" }

[[file]]
match = "carla.csv"
frame_rate = 25
"""


@pytest.fixture
def settings(tmp_path):
    path = tmp_path / SETTINGS_NAME
    path.write_text(SETTINGS, encoding="utf-8")
    return read_settings(path)


def test_defaults_and_per_file_options(settings):
    # issue 16: one command line could not grade a class whose files differ
    anna = options_for(settings, "runs/anna.csv")
    assert anna["length_unit"] == "px" and anna["frame_rate"] == 30.0
    assert anna["calibration"] == Calibration(scale=1.6, unit="mm", origin=(958.3, 541.7), flip_y=True)
    bruno = options_for(settings, "runs/bruno_week3.csv")
    assert bruno["length_unit"] == "mm" and bruno["t"] == "tiempo" and bruno["x"] == "posición x"
    assert options_for(settings, "carla.csv")["frame_rate"] == 25.0


def test_the_command_line_wins_over_the_file(settings):
    args = build_parser().parse_args(["grade", "runs", "--tolerance", "0.01", "--length-unit", "cm"])
    rule_values, options = _given(args)
    assert rule_values == {"tolerance": 0.01} and options == {"length_unit": "cm"}
    rule = rule_with_settings(settings, rule=rule_values, options=options)
    assert (rule.expect, rule.tolerance, rule.strength, rule.strength_tolerance) == (1.0, 0.01, 4.905, 0.05)
    assert rule.options_for("bruno.csv")["length_unit"] == "cm"
    assert rule.options_for("carla.csv")["frame_rate"] == 25.0
    assert rule.settings_for("carla.csv") != rule.settings_for("anna.csv")   # their grades differ


def test_the_starting_file_reads_and_bad_files_are_named(tmp_path):
    start = tmp_path / "start.toml"
    start.write_text(STARTING_FILE)
    assert dict(read_settings(start).rule) == {"expect": 1.0, "tolerance": 0.05, "min_turns": 1.0}
    for text, pattern in [("[rule]\nexpect = \n", "not valid TOML"),
                          ("[rule]\nexpected = 1\n", 'unknown key "expected"'),
                          ("[rule]\ntolerance = \"5%\"\n", "must be a number"),
                          ("[[file]]\nlength_unit = \"mm\"\n", "needs match"),
                          ("[reading]\nscale = 1.6\n", 'scale = "1.6 mm"')]:
        start.write_text(text)
        with pytest.raises(InputError, match=pattern) as caught:
            read_settings(start)
        assert str(start) in str(caught.value)
    with pytest.raises(InputError, match="no expect"):
        rule_with_settings(None, rule={"tolerance": 0.05}, options={})


def test_grade_writes_a_starting_file_and_never_overwrites(tmp_path, capsys):
    from forcefit.cli import main

    target = tmp_path / SETTINGS_NAME
    assert main(["grade", "--write-settings", str(target)]) == 0
    assert target.read_text() == STARTING_FILE
    assert main(["grade", "--write-settings", str(target)]) == 2
    assert "does not overwrite" in capsys.readouterr().err
