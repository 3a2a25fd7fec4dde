"""Atomic file writes: a temporary file in the same folder, fsync, then os.replace.

A run killed at any moment leaves either the old file or the new one, never half of one.
Every writer in the package goes through :func:`atomic_write`.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

TEMP_PREFIX = ".vs-tmp-"


def _default_mode() -> int:
    # mkstemp creates 0600 files; output is meant to be shared like any other file the user makes.
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def atomic_write(path, data: bytes | str, *, encoding: str = "utf-8") -> Path:
    """Write ``data`` to ``path`` atomically and return the path.

    Parameters
    ----------
    path : str or Path
        Destination. Its folder is created if missing.
    data : bytes or str
        The whole content; ``str`` is encoded with ``encoding``.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    payload = data.encode(encoding) if isinstance(data, str) else bytes(data)
    fd, tmp = tempfile.mkstemp(prefix=TEMP_PREFIX, suffix=path.suffix, dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(payload)
            f.flush()
            os.fsync(f.fileno())
        os.chmod(tmp, _default_mode())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return path


def remove_stale_temporaries(folder) -> int:
    """Delete temporary files left by a killed writer below ``folder``; return how many."""
    count = 0
    for p in Path(folder).rglob(TEMP_PREFIX + "*"):
        try:
            p.unlink()
            count += 1
        except OSError:
            pass
    return count
