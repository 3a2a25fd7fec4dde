"""Benchmark: bytes per triangle of a scene and its BVH, and a large procedural scene rendered.

Builds a closed, bumpy torus-knot tube (``_scenes.knot_mesh``) of ``--triangles`` triangles
(default 5 M) as a :class:`~variantshot.geometry.scene.Scene` with normals, builds its BVH, and
reports the bytes of every Scene array and of every BVH array per triangle, then renders it at
``--size`` (small) in a uniform environment and reports the peak resident set size of the
process (``resource.getrusage``, Linux KiB).  Prints ONE JSON line.  The machine has 24 GiB.

    python tests/benchmarks/bench_memory.py [--triangles 5000000] [--size 64] [--spp 4]
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # this checkout's package, not an installed one

from _scenes import knot_mesh  # noqa: E402


def _rss_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser()
    ap.add_argument("--triangles", type=int, default=5_000_000)
    ap.add_argument("--size", type=int, default=64)
    ap.add_argument("--spp", type=int, default=4)
    ap.add_argument("--threads", type=int, default=2)
    args = ap.parse_args(argv)

    from variantshot.geometry.bvh import build_bvh
    from variantshot.geometry.scene import Camera, Material, make_scene, vertex_normals
    from variantshot.settings import RenderSettings
    from variantshot.transport.environment import make_environment
    from variantshot.transport.integrator import render

    n_v = 200
    n_u = max(3, math.ceil(args.triangles / (2 * n_v)))
    t0 = time.perf_counter()
    pos, tris = knot_mesh(n_u=n_u, n_v=n_v)
    normals = vertex_normals(pos, tris)
    scene = make_scene(pos, tris, normals=normals,
                       materials=[Material(name="grey", base_colour_factor=(0.5, 0.5, 0.5, 1.0), metallic_factor=0.0)],
                       source="knot")
    del pos, normals
    build_scene_s = time.perf_counter() - t0
    rss_scene = _rss_mib()
    t0 = time.perf_counter()
    bvh = build_bvh(scene.positions, scene.triangles)
    build_bvh_s = time.perf_counter() - t0
    n_tri = int(scene.n_triangles)
    scene_arrays = {k: int(v.nbytes) for k, v in vars(scene).items() if isinstance(v, np.ndarray)}
    bvh_arrays = {k: int(v.nbytes) for k, v in bvh._asdict().items() if isinstance(v, np.ndarray)}
    m = np.eye(4)
    m[:3, 3] = (0.0, 0.0, 9.0)
    cam = Camera(name="front", kind="perspective", world_from_camera=m, yfov_rad=0.8)
    t0 = time.perf_counter()
    film = render(scene, RenderSettings(width=args.size, height=args.size, spp=args.spp, threads=args.threads,
                                        max_depth=4), env=make_environment(1.0), camera=cam, bvh=bvh)
    render_s = time.perf_counter() - t0
    result = {
        "bench": "memory", "triangles": n_tri, "vertices": int(scene.positions.shape[0]),
        "scene_bytes_per_triangle": round(sum(scene_arrays.values()) / n_tri, 1),
        "bvh_bytes_per_triangle": round(sum(bvh_arrays.values()) / n_tri, 1),
        "total_bytes_per_triangle": round((sum(scene_arrays.values()) + sum(bvh_arrays.values())) / n_tri, 1),
        "scene_arrays_mib": {k: round(v / 2**20, 1) for k, v in scene_arrays.items()},
        "bvh_arrays_mib": {k: round(v / 2**20, 1) for k, v in bvh_arrays.items()},
        "build_scene_s": round(build_scene_s, 2), "build_bvh_s": round(build_bvh_s, 2),
        "render": {"size": args.size, "spp": args.spp, "seconds": round(render_s, 2),
                   "coverage": round(float(film.alpha.mean()), 3)},
        "peak_rss_after_scene_mib": round(rss_scene, 1),
        "peak_rss_mib": round(_rss_mib(), 1),
        "fits_24_gib": _rss_mib() < 24 * 1024,
    }
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
