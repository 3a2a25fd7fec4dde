"""Bounding volume hierarchy over a triangle mesh: build it, and intersect batches of rays with it.

This module validates and packs; the work happens in :mod:`variantshot.geometry.bvh_kernels`,
whose docstring documents the array layout.  Path-tracing kernels call
``bvh_kernels.closest_hit`` / ``bvh_kernels.any_hit`` directly with the first four fields of
:class:`BVH`.
"""

from __future__ import annotations

import time
from contextlib import contextmanager
from typing import NamedTuple

import numpy as np

# Split parameters of the binned SAH build (see bvh_kernels.build_binary).  A leaf holds up to 7
# triangles (the leaf encoding's limit) in 1 or 2 packs of 4, each one vector test; the SAH
# counts triangles in whole packs, so leaves come out mostly full (measured: 96 % of the pack
# lanes used against 80 % with 4-triangle leaves, 12 fewer BVH bytes per triangle).
MAX_LEAF = 7
N_BINS = 32
TRAVERSAL_COST = 3.0  # one 8-wide node visit, in triangle tests (measured best of 0.5..5)


class BVH(NamedTuple):
    """A built BVH: packed arrays only, so it pickles and passes straight into kernels.

    Attributes
    ----------
    nodes_f : (48 * n_nodes,) float32 ndarray
        Child boxes of the 8-wide nodes (layout in ``bvh_kernels``).
    nodes_i : (8 * n_nodes,) int32 ndarray
        Child references (inner node index, or an encoded leaf range).
    tris_f : (36 * n_packs,) float32 ndarray
        Triangle vertices in packs of 4 (structure-of-arrays, layout in ``bvh_kernels``).
    tri_ids : (4 * n_packs,) int32 ndarray
        Original triangle index of each pack lane (short packs repeat their last triangle).
    bounds : (2, 3) float32 ndarray
        World box [min, max] of all triangles (inf / -inf when there are none).
    build_seconds : float
        Wall time of the build (for benchmarks and logs).
    """

    nodes_f: np.ndarray
    nodes_i: np.ndarray
    tris_f: np.ndarray
    tri_ids: np.ndarray
    bounds: np.ndarray
    build_seconds: float


class Hits(NamedTuple):
    """Closest hits of a batch of rays.

    Attributes
    ----------
    t : (N,) float32 ndarray
        Ray parameter of the hit (units of the direction's length), inf on a miss.
    tri : (N,) int32 ndarray
        Original triangle index, -1 on a miss.
    b1, b2 : (N,) float32 ndarray
        Barycentric weights of the triangle's vertices 1 and 2: p = (1-b1-b2) v0 + b1 v1 + b2 v2.
    """

    t: np.ndarray
    tri: np.ndarray
    b1: np.ndarray
    b2: np.ndarray


def _float_array(name: str, value, shape_tail: tuple[int, ...]) -> np.ndarray:
    arr = np.asarray(value)
    if not np.issubdtype(arr.dtype, np.floating):
        raise TypeError(f"{name} must be a floating-point array, got dtype {arr.dtype}")
    if arr.ndim != 1 + len(shape_tail) or tuple(arr.shape[1:]) != shape_tail:
        raise ValueError(f"{name} must have shape (N, {', '.join(map(str, shape_tail))}), got {arr.shape}")
    return np.ascontiguousarray(arr, dtype=np.float32)


def build_bvh(positions, triangles) -> BVH:
    """Build an 8-wide BVH: binned surface-area-heuristic binary tree, collapsed to 8-wide nodes.

    Parameters
    ----------
    positions : (V, 3) float ndarray
        Vertex positions in world units (stored as float32).
    triangles : (T, 3) integer ndarray
        Vertex indices of each triangle.  T = 0 gives a BVH every ray misses.

    Returns
    -------
    BVH

    Raises
    ------
    TypeError
        When positions are not floating point or triangles not integer.
    ValueError
        On wrong shapes, vertex indices out of range, or non-finite positions used by a
        triangle.

    References
    ----------
    Wald (2007), "On fast construction of SAH-based bounding volume hierarchies" (binning);
    MacDonald & Booth (1990) (the surface area heuristic); Ylitie, Karras & Laine (2017) (the
    SAH-optimal collapse to wide nodes, ``bvh_kernels.plan_wide``).
    """
    from . import bvh_kernels as bk

    t_start = time.perf_counter()
    pos = _float_array("positions", positions, (3,))
    tris = np.asarray(triangles)
    if tris.size == 0:
        tris = tris.reshape(0, 3)
    if not np.issubdtype(tris.dtype, np.integer):
        raise TypeError(f"triangles must be an integer array, got dtype {tris.dtype}")
    if tris.ndim != 2 or tris.shape[1] != 3:
        raise ValueError(f"triangles must have shape (T, 3), got {tris.shape}")
    if tris.shape[0] and (tris.min() < 0 or tris.max() >= pos.shape[0]):
        raise ValueError(
            f"triangles index vertices 0..{pos.shape[0] - 1}, "
            f"got indices {int(tris.min())}..{int(tris.max())}"
        )
    if tris.shape[0] >= (1 << 28):
        raise ValueError(f"at most {(1 << 28) - 1} triangles per BVH, got {tris.shape[0]}")
    tris = np.ascontiguousarray(tris, dtype=np.int32)
    corners = pos[tris]  # (T, 3, 3)
    if tris.shape[0] and not np.isfinite(corners).all():
        bad = int(np.flatnonzero(~np.isfinite(corners).all(axis=(1, 2)))[0])
        raise ValueError(f"triangle {bad} uses a non-finite vertex position")
    tri_lo = np.ascontiguousarray(corners.min(axis=1))
    tri_hi = np.ascontiguousarray(corners.max(axis=1))
    centroid = np.ascontiguousarray(0.5 * (tri_lo + tri_hi), dtype=np.float32)
    order, lo, hi, left, start, count = bk.build_binary(
        tri_lo, tri_hi, centroid, MAX_LEAF, N_BINS, TRAVERSAL_COST
    )
    # which binary nodes become wide nodes, leaves or slots: SAH-optimal over the binary tree
    p_left, p_start, p_count, split, wide_split = bk.plan_wide(lo, hi, left, start, count,
                                                               TRAVERSAL_COST, MAX_LEAF)
    nodes_f, nodes_i, pack_start, pack_count = bk.collapse_wide(lo, hi, left, p_left, p_start, p_count,
                                                                split, wide_split)
    tris_f, tri_ids = bk.gather_triangles(pos, tris, order, pack_start, pack_count)
    if tris.shape[0]:
        bounds = np.stack([tri_lo.min(axis=0), tri_hi.max(axis=0)]).astype(np.float32)
    else:
        bounds = np.array([[np.inf] * 3, [-np.inf] * 3], dtype=np.float32)
    return BVH(nodes_f, nodes_i, tris_f, tri_ids, bounds,
               time.perf_counter() - t_start)


@contextmanager
def _dynamic_blocks(blocks_per_grab: int = 4):
    """Hand parallel ray blocks out dynamically: one ray may cost 100x another (sky vs. mesh).

    (Set from Python: numba cannot cache a kernel that sets its own chunk size.)
    """
    import numba

    old = numba.set_parallel_chunksize(blocks_per_grab)
    try:
        yield
    finally:
        numba.set_parallel_chunksize(old)


def _rays(origins, directions, tmin, tmax):
    o = _float_array("origins", origins, (3,))
    d = _float_array("directions", directions, (3,))
    if o.shape != d.shape:
        raise ValueError(f"origins {o.shape} and directions {d.shape} must have the same shape")
    n = o.shape[0]
    lo = np.ascontiguousarray(np.broadcast_to(np.asarray(tmin, dtype=np.float32), (n,)))
    hi = np.ascontiguousarray(np.broadcast_to(np.asarray(tmax, dtype=np.float32), (n,)))
    return o, d, lo, hi


def intersect(bvh: BVH, origins, directions, tmin=0.0, tmax=np.inf) -> Hits:
    """Closest hit of every ray (both triangle faces count); parallel over rays.

    Parameters
    ----------
    bvh : BVH
    origins, directions : (N, 3) float ndarray
        Ray origins and directions (directions need not be unit length).
    tmin, tmax : float or (N,) float ndarray
        Open interval of accepted ray parameters, in units of the direction's length.

    Returns
    -------
    Hits
        ``t`` float32 (inf on a miss), ``tri`` int32 (-1 on a miss), ``b1``, ``b2`` float32.
    """
    from . import bvh_kernels as bk

    o, d, lo, hi = _rays(origins, directions, tmin, tmax)
    n = o.shape[0]
    t = np.empty(n, np.float32)
    tri = np.empty(n, np.int32)
    b1 = np.empty(n, np.float32)
    b2 = np.empty(n, np.float32)
    with _dynamic_blocks():
        bk.intersect_closest(bvh.nodes_f, bvh.nodes_i, bvh.tris_f, bvh.tri_ids, o, d, lo, hi,
                             t, tri, b1, b2)
    return Hits(t, tri, b1, b2)


def occluded(bvh: BVH, origins, directions, tmin=0.0, tmax=np.inf) -> np.ndarray:
    """Whether each ray hits anything with tmin < t < tmax (shadow rays); parallel over rays.

    Parameters are those of :func:`intersect`.

    Returns
    -------
    (N,) bool ndarray
    """
    from . import bvh_kernels as bk

    o, d, lo, hi = _rays(origins, directions, tmin, tmax)
    out = np.empty(o.shape[0], np.bool_)
    with _dynamic_blocks():
        bk.intersect_any(bvh.nodes_f, bvh.nodes_i, bvh.tris_f, bvh.tri_ids, o, d, lo, hi, out)
    return out
