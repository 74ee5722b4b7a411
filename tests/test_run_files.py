"""Which files of a class folder are runs, what a grade depends on, and cells safe in a spreadsheet."""

import pytest

from forcefit.apps.run_files import fingerprint, guard_cell, sort_runs, student_of, unguard_cell


def test_notes_photos_and_earlier_results_are_skipped_with_the_reason(tmp_path):
    # issue 16: notes.txt and last week's results.csv counted as failed runs
    (tmp_path / "anna.csv").write_text("t,x,y\n0,1,0\n1,0,1\n2,-1,0\n")
    (tmp_path / "bea.tsv").write_text("tiempo\tx\ty\n0,0\t1,5\t0,0\n0,1\t0,0\t1,5\n0,2\t-1,5\t0,0\n")
    (tmp_path / "notes.txt").write_text("Week 3: the long pendulum.\nBring a tape measure.\n")
    (tmp_path / "results.csv").write_text("run,file,passed,reason\nanna,runs/anna.csv,True,\n")
    (tmp_path / "photo.jpg").write_bytes(b"\xff\xd8\xff\xe0")
    (tmp_path / ".hidden.csv").write_text("t,x,y\n")
    found = sort_runs(tmp_path)
    assert [p.name for p in found.runs] == ["anna.csv", "bea.tsv"]
    reasons = {p.name: reason for p, reason in found.skipped}
    assert reasons["notes.txt"].startswith("not a table of numbers")
    assert reasons["results.csv"] == "the results table of an earlier grading"
    assert reasons["photo.jpg"].startswith("not a data file")
    assert ".hidden.csv" not in reasons


def test_the_fingerprint_changes_with_the_file_and_the_rule(tmp_path):
    # issue 16: --resume kept stale grades after a rule change or a fixed file
    run = tmp_path / "run.csv"
    run.write_text("t,x,y\n0,1,0\n1,0,1\n")
    rule = {"expect": 1.0, "tolerance": 0.05, "load_options": {"length_unit": "px"}}
    first = fingerprint(run, rule)
    assert fingerprint(run, dict(rule)) == first
    assert fingerprint(run, {**rule, "tolerance": 0.005}) != first
    assert fingerprint(run, {**rule, "load_options": {"length_unit": "mm"}}) != first
    run.write_text("t [s],x,y\n0,1,0\n1,0,1\n")
    assert fingerprint(run, rule) != first


@pytest.mark.parametrize("text", ["=HYPERLINK(\"http://example.invalid\",\"x\")", "+1+1", "-2+3", "@SUM(A1)",
                                  "\tcmd", "\rcmd"])
def test_formula_cells_are_guarded_and_come_back_unchanged(text):
    # OWASP, "CSV Injection": cells beginning with = + - @ tab or carriage return get a leading
    # apostrophe, so a spreadsheet shows them as text
    guarded = guard_cell(text)
    assert guarded == "'" + text and unguard_cell(guarded) == text


def test_plain_cells_are_left_alone():
    for text in ("anna", "run 03", "it's", "'quoted", ""):
        assert guard_cell(text) == text and unguard_cell(text) == text


def test_the_student_is_the_run_name_up_to_its_first_separator():
    # issue 16: a student-ID column for the gradebook, from the file name
    assert [student_of(name) for name in ("s1042_week3", "anna-run2", "carla 2", "dora")] == \
        ["s1042", "anna", "carla", "dora"]
