"""The output folder's lock: one batch at a time per folder, and a dead run's lock is taken over.

The lock is ``<out>/.variantshot.lock``, a small JSON file ``{"pid", "started", "host",
"proc_start"}``.  It is created with its full content in one step (the content is written to a
temporary file which is then hard-linked to the lock name; ``link`` fails if the name exists), so
no other run ever sees an empty or half-written lock.

A lock is *stale*, and is taken over, when it was written on this host and its process is gone:
the pid does not exist, is a zombie, or belongs to a newer process than the one that wrote the
lock (pid reuse, detected from the process start time in ``/proc/<pid>/stat`` where available).
A lock from another host is always respected (we cannot see its processes).  A lock file that
cannot be parsed is treated as stale once it is older than 10 s (it can only come from outside).
"""

from __future__ import annotations

import datetime as _dt
import json
import logging
import os
import socket
import tempfile
import time
from pathlib import Path

from .errors import LockedError

__all__ = ["LOCK_NAME", "BatchLock", "acquire_lock", "read_lock", "is_stale"]

LOCK_NAME = ".variantshot.lock"
log = logging.getLogger(__name__)


def _proc_start_ticks(pid: int) -> int | None:
    """Process start time in clock ticks since boot (Linux ``/proc/<pid>/stat`` field 22)."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    try:
        rest = text[text.rindex(")") + 2 :].split()
        return int(rest[19])
    except (ValueError, IndexError):
        return None


def _proc_state(pid: int) -> str | None:
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
        return text[text.rindex(")") + 2 :].split()[0]
    except (OSError, ValueError, IndexError):
        return None


def _pid_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return _proc_state(pid) not in ("Z", "X")


def read_lock(out_dir) -> dict | None:
    """The lock's content, ``{}`` when unreadable, ``None`` when there is no lock."""
    path = Path(out_dir) / LOCK_NAME
    try:
        text = path.read_text()
    except FileNotFoundError:
        return None
    except OSError:
        return {}
    try:
        data = json.loads(text)
        return data if isinstance(data, dict) else {}
    except json.JSONDecodeError:
        return {}


def is_stale(info: dict, lock_path: Path | None = None) -> bool:
    """Whether a lock's holder is gone (see the module docstring for the rules)."""
    if not info or "pid" not in info:
        try:
            age = time.time() - lock_path.stat().st_mtime if lock_path is not None else 1e9
        except OSError:
            return True
        return age > 10.0
    if info.get("host") != socket.gethostname():
        return False
    pid = int(info["pid"])
    if not _pid_alive(pid):
        return True
    recorded = info.get("proc_start")
    if recorded is not None:
        now = _proc_start_ticks(pid)
        if now is not None and now != int(recorded):
            return True  # the pid was reused by another process
    return False


class BatchLock:
    """A held lock; release it with :meth:`release` or use it as a context manager."""

    def __init__(self, path: Path, info: dict):
        self.path = path
        self.info = info
        self.held = True

    def release(self) -> None:
        if not self.held:
            return
        self.held = False
        current = read_lock(self.path.parent)
        if current and current.get("pid") == self.info["pid"] and current.get("started") == self.info["started"]:
            try:
                self.path.unlink()
            except FileNotFoundError:
                pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.release()


def acquire_lock(out_dir, *, attempts: int = 3) -> BatchLock:
    """Take the output folder's lock.

    Parameters
    ----------
    out_dir : path
        The batch's output folder (created if missing).

    Returns
    -------
    BatchLock

    Raises
    ------
    LockedError
        A live run holds the lock; the error names its pid and start time.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    path = out / LOCK_NAME
    pid = os.getpid()
    info = {
        "pid": pid,
        "started": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "host": socket.gethostname(),
        "proc_start": _proc_start_ticks(pid),
    }
    for _ in range(attempts):
        fd, tmp = tempfile.mkstemp(prefix=".vs-tmp-lock-", dir=out)
        try:
            with os.fdopen(fd, "w") as f:
                json.dump(info, f)
                f.flush()
                os.fsync(f.fileno())
            try:
                os.link(tmp, path)  # atomic create-if-absent, with the content already in place
                return BatchLock(path, info)
            except FileExistsError:
                pass
        finally:
            try:
                os.unlink(tmp)
            except FileNotFoundError:
                pass
        held = read_lock(out)
        if held is None:
            continue  # released meanwhile: try again
        if not is_stale(held, path):
            raise LockedError(path, int(held.get("pid", -1)), str(held.get("started", "?")))
        log.warning("taking over a stale lock %s left by pid %s (started %s)", path, held.get("pid"), held.get("started"))
        # only remove it if it is still the same stale lock we judged
        if read_lock(out) == held:
            try:
                path.unlink()
            except FileNotFoundError:
                pass
    held = read_lock(out) or {}
    raise LockedError(path, int(held.get("pid", -1)), str(held.get("started", "?")))
