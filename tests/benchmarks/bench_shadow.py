"""Benchmark: the shadow catcher (``batch.runner.shadow_map``) alone, on a demo shot; ONE JSON line.

    python tests/benchmarks/bench_shadow.py [--sku TT-MUG350-OAT-GZ] [--angle front] [--sizes 1024,2048]
                                            [--steps 2,auto] [--threads 2]

For each size and grid step (``auto`` = the batch's default, ``runner.shadow_step``) the best of
``--repeat`` wall-clock runs, after one warm-up call (kernel compile / cache load).  The demo
variant's scene is expanded in memory from the bundled catalog; the rig is the batch's default.
Run it from another checkout (``cd <checkout> && python <this file> --steps 2``) to time that
checkout's shadow map on the same shot in the same session: ``variantshot`` is imported from the
current directory.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sku", default="TT-MUG350-OAT-GZ")
    ap.add_argument("--angle", default="front")
    ap.add_argument("--sizes", default="1024,2048")
    ap.add_argument("--steps", default="2,auto")
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--repeat", type=int, default=2)
    args = ap.parse_args(argv)
    os.environ.setdefault("NUMBA_NUM_THREADS", str(args.threads))
    sys.path.insert(0, os.getcwd())

    import numpy as np

    import variantshot
    from variantshot import _jit
    from variantshot.batch import runner
    from variantshot.catalog.expand import expand_variant
    from variantshot.catalog.validate import read_catalog
    from variantshot.cli.demo import demo_catalog
    from variantshot.geometry.bvh import build_bvh
    from variantshot.geometry.gltf import load_gltf_bytes
    from variantshot.geometry.rig import build_rig

    _jit.set_threads(args.threads)
    catalog, templates = demo_catalog()
    cat = read_catalog(catalog, templates_dir=templates)
    variant = next(v for v in cat.variants if v.sku == args.sku)
    expanded = expand_variant(variant, cat.library)[0]
    product = load_gltf_bytes(runner.self_contained_gltf(expanded), expanded.scene_file)
    camera = runner._find_camera(product, args.angle)
    rig = build_rig("soft-even", product.bounds(), camera=camera)
    bvh = build_bvh(product.positions, product.triangles)
    runner.shadow_map(rig, camera, 64, 64, bvh, step=1)  # warm-up: compile / cache load

    result = {"bench": "shadow_map", "package": os.path.dirname(variantshot.__file__), "shot": f"{args.sku}--{args.angle}",
              "threads": args.threads, "load_avg_1min": round(os.getloadavg()[0], 2), "runs": {}}
    for size in (int(s) for s in args.sizes.split(",")):
        for step_arg in args.steps.split(","):
            if step_arg == "auto":
                if not hasattr(runner, "shadow_step"):
                    continue  # an older checkout without the automatic step
                step = runner.shadow_step(size, size)
            else:
                step = int(step_arg)
            best = float("inf")
            for _ in range(args.repeat):
                t = time.perf_counter()
                s = runner.shadow_map(rig, camera, size, size, bvh, step=step, seed=0)
                best = min(best, time.perf_counter() - t)
            result["runs"][f"{size}px_step{step}"] = {"seconds": round(best, 3), "points": (-(-size // step)) ** 2,
                                                      "shadow_pixels": int(np.count_nonzero(s < 1.0))}
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
