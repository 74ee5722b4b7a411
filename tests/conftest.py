"""Shared helpers for forcefit's tests."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "datasets_demo"


def sha256(path: Path) -> str:
    """Digest of a file, to prove it was not modified."""
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def write(tmp_path: Path):
    """Write text (or bytes) to a file in a fresh folder and return its path."""

    def _write(name: str, content: str | bytes) -> Path:
        path = tmp_path / name
        if isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8", newline="")
        return path

    return _write
