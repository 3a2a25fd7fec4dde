"""Ray throughput of the BVH against Embree (through embreex) on the same rays; one JSON line.

Usage::

    python tests/benchmarks/bench_rays.py [--quick] [--repeats N]

Figures (million rays per second, best of N interleaved repeats, because the machine is
shared): closest hit for coherent camera rays and incoherent cosine-bounce rays, and any hit
(shadow query) for the bounce rays, on (1) a ~200k-triangle bumpy torus-knot tube and (2) a
product-on-a-backdrop scene; ours on 1 thread and on all threads, embreex on the same rays;
``ratio`` = ours / embreex.  Build time is reported in seconds per million triangles (wall).
One-thread figures are timed with the calling thread's CPU time (see ``CPU`` below).

``embreex_batch_path`` times the batch API as it would be if backed by embreex: the same
rays through ``scene.run`` plus the conversion of its output to :class:`Hits` (closest) or a
bool array (any hit), on one thread; ``ratio_ours_vs_embreex_batch`` = ours / that.  The BVH's
node size and mean children per node (``fill``) are reported beside the node count.

embreex's ``run`` traces with one serial ``rtcIntersect1`` loop, so "all threads" for embreex is
its one thread.  That claim is checked, not assumed: a child process pinned to one CPU with
``os.sched_setaffinity`` times embreex again (``embreex_pinned_1cpu``).
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

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # this checkout's package, not an installed one

import _scenes  # noqa: E402


def _embree_scene(positions, triangles):
    from embreex import rtcore_scene as rtcs
    from embreex.mesh_construction import TriangleMesh

    t0 = time.perf_counter()
    scene = rtcs.EmbreeScene()
    TriangleMesh(scene, positions[triangles])
    scene.run(np.zeros((1, 3), np.float32), np.ones((1, 3), np.float32))  # commits the build
    return scene, time.perf_counter() - t0


def _embree_batch_closest(scene, o, d):
    """The closest-hit batch API's result computed with embreex (for the choice in DEVELOPERS.md)."""
    from variantshot.geometry.bvh import Hits

    r = scene.run(o, d, output=1)
    hit = r["primID"] >= 0
    return Hits(np.where(hit, r["tfar"], np.float32(np.inf)).astype(np.float32),
                np.where(hit, r["primID"], -1).astype(np.int32),
                np.where(hit, r["u"], 0).astype(np.float32), np.where(hit, r["v"], 0).astype(np.float32))


def _embree_batch_any(scene, o, d):
    return scene.run(o, d, query="OCCLUDED") >= 0


def _best(fn, repeats, clock=time.perf_counter):
    best = np.inf
    for _ in range(repeats):
        t0 = clock()
        fn()
        best = min(best, clock() - t0)
    return best


# One-thread figures use the calling thread's CPU time: numba runs a 1-thread parallel loop in
# the calling thread and embreex traces in it, and CPU time does not count the time another
# process held the core (the machine is shared).  All-thread figures are wall time, for both,
# so they are only meaningful when the load average printed beside them is below the core count.
CPU = time.thread_time


def _pinned_child(path: str, repeats: int) -> None:
    """Child mode: time embreex on saved rays with this process pinned to one CPU."""
    os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})
    data = np.load(path)
    scene, _ = _embree_scene(data["positions"], data["triangles"])
    out = {}
    for key in ("camera", "bounce"):
        o, d = data[f"{key}_o"], data[f"{key}_d"]
        out[key] = len(o) / _best(lambda: scene.run(o, d, output=1), repeats) / 1e6  # wall
    print(json.dumps(out))


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="small images, fewer repeats")
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--pinned-child", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.pinned_child:
        _pinned_child(args.pinned_child, args.repeats)
        return

    import numba

    from variantshot.geometry.bvh import build_bvh, intersect, occluded
    from variantshot.geometry.bvh_kernels import WIDTH

    n_all = numba.config.NUMBA_NUM_THREADS
    size = 256 if args.quick else 512
    repeats = 3 if args.quick else args.repeats
    # warm the JIT (compile or load from cache) outside every timing
    wp, wt = _scenes.knot_mesh(20, 8)
    wb = build_bvh(wp, wt)
    intersect(wb, wp[:4], wp[4:8])
    occluded(wb, wp[:4], wp[4:8])

    knot_p, knot_t = _scenes.knot_mesh()
    prod_p, prod_t, prod_cam = _scenes.product_scene()
    scenes = {
        "knot_200k": (knot_p, knot_t, _scenes.KNOT_CAMERA),
        "product_backdrop": (prod_p, prod_t, prod_cam),
    }
    result = {
        "benchmark": "bench_rays",
        "unit": "Mrays/s (best of %d); build s per million triangles" % repeats,
        "clock": "1-thread: thread CPU time; all threads and builds: wall time",
        "threads_all": n_all,
        "load_average_at_start": os.getloadavg()[0],
        "image": [size, size],
        "scenes": {},
    }
    for name, (pos, tris, cam) in scenes.items():
        numba.set_num_threads(n_all)
        ours_build = np.inf
        emb_build = np.inf
        for _ in range(3):  # interleaved builds
            b = build_bvh(pos, tris)
            ours_build = min(ours_build, b.build_seconds)
            scene, seconds = _embree_scene(pos, tris)
            emb_build = min(emb_build, seconds)
        o_cam, d_cam = _scenes.camera_rays(cam, size, size)
        hits = intersect(b, o_cam, d_cam)
        o_b, d_b = _scenes.bounce_rays(pos, tris, o_cam, d_cam, hits.t, hits.tri)
        rays = {"camera": (o_cam, d_cam), "bounce": (o_b, d_b)}
        entry = {
            "triangles": int(len(tris)),
            "bvh_nodes": int(len(b.nodes_i) // WIDTH),
            "node_bytes": int((b.nodes_f.nbytes + b.nodes_i.nbytes) // (len(b.nodes_i) // WIDTH)),
            "fill": float(np.mean(b.nodes_i.reshape(-1, WIDTH) != -1) * WIDTH),
            "build_s_per_mtri": {
                "ours": ours_build / len(tris) * 1e6,
                "embreex": emb_build / len(tris) * 1e6,
            },
        }
        for key, (o, d) in rays.items():
            best = {"ours_1t": np.inf, "ours_all": np.inf, "embreex_1t": np.inf, "embreex_all": np.inf,
                    "embreex_batch_path": np.inf}
            for _ in range(repeats):  # interleave the contenders against machine noise
                numba.set_num_threads(1)
                best["ours_1t"] = min(best["ours_1t"], _best(lambda: intersect(b, o, d), 1, CPU))
                best["embreex_batch_path"] = min(best["embreex_batch_path"],
                                                 _best(lambda: _embree_batch_closest(scene, o, d), 1, CPU))
                best["embreex_1t"] = min(best["embreex_1t"], _best(lambda: scene.run(o, d, output=1), 1, CPU))
                best["embreex_all"] = min(best["embreex_all"], _best(lambda: scene.run(o, d, output=1), 1))
                numba.set_num_threads(n_all)
                best["ours_all"] = min(best["ours_all"], _best(lambda: intersect(b, o, d), 1))
            ref = scene.run(o, d, output=1)
            h = intersect(b, o, d)
            n = len(o)
            mr = {k: n / v / 1e6 for k, v in best.items()}
            entry[key] = {
                "rays": n,
                "hit_fraction": float(np.mean(h.tri >= 0)),
                "agreement_with_embreex": float(np.mean((h.tri >= 0) == (ref["primID"] >= 0))),
                "ours_1t": mr["ours_1t"],
                "embreex_1t": mr["embreex_1t"],
                "ratio_1t": mr["ours_1t"] / mr["embreex_1t"],
                "ours_all": mr["ours_all"],
                "embreex_all": mr["embreex_all"],
                "ratio_all": mr["ours_all"] / mr["embreex_all"],
                "embreex_batch_path": mr["embreex_batch_path"],
                "ratio_ours_vs_embreex_batch": mr["ours_1t"] / mr["embreex_batch_path"],
            }
        # shadow query (any hit) on the bounce rays, unbounded
        o, d = rays["bounce"]
        best = {"ours_1t": np.inf, "ours_all": np.inf, "embreex_1t": np.inf, "embreex_all": np.inf,
                "embreex_batch_path": np.inf}
        for _ in range(repeats):
            numba.set_num_threads(1)
            best["ours_1t"] = min(best["ours_1t"], _best(lambda: occluded(b, o, d), 1, CPU))
            best["embreex_batch_path"] = min(best["embreex_batch_path"],
                                             _best(lambda: _embree_batch_any(scene, o, d), 1, CPU))
            best["embreex_1t"] = min(best["embreex_1t"], _best(lambda: scene.run(o, d, query="OCCLUDED"), 1, CPU))
            best["embreex_all"] = min(best["embreex_all"], _best(lambda: scene.run(o, d, query="OCCLUDED"), 1))
            numba.set_num_threads(n_all)
            best["ours_all"] = min(best["ours_all"], _best(lambda: occluded(b, o, d), 1))
        mr = {k: len(o) / v / 1e6 for k, v in best.items()}
        ref_occ = scene.run(o, d, query="OCCLUDED") >= 0
        entry["bounce_any_hit"] = {
            "agreement_with_embreex": float(np.mean(occluded(b, o, d) == ref_occ)),
            "ours_1t": mr["ours_1t"],
            "embreex_1t": mr["embreex_1t"],
            "ratio_1t": mr["ours_1t"] / mr["embreex_1t"],
            "ours_all": mr["ours_all"],
            "embreex_all": mr["embreex_all"],
            "ratio_all": mr["ours_all"] / mr["embreex_all"],
            "embreex_batch_path": mr["embreex_batch_path"],
            "ratio_ours_vs_embreex_batch": mr["ours_1t"] / mr["embreex_batch_path"],
        }
        # embreex pinned to one CPU in a child process, to show it runs on one thread
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "rays.npz")
            np.savez(path, positions=pos, triangles=tris, camera_o=o_cam, camera_d=d_cam,
                     bounce_o=rays["bounce"][0], bounce_d=rays["bounce"][1])
            child = subprocess.run(
                [sys.executable, __file__, "--pinned-child", path, "--repeats", str(repeats)],
                capture_output=True, text=True, check=True,
            )
            entry["embreex_pinned_1cpu"] = json.loads(child.stdout.strip().splitlines()[-1])
        result["scenes"][name] = entry
    numba.set_num_threads(n_all)
    result["load_average_at_end"] = os.getloadavg()[0]
    print(json.dumps(result, separators=(",", ":")))


if __name__ == "__main__":
    main()
