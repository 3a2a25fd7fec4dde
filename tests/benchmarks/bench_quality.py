"""Benchmark: time to 2 % relative RMSE on the demo's hero shot, plain path tracing vs the full pipeline.

The hero shot is the first shot of the bundled demo catalog (its first SKU, first angle) on
white under its rig, built exactly as the batch builds it: the batch runner renders it once at
a tiny size while this script records the scene, environment, camera and sample mask of the
shot render, then re-renders that scene at ``--size`` here.

* (a) ``baseline``: ``mode="baseline"`` (BSDF sampling only: no next-event estimation, no MIS),
  fixed spp, no adaptivity, no denoiser;
* (b) ``full``: NEE + MIS, adaptive sampling (``noise_target``) and the denoiser
  (``imaging.denoise.denoise_film``).

Both sample only the batch's sample mask (the tiles near the product; the white composite
never shows the rest) and are scored on the product's pixels (coverage > 0) against a
high-sample full-mode reference of the same run:
``rel_rmse = sqrt(mean((x - ref)^2) - mean(var_ref)) / mean(ref)`` (the reference's own noise,
from its film variance, is subtracted).

At 1024² a reference over every product pixel would take hours on two cores, so the reference
and the baseline are rendered on a **lattice subset** of the sampled 8 x 8 tiles (every
``--lattice``-th tile across and down; 1 = all) and every mode is scored on the product pixels of
that subset.  The full pipeline always renders the whole shot (adaptive sampling and the
denoiser need their neighbourhoods); a baseline pixel's error does not depend on its neighbours,
so its time is the subset's time scaled by (sampled pixels / subset pixels), stated in the output.  For each mode the trial errors are fitted against
seconds on a log-log line and the time at 2 % read off (interpolated when 2 % lies inside the
trials, else extrapolated: said in the output); trials whose error is below a fifth of the
reference's own relative noise are reported but not fitted (not measurable).  Prints ONE JSON line.

    python tests/benchmarks/bench_quality.py [--size 1024] [--lattice 4] [--ref-spp 2048] [--threads 2]

Goal: (a)/(b) >= 5.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
import os
import tempfile
import time
from pathlib import Path

import numpy as np


def _capture_hero(threads):
    """Scene, env, camera and sample mask of the demo's first shot, as the batch renders it."""
    import variantshot.transport.integrator as integrator
    from variantshot.batch.quality import quality_preset
    from variantshot.batch.runner import render_batch
    from variantshot.cli.demo import demo_catalog

    catalog, templates = demo_catalog()
    first = catalog.read_text().splitlines()[1].split(",")[0]
    captured = {}
    original = integrator.render

    def spy(scene, settings, **kw):
        if kw.get("env") is not None and "sample_mask" in kw and "shot" not in captured:
            captured["shot"] = (scene, kw["env"], kw["camera"])
        if kw.get("env") is None and "bvh" in kw and "product" not in captured:
            captured["product"] = scene  # the batch's coverage pass renders the product alone
        return original(scene, settings, **kw)

    integrator.render = spy
    try:
        with tempfile.TemporaryDirectory() as tmp:
            q = dataclasses.replace(quality_preset("draft"), long_side_px=32, spp=2, min_spp=2)
            render_batch(catalog, Path(tmp) / "out", quality=q, only=[f"{first}--*"], threads=threads,
                         templates_dir=templates, sheet_formats=())
    finally:
        integrator.render = original
    scene, env, camera = captured["shot"]
    return first, scene, captured["product"], env, camera


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=1024)
    ap.add_argument("--lattice", type=int, default=4)
    ap.add_argument("--ref-spp", type=int, default=2048)
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--baseline-spp", default="16,64,256")
    ap.add_argument("--full-targets", default="0.6,0.3,0.15")
    ap.add_argument("--max-depth", type=int, default=12)
    args = ap.parse_args(argv)
    os.environ.setdefault("NUMBA_NUM_THREADS", str(args.threads))

    from variantshot.batch.runner import _sample_mask
    from variantshot.imaging import denoise
    from variantshot.settings import RenderSettings
    from variantshot.transport.integrator import render

    sku, scene, product, env, camera = _capture_hero(args.threads)
    size = args.size
    base = RenderSettings(width=size, height=size, spp=1, seed=0, max_depth=args.max_depth, threads=args.threads)
    t0 = time.perf_counter()
    product_alpha = render(product, dataclasses.replace(base, spp=16, max_depth=1), env=None, camera=camera).alpha
    cover_s = time.perf_counter() - t0
    mask = _sample_mask(product_alpha)  # the batch's rule
    k = max(1, args.lattice)
    yy, xx = np.indices(mask.shape)
    subset = mask & ((yy // 8) % k == 0) & ((xx // 8) % k == 0)
    subset_scale = float(mask.sum()) / float(subset.sum())
    score = (product_alpha > 0) & subset

    def run(settings, use_denoiser=False, sample_mask=subset):
        t = time.perf_counter()
        film = render(scene, settings, env=env, camera=camera, sample_mask=sample_mask)
        rgb = film.radiance
        if use_denoiser and denoise.is_available():
            rgb = denoise.denoise_film(film, threads=args.threads)
        return film, rgb, time.perf_counter() - t

    ref, _, ref_s = run(dataclasses.replace(base, spp=args.ref_spp, seed=12345, wave_spp=32))
    ref_mean = float(ref.radiance[score].mean())
    ref_var = float(ref.variance[score].mean())

    ref_rel_noise = math.sqrt(ref_var) / ref_mean  # errors well below this are not measurable

    def rel_rmse(rgb):
        mse = float(np.mean((rgb[score] - ref.radiance[score]) ** 2)) - ref_var
        return math.sqrt(max(mse, 0.0)) / ref_mean

    result = {"bench": "quality", "shot": f"{sku} (first demo shot, white, its rig)", "size": size,
              "threads": args.threads, "load_avg_1min": round(os.getloadavg()[0], 2),
              "triangles": int(scene.n_triangles), "sampled_fraction": round(float(mask.mean()), 3),
              "lattice": k, "subset_pixels": int(subset.sum()), "baseline_time_scale": round(subset_scale, 3),
              "scored_pixels": int(score.sum()), "ref_spp": args.ref_spp, "ref_s": round(ref_s, 1),
              "ref_rel_noise": round(ref_rel_noise, 5),
              "denoiser": bool(denoise.is_available()), "coverage_s": round(cover_s, 2)}
    trials = {
        "baseline": [(dataclasses.replace(base, spp=n, seed=100 + k, mode="baseline", wave_spp=16), False)
                     for k, n in enumerate(int(v) for v in args.baseline_spp.split(","))],
        "full": [(dataclasses.replace(base, spp=1024, seed=200 + k, noise_target=float(nt), adaptive_min_spp=8), True)
                 for k, nt in enumerate(args.full_targets.split(","))],
    }
    for mode, runs in trials.items():
        rows = []
        for settings, dn in runs:
            film, rgb, s = run(settings, dn, subset if mode == "baseline" else mask)
            if mode == "baseline":
                s *= subset_scale  # the whole shot's time at the subset's per-pixel cost
            rows.append({"spp": settings.spp if settings.noise_target is None else None,
                         "noise_target": settings.noise_target, "mean_spp": round(float(film.spp_map[subset].mean()), 1),
                         "seconds": round(s, 2), "rel_rmse": round(rel_rmse(rgb), 5)})
        for r in rows:
            r["measurable"] = r["rel_rmse"] > 0.2 * ref_rel_noise
        used = [r for r in rows if r["measurable"]] or rows
        secs = np.array([r["seconds"] for r in used])
        errs = np.array([max(r["rel_rmse"], 1e-6) for r in used])
        if len(used) >= 2:
            slope, intercept = np.polyfit(np.log(secs), np.log(errs), 1)
            t2 = float(np.exp((math.log(0.02) - intercept) / slope)) if slope < 0 else None
            inside = bool(errs.min() <= 0.02 <= errs.max())
            slope = round(float(slope), 3)
        else:
            slope, t2, inside = None, None, False
        result[mode] = {"trials": rows, "slope_err_vs_time": slope,
                        "seconds_to_2pct": None if t2 is None else round(t2, 2),
                        "seconds_to_2pct_is": "interpolated" if inside else "extrapolated"}
    a, b = result["baseline"]["seconds_to_2pct"], result["full"]["seconds_to_2pct"]
    result["ratio_baseline_over_full"] = round(a / b, 2) if a and b else None
    result["goal_ratio_ge_5"] = bool(result["ratio_baseline_over_full"] and result["ratio_baseline_over_full"] >= 5)
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
