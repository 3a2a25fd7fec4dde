"""``variantshot render --cluster``: the batch on a Dask ``distributed`` cluster.

The reference for every cluster run is a local single-process run of the same catalog with the
same seeds: a Dask task gets the same ShotTask the local executor renders, so the image bytes must
agree exactly.  Dask (the reference scheduler here) is an optional extra: these tests skip with a
reason without it, except the one that simulates its absence.  The demo catalog is rendered at a
shrunken draft preset (16 x 16 px, 4 spp) so a whole run takes seconds once the JIT cache is warm.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest
from typer.testing import CliRunner

from variantshot.batch import quality as quality_mod
from variantshot.batch.manifest import check_manifest, load_manifest
from variantshot.cli.main import app

TINY = quality_mod.Quality("draft", long_side_px=16, spp=4, noise_target=1.0, max_depth=3)


def _need_dask():
    pytest.importorskip("dask", reason="dask is not installed (pip install 'variantshot[cluster]')")
    pytest.importorskip("distributed", reason="distributed is not installed (pip install 'variantshot[cluster]')")


@pytest.fixture
def tiny_draft(monkeypatch):
    """The draft preset shrunk to 16 x 16 px at 4 spp (the client ships it to the workers)."""
    monkeypatch.setitem(quality_mod.QUALITY_PRESETS, "draft", TINY)
    return TINY


@pytest.fixture
def demo(repo_dir):
    return repo_dir / "catalog" / "demo.csv", repo_dir / "templates"


def _render(catalog, templates, out, *extra):
    args = ["render", str(catalog), "--out", str(out), "--templates", str(templates), *extra]
    return CliRunner().invoke(app, args)


def _shot_bytes(out: Path) -> dict:
    return {p.name: p.read_bytes() for p in sorted((out / "shots").iterdir())}


def test_two_worker_cluster_renders_the_demo_bit_identical_to_a_local_run(tiny_draft, demo, tmp_path):
    _need_dask()
    catalog, templates = demo
    local = _render(catalog, templates, tmp_path / "local", "--json")
    assert local.exit_code in (0, 1), local.output  # 1 only for QA verdicts at 16 px
    cluster = _render(catalog, templates, tmp_path / "cluster", "--json", "--cluster", "local:2")
    assert cluster.exit_code == local.exit_code, cluster.output
    assert "cluster local:2: 2 worker(s)" in cluster.stderr

    ran = [json.loads(line) for line in cluster.stdout.splitlines() if line.startswith("{")]
    m_local, m_cluster = load_manifest(tmp_path / "local"), load_manifest(tmp_path / "cluster")
    assert len(m_local["shots"]) > 40  # the whole demo catalog
    assert sorted(e["id"] for e in ran) == sorted(m_local["shots"])  # every shot, each once
    assert all(e["status"] == "rendered" for e in ran)
    # bit for bit: every file, and the keys and hashes the manifest records
    a, b = _shot_bytes(tmp_path / "local"), _shot_bytes(tmp_path / "cluster")
    assert sorted(a) == sorted(b)
    assert [n for n in a if a[n] != b[n]] == []
    for sid, e in m_local["shots"].items():
        c = m_cluster["shots"][sid]
        assert (c["key"], c["content_hash"], c["qa"]["status"]) == (e["key"], e["content_hash"], e["qa"]["status"])
    assert check_manifest(tmp_path / "cluster") == []

    # the manifest written from cluster results drives the next run like a local one: nothing to do
    again = _render(catalog, templates, tmp_path / "cluster", "--json", "--cluster", "local:2")
    assert [line for line in again.stdout.splitlines() if line.startswith("{")] == []


def test_an_existing_scheduler_by_address_gives_the_local_bytes(tiny_draft, demo, tmp_path):
    _need_dask()
    from distributed import LocalCluster

    catalog, templates = demo
    only = ["--only", "TT-MUG350-OAT-GZ--*", "--format", "png,jpg"]
    local = _render(catalog, templates, tmp_path / "local", *only)
    assert local.exit_code in (0, 1), local.output
    # a scheduler this run did not start, reached by its tcp:// address
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://")
        r = _render(catalog, templates, tmp_path / "remote", *only, "--cluster", cluster.scheduler_address)
        assert len(cluster.workers) == 1  # still running: the client did not stop a cluster it did not start
    assert r.exit_code == local.exit_code, r.output
    assert f"cluster {cluster.scheduler_address}: 1 worker(s)" in r.stderr
    a, b = _shot_bytes(tmp_path / "local"), _shot_bytes(tmp_path / "remote")
    assert len(a) == 6 and a == b  # 3 angles x (png, jpg), byte for byte


def test_a_lost_scheduler_stops_the_batch_with_a_clear_error_and_a_consistent_folder(demo, tmp_path):
    _need_dask()
    import threading

    from distributed import LocalCluster

    from variantshot.batch.cluster import DaskExecutor
    from variantshot._lock import LOCK_NAME
    from variantshot.batch.runner import render_batch
    from variantshot.errors import RenderError

    catalog, templates = demo
    cluster = LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None)
    executor = DaskExecutor(cluster.scheduler_address)
    done: list = []

    def on_shot(entry):
        done.append(entry["id"])
        if len(done) == 3:
            threading.Thread(target=cluster.close).start()  # the scheduler goes away mid-run

    try:
        with pytest.raises(RenderError, match="lost the Dask scheduler"):
            render_batch(catalog, tmp_path / "out", quality=TINY, templates_dir=templates, sheet_formats=(),
                         executor=executor, on_shot=on_shot)
    finally:
        executor.close()
        cluster.close()
    m = load_manifest(tmp_path / "out")["shots"]
    assert 3 <= len(m) < 40 and check_manifest(tmp_path / "out") == []
    assert not (tmp_path / "out" / LOCK_NAME).exists()


def test_an_unreachable_scheduler_is_named():
    _need_dask()
    from variantshot.batch.cluster import DaskExecutor
    from variantshot.errors import RenderError

    # port 9 (discard) has no Dask scheduler on a test machine (IANA service registry)
    with pytest.raises(RenderError, match=r"tcp://127\.0\.0\.1:9: cannot reach the Dask scheduler"):
        DaskExecutor("tcp://127.0.0.1:9", connect_timeout_s=2)


def test_a_worker_with_another_variantshot_refuses_the_shot():
    from variantshot.batch.cluster import _fingerprint, run_on_worker

    class Task:
        shot_id, threads = "A--front", None

    result = run_on_worker(lambda task: None, Task(), "variantshot 0.0.0+0000")
    assert not result.ok
    assert "variantshot 0.0.0+0000" in result.error and _fingerprint() in result.error


def test_a_worker_killed_mid_run_every_shot_completes_once(tiny_draft, demo, tmp_path):
    _need_dask()
    from variantshot.batch.cluster import DaskExecutor
    from variantshot.batch.runner import render_batch

    catalog, templates = demo
    executor = DaskExecutor("local:2", retries=3)
    killed: dict = {}
    finished: list = []

    def on_shot(entry):
        finished.append(entry["id"])
        if killed:
            return
        busy = {w: keys for w, keys in executor.client.processing().items() if keys}
        if not busy:
            return
        victim = sorted(busy)[0]
        pid = executor.worker_pids()[victim]
        keys = list(busy[victim])
        killed.update(pid=pid, keys=keys, shots={k.split("-", 1)[1].rsplit("-", 1)[0] for k in keys})
        os.kill(pid, signal.SIGKILL)  # the worker process dies with shots assigned to it

    try:
        report = render_batch(catalog, tmp_path / "out", quality=TINY, templates_dir=templates, sheet_formats=(),
                              executor=executor, on_shot=on_shot)
        survivors = set(executor.worker_pids().values())
        # the scheduler's own record: some shot of the lost worker went to "processing" twice
        story = executor.cluster.scheduler.story(*killed["keys"])
        starts = [rec[0] for rec in story if rec[2] == "processing"]
        rerun = {k for k in killed["keys"] if starts.count(k) >= 2}
    finally:
        executor.close()
    assert killed, "no worker was busy when the first shot finished"
    assert killed["pid"] not in survivors  # the kill took effect (the nanny started a new process)
    m = load_manifest(tmp_path / "out")
    assert report.failed == []
    assert len(finished) == len(set(finished)) == len(m["shots"]) == report.planned > 40
    assert sorted(report.rendered) == sorted(set(report.rendered)) == sorted(m["shots"])
    assert rerun, story  # a shot was lost with the worker and rendered again
    assert killed["shots"] <= set(m["shots"])  # the lost worker's shots ran again elsewhere
    assert all(e["status"] == "rendered" for e in m["shots"].values())
    assert check_manifest(tmp_path / "out") == []
    # ... and a rescheduled shot is the same image as a local render of it
    local = render_batch(catalog, tmp_path / "local", quality=TINY, templates_dir=templates, sheet_formats=(),
                         only=sorted(killed["shots"]))
    assert local.rendered
    for sid in local.rendered:
        assert (tmp_path / "out" / "shots" / f"{sid}.png").read_bytes() == \
            (tmp_path / "local" / "shots" / f"{sid}.png").read_bytes()


def test_a_shot_that_keeps_killing_workers_fails_after_the_allowed_retries_and_worker_logs_reach_the_client(caplog):
    _need_dask()
    import logging
    import time
    from variantshot.batch.cluster import DaskExecutor

    class Task:
        def __init__(self, shot_id):
            self.shot_id = shot_id
            self.threads = 1

    def die_on_b(task):
        from variantshot.batch.runner import ShotResult

        if task.shot_id == "b":
            os._exit(9)  # the worker process dies mid-shot, every time
        logging.getLogger("variantshot.batch.runner").warning("shot %s logged on pid %d", task.shot_id, os.getpid())
        return ShotResult(task.shot_id, True)

    caplog.set_level(logging.INFO, logger="variantshot")
    with DaskExecutor("local:2", retries=1) as executor:
        results = {r.shot_id: r for r in executor.map(die_on_b, [Task("a"), Task("b"), Task("c")])}
        deadline = time.monotonic() + 10  # forwarded records arrive as scheduler events
        while "shot c logged" not in caplog.text and time.monotonic() < deadline:
            time.sleep(0.05)
    assert results["a"].ok and results["c"].ok
    assert not results["b"].ok and "worker lost" in results["b"].error
    assert "shot a logged on pid" in caplog.text and "shot c logged on pid" in caplog.text
    assert f"pid {os.getpid()}" not in caplog.text  # they came from the workers


_CLIENT = r"""
import os, sys
from variantshot.batch.cluster import DaskExecutor
from variantshot.batch.quality import Quality
from variantshot.batch.runner import render_batch

if __name__ == "__main__":
    q = Quality("draft", long_side_px=16, spp=4, noise_target=1.0, max_depth=3)
    with DaskExecutor("local:2") as ex:
        print("workers", *ex.worker_pids().values(), flush=True)
        r = render_batch(sys.argv[1], sys.argv[2], quality=q, templates_dir=sys.argv[3], sheet_formats=(), executor=ex)
    print(len(r.rendered), len(r.skipped), len(r.failed), flush=True)
"""


def test_the_client_killed_mid_run_leaves_a_consistent_folder_and_the_next_run_resumes(demo, tmp_path):
    _need_dask()
    import time

    from variantshot._lock import LOCK_NAME
    from variantshot.batch.manifest import entry_is_current

    catalog, templates = demo
    out = tmp_path / "out"
    script = tmp_path / "client.py"
    script.write_text(_CLIENT)
    cmd = [sys.executable, str(script), str(catalog), str(out), str(templates)]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    workers = [int(pid) for pid in proc.stdout.readline().split()[1:]]
    assert len(workers) == 2, proc.stderr.read() if proc.poll() is not None else "no worker pids"
    started = time.monotonic()
    while proc.poll() is None and time.monotonic() - started < 240:
        try:
            if len(json.loads((out / "manifest.json").read_text())["shots"]) >= 8:
                break
        except (OSError, ValueError, KeyError):
            pass
        time.sleep(0.01)
    assert proc.poll() is None, "the run ended before it could be killed"
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    proc.stdout.close()
    proc.stderr.close()
    # as after a local run killed at the same moment: every entry recorded is a finished render
    before = load_manifest(out)["shots"]
    assert len(before) >= 8
    for sid, entry in before.items():
        assert entry_is_current(out, entry, entry["key"]), sid
    # the local cluster's workers do not outlive their client
    deadline = time.monotonic() + 30
    while any(Path(f"/proc/{pid}").exists() for pid in workers) and time.monotonic() < deadline:
        time.sleep(0.2)
    left = [pid for pid in workers if Path(f"/proc/{pid}").exists()]
    for pid in left:
        os.kill(pid, signal.SIGKILL)
    assert left == []

    again = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert again.returncode == 0, again.stderr
    rendered, skipped, failed = map(int, again.stdout.split()[-3:])
    m = load_manifest(out)["shots"]
    assert failed == 0 and rendered + skipped == len(m) > 40
    assert skipped >= len(before)  # what was done before the kill is not done again
    for sid, entry in before.items():
        assert m[sid]["content_hash"] == entry["content_hash"], sid
    assert all(e["status"] == "rendered" for e in m.values())
    assert check_manifest(out) == []  # sizes, sha256, and no temporary file left
    assert not (out / LOCK_NAME).exists()


_BLOCK_DASK = r"""
import sys
class Block:
    def find_spec(self, name, path=None, target=None):
        if name.split(".")[0] in ("dask", "distributed"):
            raise ModuleNotFoundError(f"No module named {name!r} (blocked by the test)", name=name)
        return None
sys.meta_path.insert(0, Block())
from variantshot.cli.main import app
app(sys.argv[1:], prog_name="variantshot")
"""


def test_missing_dask_is_a_clear_error_and_exit_2(demo, tmp_path):
    catalog, templates = demo
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-c", _BLOCK_DASK, "render", str(catalog), "--out", str(out),
                           "--templates", str(templates), "--cluster", "local:2"],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 2, done.stderr  # DESIGN.md: 2 = bad input or usage, nothing rendered
    assert "--cluster needs Dask" in done.stderr
    assert "pip install 'variantshot[cluster]'" in done.stderr
    assert "Traceback" not in done.stderr
    assert not out.exists()


@pytest.mark.parametrize("value", ["local:0", "local:two", "http://host:8786", "somewhere"])
def test_a_bad_cluster_value_exits_2_naming_it(value, demo, tmp_path):
    catalog, templates = demo
    r = _render(catalog, templates, tmp_path / "out", "--cluster", value)
    assert r.exit_code == 2
    assert value in r.stderr and "local:N" in r.stderr
    assert not (tmp_path / "out").exists()


def test_workers_and_cluster_together_exit_2(demo, tmp_path):
    catalog, templates = demo
    r = _render(catalog, templates, tmp_path / "out", "--cluster", "local:2", "--workers", "2")
    assert r.exit_code == 2 and "--workers and --cluster" in r.stderr
    assert not (tmp_path / "out").exists()


def test_cluster_addresses_parse():
    from variantshot.batch.cluster import ClusterSpec, parse_cluster

    # Dask's address forms: scheme://host:port, tcp by default (distributed docs, "Connecting")
    assert parse_cluster("tcp://10.0.0.5:8786") == ClusterSpec(address="tcp://10.0.0.5:8786")
    assert parse_cluster("scheduler.lan:8786") == ClusterSpec(address="tcp://scheduler.lan:8786")
    assert parse_cluster("local:3") == ClusterSpec(local_workers=3)
