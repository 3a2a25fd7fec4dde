"""Crash safety: a batch killed with SIGKILL at any moment resumes with nothing lost.

The batch runs in a subprocess on a 12-shot catalog at 16 x 16 px; it is killed at random early
moments (while it starts, plans and writes scenes) and after a given number of shots reached the
manifest, then restarted each time.  Afterwards every shot is present and decodes, the manifest
agrees with the files (sizes and SHA-256), no temporary file is left and the lock is gone.
"""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from variantshot._lock import LOCK_NAME
from variantshot.batch.manifest import check_manifest, entry_is_current, load_manifest

DATA = Path(__file__).resolve().parents[1] / "data" / "batch"

SCRIPT = """
import sys
from variantshot.batch.quality import Quality
from variantshot.batch.runner import render_batch
q = Quality("draft", long_side_px=16, spp=4, noise_target=1.0, max_depth=3)
r = render_batch(sys.argv[1], sys.argv[2], quality=q, templates_dir=sys.argv[3], sheet_formats=())
print(len(r.rendered), len(r.skipped), len(r.failed))
"""


def _catalog(tmp_path: Path) -> Path:
    lines = (DATA / "catalog.csv").read_text().splitlines()
    header, rows = lines[0], lines[1:]
    out = [header]
    for k in range(3):  # 3 copies of the 3 rows, distinct SKUs: 12 shots
        for row in rows:
            sku, rest = row.split(",", 1)
            out.append(f"{sku}-{k},{rest}")
    path = tmp_path / "catalog.csv"
    path.write_text("\n".join(out) + "\n")
    return path


def _start(catalog, out, repo_dir):
    return subprocess.Popen([sys.executable, "-c", SCRIPT, str(catalog), str(out), str(repo_dir / "templates")],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _n_entries(out: Path) -> int:
    try:
        return len(json.loads((out / "manifest.json").read_text())["shots"])
    except (OSError, ValueError, KeyError):
        return 0


def _kill(proc):
    proc.send_signal(signal.SIGKILL)
    proc.wait()


@pytest.mark.slow
def test_sigkill_at_several_moments_then_resume(tmp_path, repo_dir):
    catalog = _catalog(tmp_path)
    out = tmp_path / "out"
    seen_before_kill: dict[str, dict] = {}
    moments = [("after", 0.3), ("after", 1.5), ("shots", 2), ("shots", 5), ("shots", 9)]
    for kind, value in moments:
        proc = _start(catalog, out, repo_dir)
        started = time.monotonic()
        while proc.poll() is None:
            if kind == "after" and time.monotonic() - started >= value:
                break
            if kind == "shots" and _n_entries(out) >= value:
                break
            if time.monotonic() - started > 240:
                break
            time.sleep(0.01)
        finished = proc.poll() is not None
        if not finished:
            _kill(proc)
        # nothing recorded before the kill is lost: every manifest entry is still a current render
        m = load_manifest(out) if (out / "manifest.json").exists() else {"shots": {}}
        for sid, entry in m["shots"].items():
            assert entry_is_current(out, entry, entry["key"]), sid
        for sid, entry in seen_before_kill.items():
            assert m["shots"][sid]["content_hash"] == entry["content_hash"], sid
        seen_before_kill.update(m["shots"])
        if finished:
            break

    final = _start(catalog, out, repo_dir)
    stdout, stderr = final.communicate(timeout=300)
    assert final.returncode == 0, stderr
    rendered, skipped, failed = map(int, stdout.split())
    assert failed == 0 and rendered + skipped == 12
    assert skipped >= len(seen_before_kill)  # what was done before is not done again

    from PIL import Image

    m = load_manifest(out)
    assert len(m["shots"]) == 12
    for sid, entry in m["shots"].items():
        assert entry["status"] == "rendered"
        with Image.open(out / entry["image"]) as im:
            im.load()  # decodes completely
            assert im.size == (16, 16)
    assert check_manifest(out) == []  # sizes, sha256, fields, and no temporary file left
    assert not (out / LOCK_NAME).exists()
    leftovers = [p for p in out.rglob("*") if p.name.startswith(".vs-tmp-")]
    assert leftovers == []
    # and a further run renders nothing
    again = _start(catalog, out, repo_dir)
    stdout, _ = again.communicate(timeout=120)
    assert stdout.split()[:2] == ["0", "12"]
