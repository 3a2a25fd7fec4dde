"""Benchmark: ``variantshot trace`` start-up, from process launch to the first finished samples.

Runs ``variantshot trace catalog/models/mug.gltf`` (64 x 64, 1 spp, no denoiser) in fresh
processes and records, from just before the process is launched, the wall time until the
first call of the row kernel returns (the first samples are on the film): once with an empty
numba cache (``NUMBA_CACHE_DIR`` in a temporary folder: the cold compile of every kernel), then
twice with that cache filled (warm start; the better of the two is reported).  Also the
process's total wall time.  Prints ONE JSON line.  Goal: warm start to the first sample < 1.5 s.

    python tests/benchmarks/bench_startup.py [--threads 2]
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

REPO = Path(__file__).resolve().parents[2]

CHILD = """
import sys, time
import variantshot.transport.path_kernels as pk
_orig = pk.render_rows
_seen = []
def _spy(*a):
    r = _orig(*a)
    if not _seen:
        _seen.append(1)
        print("FIRST_SAMPLE", time.time(), flush=True)
    return r
pk.render_rows = _spy
from variantshot.cli.main import app
try:
    app(prog_name="variantshot", args=sys.argv[1:])
except SystemExit as exc:
    if exc.code:
        raise
"""


def _launch(args, env):
    t0 = time.time()
    out = subprocess.run([sys.executable, "-c", CHILD, *args], capture_output=True, text=True, env=env)
    total = time.time() - t0
    first = None
    for line in out.stdout.splitlines():
        if line.startswith("FIRST_SAMPLE"):
            first = float(line.split()[1]) - t0
    if out.returncode != 0 or first is None:
        raise SystemExit(f"trace failed ({out.returncode}):\n{out.stderr[-2000:]}")
    return first, total


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser()
    ap.add_argument("--threads", type=int, default=2)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        env = dict(os.environ, NUMBA_CACHE_DIR=str(Path(tmp) / "jit"), NUMBA_NUM_THREADS=str(args.threads))
        cmd = ["trace", str(REPO / "catalog" / "models" / "mug.gltf"), "-o", str(Path(tmp) / "mug.png"),
               "--width", "64", "--height", "64", "--spp", "1", "--no-denoise", "--quiet"]
        cold_first, cold_total = _launch(cmd, env)
        warm = [_launch(cmd, env) for _ in range(2)]
    warm_first = min(w[0] for w in warm)
    warm_total = min(w[1] for w in warm)
    t = time.time()
    subprocess.run([sys.executable, "-c", "from variantshot.cli.main import app; app(prog_name='variantshot', "
                    "args=['--help'])"], capture_output=True, check=False)
    help_s = time.time() - t
    result = {"bench": "startup", "threads": args.threads, "load_avg_1min": round(os.getloadavg()[0], 2),
              "cold_first_sample_s": round(cold_first, 2), "cold_total_s": round(cold_total, 2),
              "warm_first_sample_s": round(warm_first, 2), "warm_total_s": round(warm_total, 2),
              "help_s": round(help_s, 2), "warm_under_1_5_s": warm_first < 1.5}
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
