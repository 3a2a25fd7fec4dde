"""Render benchmark: samples per second and time to 2 % relative RMSE on a studio packshot scene.

The scene (``tests/transport_scenes.py::product_scene``): a glossy red dielectric sphere and a
gold metal sphere with a green card on a white floor-and-wall backdrop, lit by a key and a fill
soft box (emissive quads) and a dim uniform environment.  A high-sample reference is rendered in
the same run; each trial render's relative RMSE is
``sqrt(mean((x - ref)^2) - mean(var_ref)) / mean(ref)`` (the reference's own noise, estimated by
its film variance, is subtracted).  The spp needed for 2 % comes from a log-log fit of the
trials (RMSE = c spp^slope); for the full integrator the 2 % point lies inside the trial range
(an interpolation), for the plain path tracer ("baseline") it is an extrapolation.  Its time
follows from the measured samples per second.

Prints ONE JSON line (about a minute on two cores).
``python tests/benchmarks/bench_render.py [--size 32] [--ref-spp 16384]``;
``--image out.png --image-size 1024 --image-spp 256`` also writes a large render to look at.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from transport_scenes import product_scene  # noqa: E402

from variantshot.settings import RenderSettings  # noqa: E402
from variantshot.transport.environment import make_environment  # noqa: E402
from variantshot.transport.integrator import render  # noqa: E402


def rel_rmse(film, ref) -> float:
    mse = float(np.mean((film.radiance - ref.radiance) ** 2) - np.mean(ref.variance))
    return math.sqrt(max(mse, 0.0)) / float(np.mean(ref.radiance))


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=32)
    ap.add_argument("--ref-spp", type=int, default=16384)
    ap.add_argument("--threads", type=int, default=None)
    ap.add_argument("--image", type=Path, default=None)
    ap.add_argument("--image-size", type=int, default=1024)
    ap.add_argument("--image-spp", type=int, default=256)
    args = ap.parse_args(argv)

    scene, cam = product_scene()
    env = make_environment(0.05)
    size = args.size

    def run(spp, seed, mode="full", w=size):
        t0 = time.perf_counter()
        film = render(scene, RenderSettings(width=w, height=w, spp=spp, seed=seed, mode=mode, threads=args.threads,
                                            wave_spp=max(8, spp // 8)), env=env, camera=cam)
        return film, time.perf_counter() - t0

    t0 = time.perf_counter()
    run(1, 0, w=4)  # compile or load the cached kernels
    warmup_s = time.perf_counter() - t0
    ref, ref_s = run(args.ref_spp, 12345)
    result = {
        "bench": "render",
        "scene": "product-on-backdrop",
        "triangles": scene.n_triangles,
        "size": size,
        "threads": args.threads,
        "warmup_s": round(warmup_s, 3),
        "ref_spp": args.ref_spp,
        "ref_s": round(ref_s, 3),
    }
    trials = {"full": [64, 256, 1024, 4096], "baseline": [64, 256, 1024]}
    for mode, spp_list in trials.items():
        spps, errs, secs = [], [], []
        for k, spp in enumerate(spp_list):
            film, s = run(spp, 100 + k, mode)
            spps.append(spp)
            errs.append(rel_rmse(film, ref))
            secs.append(s)
        samples = sum(spps) * size * size
        sps = samples / sum(secs)
        slope, intercept = np.polyfit(np.log(spps), np.log(errs), 1)
        spp_2pct = float(np.exp((math.log(0.02) - intercept) / slope))
        result[mode] = {
            "samples_per_s": round(sps, 1),
            "rel_rmse": {str(n): round(e, 5) for n, e in zip(spps, errs)},
            "slope": round(float(slope), 3),
            "spp_to_2pct": round(spp_2pct, 1),
            "spp_to_2pct_is": "interpolated" if spps[0] <= spp_2pct <= spps[-1] else "extrapolated",
            "seconds_to_2pct": round(spp_2pct * size * size / sps, 3),
        }
    if args.image is not None:
        from variantshot.imaging.files import write_image

        film, s = run(args.image_spp, 7, w=args.image_size)
        write_image(args.image, film.radiance)
        result["image"] = {"path": str(args.image), "size": args.image_size, "spp": args.image_spp,
                           "seconds": round(s, 2)}
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
