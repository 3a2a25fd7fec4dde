"""Slow, obvious reference implementations that kernels are tested against."""

from __future__ import annotations

import numpy as np


# --------------------------------------------------------------------------------------------
# Ray / triangle (BVH reference)
# --------------------------------------------------------------------------------------------


def ray_triangles_moller_trumbore(origin, direction, v0, v1, v2, tmin=0.0, tmax=np.inf, clip=True):
    """All ray/triangle hits of one ray, Möller & Trumbore (1997), float64, both faces.

    Parameters
    ----------
    origin, direction : (3,) float
    v0, v1, v2 : (T, 3) float
        Triangle vertices.
    tmin, tmax : float
        Open interval of accepted t.
    clip : bool
        False: return the raw plane t and barycentrics of every triangle (no inside test).

    Returns
    -------
    t, b1, b2 : (T,) float64 ndarray
        t is inf where the ray misses the triangle (or t is outside (tmin, tmax)).
    """
    o = np.asarray(origin, np.float64)
    d = np.asarray(direction, np.float64)
    v0 = np.asarray(v0, np.float64)
    e1 = np.asarray(v1, np.float64) - v0
    e2 = np.asarray(v2, np.float64) - v0
    p = np.cross(d, e2)
    det = np.einsum("ij,ij->i", e1, p)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = 1.0 / det
        s = o - v0
        b1 = np.einsum("ij,ij->i", s, p) * inv
        q = np.cross(s, e1)
        b2 = (q @ d) * inv
        t = np.einsum("ij,ij->i", e2, q) * inv
    if not clip:
        return t, b1, b2
    with np.errstate(invalid="ignore"):
        ok = (det != 0.0) & (b1 >= 0.0) & (b2 >= 0.0) & (b1 + b2 <= 1.0) & (t > tmin) & (t < tmax)
    return np.where(ok, t, np.inf), b1, b2


def closest_hit_brute_force(positions, triangles, origins, directions, tmin=0.0, tmax=np.inf):
    """Closest hit of each ray by testing every triangle (float64 Möller–Trumbore).

    Returns
    -------
    t : (N,) float64 (inf on a miss), tri : (N,) int64 (-1 on a miss), b1, b2 : (N,) float64
    """
    pos = np.asarray(positions, np.float64)
    tris = np.asarray(triangles, np.int64).reshape(-1, 3)
    v0, v1, v2 = pos[tris[:, 0]], pos[tris[:, 1]], pos[tris[:, 2]]
    n = len(origins)
    t_out = np.full(n, np.inf)
    tri_out = np.full(n, -1, np.int64)
    b1_out = np.zeros(n)
    b2_out = np.zeros(n)
    lo = np.broadcast_to(np.asarray(tmin, np.float64), (n,))
    hi = np.broadcast_to(np.asarray(tmax, np.float64), (n,))
    for r in range(n):
        if len(tris) == 0:
            continue
        t, b1, b2 = ray_triangles_moller_trumbore(origins[r], directions[r], v0, v1, v2, lo[r], hi[r])
        k = int(np.argmin(t))
        if np.isfinite(t[k]):
            t_out[r], tri_out[r], b1_out[r], b2_out[r] = t[k], k, b1[k], b2[k]
    return t_out, tri_out, b1_out, b2_out
