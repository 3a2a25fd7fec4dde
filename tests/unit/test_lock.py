"""The output folder lock: exclusive, names its holder, stale locks of dead processes are taken over."""

import json
import os
import socket
import subprocess
import sys

import pytest

from variantshot._lock import LOCK_NAME, acquire_lock, read_lock
from variantshot.errors import LockedError


def _write_lock(out, pid, started="2026-01-01T00:00:00+00:00", host=None, **extra):
    info = {"pid": pid, "started": started, "host": host or socket.gethostname(), **extra}
    (out / LOCK_NAME).write_text(json.dumps(info))


def test_lock_is_exclusive_and_released(tmp_path):
    with acquire_lock(tmp_path) as lock:
        assert read_lock(tmp_path)["pid"] == os.getpid()
        with pytest.raises(LockedError) as exc:
            acquire_lock(tmp_path)
        assert str(os.getpid()) in str(exc.value) and lock.info["started"] in str(exc.value)
    assert read_lock(tmp_path) is None
    acquire_lock(tmp_path).release()


def test_live_holder_in_another_process_keeps_us_out(tmp_path):
    holder = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(30)"])
    try:
        _write_lock(tmp_path, holder.pid, started="2026-02-03T04:05:06+00:00")
        with pytest.raises(LockedError, match=rf"pid {holder.pid}, started 2026-02-03T04:05:06"):
            acquire_lock(tmp_path)
    finally:
        holder.kill()
        holder.wait()
    # now the holder is dead: its lock is stale and is taken over
    with acquire_lock(tmp_path) as lock:
        assert read_lock(tmp_path)["pid"] == os.getpid() == lock.info["pid"]


def test_dead_and_reused_pids_are_stale(tmp_path):
    p = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    _write_lock(tmp_path, int(p.stdout))
    acquire_lock(tmp_path).release()
    # our own pid, but recorded with another process start time: the pid was reused
    _write_lock(tmp_path, os.getpid(), proc_start=1)
    acquire_lock(tmp_path).release()


def test_other_hosts_lock_is_respected(tmp_path):
    _write_lock(tmp_path, 1, host="some-other-host.invalid")
    with pytest.raises(LockedError):
        acquire_lock(tmp_path)


def test_no_temporary_files_left(tmp_path):
    with acquire_lock(tmp_path):
        pass
    assert [p.name for p in tmp_path.iterdir()] == []
