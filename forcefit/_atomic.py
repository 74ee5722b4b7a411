"""Write a file whole or not at all: a temporary file beside it, then a rename."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def write_atomic(path: str | os.PathLike[str], data: str | bytes) -> Path:
    """Write ``data`` to ``path`` so that readers see the old file or the new one, never half.

    Parameters
    ----------
    path : path-like
        Destination; its folder must exist.
    data : str or bytes
        Text (written as UTF-8) or bytes.

    Returns
    -------
    Path
        The destination.
    """
    target = Path(path)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(payload)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target
