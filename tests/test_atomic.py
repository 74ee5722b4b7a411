"""Outputs are written whole or not at all."""

import os
import stat

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


def test_outputs_take_the_users_umask_not_owner_only(tmp_path):
    # issue 16: every output was written 0600 (the temporary file's mode), so a class page copied to
    # a shared or web folder could not be read. A new file gets 0666 less the umask (POSIX open(2),
    # common practice); a replaced file keeps its mode.
    old = os.umask(0o022)
    try:
        page = atomic.write_atomic(tmp_path / "index.html", "<p>class</p>\n")
        assert stat.S_IMODE(page.stat().st_mode) == 0o644
        os.umask(0o077)
        assert stat.S_IMODE(atomic.write_atomic(tmp_path / "own.csv", "a\n").stat().st_mode) == 0o600
        page.chmod(0o664)
        assert stat.S_IMODE(atomic.write_atomic(page, "<p>again</p>\n").stat().st_mode) == 0o664
    finally:
        os.umask(old)
