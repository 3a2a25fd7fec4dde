"""Benchmark: ``variantshot demo --quality draft`` end to end on 2 cores (not a test).

Warms the JIT cache in a separate process first (a nightly run does not pay the compile), then
times the whole demo into a fresh folder, then times a second, incremental run (nothing to do).
Prints one JSON line.  Target: the whole demo catalog in under 3 minutes on 2 cores.

    python tests/benchmarks/bench_demo.py [--quality draft] [--threads 2]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quality", default="draft")
    ap.add_argument("--threads", type=int, default=2)
    args = ap.parse_args()
    env = dict(os.environ, NUMBA_NUM_THREADS=str(args.threads))
    t = time.perf_counter()
    subprocess.run([sys.executable, "-c", "from variantshot.batch.runner import warmup; warmup()"], env=env, check=True)
    warm_s = time.perf_counter() - t
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "demo"
        cmd = [sys.executable, "-c", "from variantshot.cli.main import app; app(prog_name='variantshot')", "demo", "--quality", args.quality, "--out", str(out), "--quiet"]
        t = time.perf_counter()
        first = subprocess.run(cmd, env=env, capture_output=True, text=True)
        first_s = time.perf_counter() - t
        t = time.perf_counter()
        second = subprocess.run(cmd, env=env, capture_output=True, text=True)
        second_s = time.perf_counter() - t
        shots = json.loads((out / "manifest.json").read_text())["shots"]
        rendered = sum(1 for e in shots.values() if e["status"] == "rendered")
        render_s = sum(e["seconds"] for e in shots.values())
    print(json.dumps({
        "benchmark": "demo",
        "quality": args.quality,
        "threads": args.threads,
        "cpu_count": os.cpu_count(),
        "load_avg_1min": round(os.getloadavg()[0], 2),
        "jit_warmup_s": round(warm_s, 1),
        "demo_s": round(first_s, 1),
        "exit_status": first.returncode,
        "shots": len(shots),
        "rendered": rendered,
        "mean_shot_s": round(render_s / max(1, rendered), 2),
        "second_run_s": round(second_s, 1),
        "second_run_exit_status": second.returncode,
        "under_3_min": first_s < 180,
    }))


if __name__ == "__main__":
    main()
