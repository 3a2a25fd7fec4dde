"""Benchmark: the demo at draft quality in one local process vs a local Dask cluster (not a test).

1. Warms the JIT cache in a separate process.
2. Renders the same shots of the demo catalog (``--shots N`` spread evenly over the sorted shot
   ids; 0 = the whole catalog) twice into fresh folders: in this process (one shot at a time, numba
   on every core) and on ``--cluster local:W`` (W worker processes, one Dask thread each, the cores
   split between their numba pools), and compares every image byte for byte.
3. Per-task overhead: one tiny shot (8 x 8 px, 1 spp) submitted to the warm cluster again and
   again, one at a time; overhead = time from ``submit`` to the result on the client minus the
   shot's own render time measured on the worker (``ShotResult.seconds``); median and max.

Prints one JSON line.

    python tests/benchmarks/bench_cluster.py [--shots 12] [--workers 2] [--quality draft] [--repeats 20]
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


class _Capture:
    """An executor that renders nothing and keeps the tasks (to pick shots and a tiny task)."""

    def __init__(self):
        self.tasks = []

    def map(self, fn, tasks):
        self.tasks = list(tasks)
        return iter(())

    def close(self):
        return None


def _shots(out: Path) -> dict:
    return {p.name: p.read_bytes() for p in sorted((out / "shots").iterdir())}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--shots", type=int, default=12, help="shots of the demo to render (0: all)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--quality", default="draft")
    ap.add_argument("--repeats", type=int, default=20)
    args = ap.parse_args()

    t = time.perf_counter()
    subprocess.run([sys.executable, "-c", "from variantshot.batch.runner import warmup; warmup()"], check=True)
    warm_s = time.perf_counter() - t

    from variantshot.batch.cluster import DaskExecutor, _fingerprint, run_on_worker
    from variantshot.batch.executors import LocalExecutor
    from variantshot.batch.quality import Quality
    from variantshot.batch.runner import render_batch, render_shot, warmup

    catalog, templates = REPO / "catalog" / "demo.csv", REPO / "templates"
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        cap = _Capture()
        render_batch(catalog, tmp / "plan", quality=args.quality, templates_dir=templates, sheet_formats=(), executor=cap)
        ids = sorted(task.shot_id for task in cap.tasks)
        if args.shots and args.shots < len(ids):
            step = len(ids) / args.shots
            ids = [ids[int(k * step)] for k in range(args.shots)]

        warmup()
        t = time.perf_counter()
        local = render_batch(catalog, tmp / "local", quality=args.quality, templates_dir=templates, only=ids,
                             sheet_formats=(), executor=LocalExecutor(1))
        local_s = time.perf_counter() - t

        t = time.perf_counter()
        executor = DaskExecutor(f"local:{args.workers}")
        executor.client.run(warmup)  # load the JIT cache in every worker outside the timed run
        start_s = time.perf_counter() - t
        try:
            t = time.perf_counter()
            dist = render_batch(catalog, tmp / "cluster", quality=args.quality, templates_dir=templates, only=ids,
                                sheet_formats=(), executor=executor)
            cluster_s = time.perf_counter() - t

            tiny = dataclasses.replace(cap.tasks[0], quality=Quality("tiny", long_side_px=8, spp=1, noise_target=1.0,
                                                                     denoise=False, max_depth=1))
            in_process = []
            for _ in range(5):
                in_process.append(render_shot(tiny).seconds)
            fp = _fingerprint()
            overheads, roundtrips = [], []
            for _ in range(args.repeats + 1):
                t = time.perf_counter()
                result = executor.client.submit(run_on_worker, render_shot, tiny, fp, pure=False).result()
                rt = time.perf_counter() - t
                assert result.ok, result.error
                roundtrips.append(rt)
                overheads.append(rt - result.seconds)
            overheads, roundtrips = overheads[1:], roundtrips[1:]  # the first one ships the function
        finally:
            executor.close()
        a, b = _shots(tmp / "local"), _shots(tmp / "cluster")
        identical = sorted(a) == sorted(b) and all(a[n] == b[n] for n in a)

    n_local, n_cluster = len(local.rendered), len(dist.rendered)
    print(json.dumps({
        "benchmark": "cluster",
        "quality": args.quality,
        "cpu_count": os.cpu_count(),
        "load_avg_1min": round(os.getloadavg()[0], 2),
        "jit_warmup_s": round(warm_s, 1),
        "shots": len(ids),
        "local_rendered": n_local,
        "local_s": round(local_s, 1),
        "local_shots_per_min": round(60 * n_local / local_s, 1),
        "cluster_workers": args.workers,
        "cluster_start_s": round(start_s, 1),
        "cluster_rendered": n_cluster,
        "cluster_failed": len(dist.failed),
        "cluster_first_error": dist.failed[0][1] if dist.failed else None,
        "cluster_s": round(cluster_s, 1),
        "cluster_shots_per_min": round(60 * n_cluster / cluster_s, 1),
        "speedup": round(local_s / cluster_s, 2) if cluster_s else None,
        "bit_identical": identical,
        "tiny_shot_in_process_s": round(statistics.median(in_process), 4),
        "tiny_task_roundtrip_median_s": round(statistics.median(roundtrips), 4),
        "task_overhead_median_s": round(statistics.median(overheads), 4),
        "task_overhead_max_s": round(max(overheads), 4),
        "overhead_repeats": len(overheads),
    }))


if __name__ == "__main__":
    main()
