"""Atomic writes: whole files only, ordinary permissions, no temporaries left behind."""

import os
import stat

from variantshot._atomic import TEMP_PREFIX, atomic_write, remove_stale_temporaries


def test_atomic_write_replaces_whole_file_with_umask_permissions(tmp_path):
    target = tmp_path / "sub" / "a.txt"
    atomic_write(target, "old")
    atomic_write(target, b"new")
    assert target.read_bytes() == b"new"
    mask = os.umask(0)
    os.umask(mask)
    # POSIX: a new file's mode is 0666 & ~umask (common practice, no source beyond open(2))
    assert stat.S_IMODE(target.stat().st_mode) == 0o666 & ~mask
    assert not [p for p in target.parent.iterdir() if p.name.startswith(TEMP_PREFIX)]


def test_remove_stale_temporaries(tmp_path):
    (tmp_path / f"{TEMP_PREFIX}abc.png").write_bytes(b"half")
    (tmp_path / "keep.png").write_bytes(b"x")
    assert remove_stale_temporaries(tmp_path) == 1
    assert [p.name for p in tmp_path.iterdir()] == ["keep.png"]
