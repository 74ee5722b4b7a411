"""Write a file whole or not at all: a temporary file beside it, then a rename.

The temporary file is created owner-only (``tempfile.mkstemp``); before the rename it gets the
mode a plain ``open`` would have given it (0666 less the user's umask, normally 0644), or the
mode of the file it replaces, so that a class page copied to a shared folder stays readable.
"""

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
        The destination, with the mode of the file it replaced or else 0666 less the umask.
    """
    target = Path(path)
    mode = target.stat().st_mode & 0o7777 if target.exists() else 0o666 & ~_umask()
    payload = data.encode("utf-8") if isinstance(data, str) else data
    handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(payload)
            stream.flush()
            os.fsync(stream.fileno())
        os.chmod(temporary, mode)
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target


def _umask() -> int:
    """The process's umask (read by setting it and setting it back)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask
