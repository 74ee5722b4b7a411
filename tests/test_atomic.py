"""Outputs are written whole or not at all."""

import pytest

import forcefit._atomic as atomic


def test_outputs_are_written_whole_or_not_at_all(tmp_path, monkeypatch):
    target = tmp_path / "results.csv"
    target.write_text("old, complete contents\n")

    def broken_replace(source, destination):
        raise OSError("disk full")

    monkeypatch.setattr(atomic.os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        atomic.write_atomic(target, "new contents that never arrive\n")
    assert target.read_text() == "old, complete contents\n"
    assert [p.name for p in tmp_path.iterdir()] == ["results.csv"]       # no temporary left over


def test_text_and_bytes_arrive_whole(tmp_path):
    text = atomic.write_atomic(tmp_path / "page.html", "<p>ü</p>\n")
    data = atomic.write_atomic(tmp_path / "figure.png", b"\x89PNG\r\n")
    assert text.read_text(encoding="utf-8") == "<p>ü</p>\n" and data.read_bytes() == b"\x89PNG\r\n"
