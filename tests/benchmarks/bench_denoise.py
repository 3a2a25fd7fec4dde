"""Benchmark: OIDN denoising speed and effect; prints ONE JSON line.

Run: ``python tests/benchmarks/bench_denoise.py`` (about 15 s on two cores).  asv-style:
``setup()`` builds the inputs and warms the devices, each ``time_*()`` returns seconds per run.

Figures:

* ``s_per_mpix_{1,2}_threads``: seconds per megapixel of :func:`denoise` (albedo + normal,
  quality "high", local-mean correction on) on a 1024 x 1024 image, best of 3 (wall clock;
  ``load_average_1min`` says how busy the machine was);
  ``s_per_mpix_correction``: the local-mean correction alone.
* ``rmse_reduction``: RMSE(noisy, clean) / RMSE(denoised, clean) on a synthetic image with hard
  colour edges, a normal crease and a shading ramp, gamma noise of relative size 0.5 (the same
  image as ``tests/unit/imaging/test_denoise.py``), with and without the auxiliary passes.
* ``drift_de2000``: on flat cards of seven colours at relative noise 0.3, the largest CIEDE2000
  between the denoised mean and the input's own mean, without (``raw``) and with
  (``corrected``) the local-mean correction.
"""

from __future__ import annotations

import json
import os
import time

import numpy as np

from variantshot.imaging import denoise as dn
from variantshot.imaging.colour import delta_e_2000, lab_from_srgb8, srgb_encode

STATE: dict = {}
COLOURS = [(0.18, 0.18, 0.18), (0.8, 0.05, 0.05), (0.02, 0.3, 0.6), (0.05, 0.6, 0.02),
           (0.5, 0.4, 0.1), (0.9, 0.9, 0.9), (0.01, 0.01, 0.01)]


def _noisy(rng, clean, rel):
    k = 1.0 / rel**2
    return rng.gamma(k, 1.0 / k, clean.shape) * clean


def _edge_image(size):
    yy, xx = np.mgrid[0:size, 0:size] / size
    albedo = np.empty((size, size, 3))
    albedo[:] = (0.7, 0.7, 0.7)
    albedo[(xx < 0.5) & (yy < 0.5)] = (0.8, 0.1, 0.1)
    albedo[(xx >= 0.5) & (yy >= 0.5)] = (0.1, 0.2, 0.7)
    albedo[np.hypot(xx - 0.5, yy - 0.5) < 0.2] = (0.9, 0.8, 0.2)
    normal = np.zeros((size, size, 3))
    normal[..., 2] = 1.0
    normal[xx >= 0.5] = (0.6, 0.0, 0.8)
    return albedo * (0.4 + 0.6 * yy[..., None]), albedo, normal


def setup(size_px: int = 1024):
    rng = np.random.default_rng(0)
    clean, albedo, normal = _edge_image(size_px)
    noisy = _noisy(rng, clean, 0.5)
    small = _edge_image(128)
    STATE.update(clean=clean, albedo=albedo, normal=normal, noisy=noisy, size_px=size_px,
                 small=small, small_noisy=_noisy(np.random.default_rng(42), small[0], 0.5))
    for threads in (1, 2):  # create the devices and load the weights outside the timings
        dn.denoise(noisy[:64, :64], albedo=albedo[:64, :64], normal=normal[:64, :64], threads=threads)


def _best(fn, repeat=3) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def time_denoise(threads: int) -> float:
    s = STATE
    return _best(lambda: dn.denoise(s["noisy"], albedo=s["albedo"], normal=s["normal"], threads=threads))


def time_correction() -> float:
    s = STATE
    return _best(lambda: dn.restore_local_means(s["noisy"], s["clean"]))


def rmse_reduction(aux: bool) -> float:
    clean, albedo, normal = STATE["small"]
    noisy = STATE["small_noisy"]
    out = dn.denoise(noisy, threads=2, **(dict(albedo=albedo, normal=normal) if aux else {}))
    return float(np.sqrt(np.mean((noisy - clean) ** 2)) / np.sqrt(np.mean((out - clean) ** 2)))


def drift(preserve: bool, rel: float = 0.3, size: int = 128) -> float:
    def lab(a):
        m = a[8:-8, 8:-8].reshape(-1, 3).mean(axis=0)
        return lab_from_srgb8(srgb_encode(np.clip(m, 0.0, 1.0)) * 255.0)

    rng = np.random.default_rng(2005)
    worst = 0.0
    normal = np.zeros((size, size, 3))
    normal[..., 2] = 1.0
    for c in COLOURS:
        clean = np.broadcast_to(np.asarray(c), (size, size, 3)).copy()
        noisy = _noisy(rng, clean, rel)
        out = dn.denoise(noisy, albedo=clean, normal=normal, threads=2, preserve_local_mean=preserve)
        worst = max(worst, float(delta_e_2000(lab(out), lab(noisy))))
    return worst


def main() -> None:
    setup()
    mpix = STATE["size_px"] ** 2 / 1e6
    result = {
        "bench": "denoise",
        "image_px": [STATE["size_px"], STATE["size_px"]],
        "s_per_mpix_1_threads": round(time_denoise(1) / mpix, 3),
        "s_per_mpix_2_threads": round(time_denoise(2) / mpix, 3),
        "s_per_mpix_correction": round(time_correction() / mpix, 3),
        "rmse_reduction": round(rmse_reduction(True), 2),
        "rmse_reduction_no_aux": round(rmse_reduction(False), 2),
        "drift_de2000": {"raw": round(drift(False), 3), "corrected": round(drift(True), 3)},
        "oidn": dn.is_available(),
        "cpu_count": os.cpu_count(),
        "load_average_1min": round(os.getloadavg()[0], 2),
    }
    print(json.dumps(result))


if __name__ == "__main__":
    main()
