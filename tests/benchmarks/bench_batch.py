"""Benchmark: seconds per shot and shots per hour of the demo catalog at given quality presets.

Renders the bundled demo catalog (or the shots matching ``--only``) with the batch runner into
a fresh folder per preset, on ``--threads`` threads in this process, after one warm-up shot
outside the timings (the JIT cache load or compile).  Seconds per shot are the manifest's
per-shot ``seconds`` (load, render, denoise, encode, QA); ``mean_spp`` is the average samples
per pixel adaptive sampling took.  Prints ONE JSON line.

    python tests/benchmarks/bench_batch.py [--quality draft,final] [--only 'TT-MUG*--front'] [--threads 2]

The goal the issue sets: a ``final`` (2048 px) shot in at most 90 s on 2 cores.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
import time
from pathlib import Path


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quality", default="draft,final", help="comma-separated presets")
    ap.add_argument("--only", action="append", default=None, help="shot-id glob (repeatable); default all")
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--no-denoise", action="store_true")
    args = ap.parse_args(argv)
    os.environ.setdefault("NUMBA_NUM_THREADS", str(args.threads))

    import dataclasses

    import numpy as np

    from variantshot.batch.quality import quality_preset
    from variantshot.batch.runner import render_batch, warmup
    from variantshot.cli.demo import demo_catalog

    catalog, templates = demo_catalog()
    t = time.perf_counter()
    warmup()
    result = {"bench": "batch", "threads": args.threads, "cpu_count": os.cpu_count(),
              "load_avg_1min": round(os.getloadavg()[0], 2), "warmup_s": round(time.perf_counter() - t, 2),
              "only": args.only}
    for name in args.quality.split(","):
        q = quality_preset(name.strip())
        if args.no_denoise:
            q = dataclasses.replace(q, denoise=False)
        with tempfile.TemporaryDirectory() as tmp:
            out = Path(tmp) / "out"
            t = time.perf_counter()
            report = render_batch(catalog, out, quality=q, only=args.only, threads=args.threads,
                                  templates_dir=templates, sheet_formats=())
            wall = time.perf_counter() - t
            shots = json.loads((out / "manifest.json").read_text())["shots"]
        rendered = [e for e in shots.values() if e["status"] == "rendered"]
        secs = np.array([e["seconds"] for e in rendered]) if rendered else np.zeros(1)
        qa = [((e.get("qa") or {}).get("status")) for e in rendered]
        noise = [c["value"] for e in rendered for c in (e.get("qa") or {}).get("checks", []) if c["name"] == "noise"]
        result[q.name] = {
            "long_side_px": q.long_side_px, "spp_cap": q.spp, "noise_target": q.noise_target,
            "adaptive": q.adaptive, "denoise": q.denoise,
            "shots": len(shots), "rendered": len(rendered), "ok": bool(getattr(report, "ok", True)),
            "wall_s": round(wall, 2),
            "seconds_per_shot": round(float(secs.mean()), 2),
            "max_shot_s": round(float(secs.max()), 2),
            "shots_per_hour": round(3600.0 / float(secs.mean()), 1) if rendered else 0.0,
            "qa": {s: qa.count(s) for s in sorted(set(map(str, qa)))},
            "qa_noise_median": round(float(np.median(noise)), 4) if noise else None,
            "qa_not_pass": {e["id"]: [c["name"] for c in e["qa"]["checks"] if c["status"] != "pass"]
                            for e in rendered if (e.get("qa") or {}).get("status") not in (None, "pass")},
        }
    if "final" in result:
        result["final_shot_within_90s"] = result["final"]["max_shot_s"] <= 90.0
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
