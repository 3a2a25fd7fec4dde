"""Shadow-catcher kernel: the share of a rig's direct light that reaches points on the sweep.

:func:`light_ratio` is the per-point work of :func:`variantshot.geometry.rig.direct_light_ratio`
(one ``prange`` over the receiver points; see that function for the estimator).  Random numbers
are hashes of (point index, stratum, dimension, seed) (``sampling_kernels``), and point ``i``
writes only ``out[i]``, so the result is the same bit for bit on any thread count.
"""

from __future__ import annotations

from .. import _jit  # noqa: F401  (sets the cache folder before numba is imported)
from .._jit import KERNEL, PARALLEL, njit, prange

import math

import numpy as np

from ..transport.sampling_kernels import onb_from_normal, sample_state, uniform_from_state
from .bvh_kernels import any_hit


@njit(**KERNEL)
def visibility(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, tmax):
    """1 when the segment o + t d, 0 < t < tmax, misses the occluder, else 0."""
    if any_hit(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, 0.0, tmax):
        return 0.0
    return 1.0


@njit(**KERNEL)
def _receiver(points, normals, valid, i, j, ju, jv):
    """Receiver point and unit normal at grid position (i + jv, j + ju), |ju|, |jv| <= 1/2:
    bilinear between grid node (i, j) and its neighbours towards the offset (an axis whose
    neighbour is missing or off the sweep keeps the node's value)."""
    h = points.shape[0]
    w = points.shape[1]
    i = int(i)
    j = int(j)
    j1 = j + 1
    if ju < 0.0:
        j1 = j - 1
    i1 = i + 1
    if jv < 0.0:
        i1 = i - 1
    fu = abs(ju)
    fv = abs(jv)
    if j1 < 0 or j1 >= w or valid[i, j1] == 0:
        fu = 0.0
        j1 = j
    if i1 < 0 or i1 >= h or valid[i1, j] == 0:
        fv = 0.0
        i1 = i
    if valid[i1, j1] == 0:
        fu = 0.0
        fv = 0.0
        i1 = i
        j1 = j
    w00 = (1.0 - fu) * (1.0 - fv)
    w01 = fu * (1.0 - fv)
    w10 = (1.0 - fu) * fv
    w11 = fu * fv
    px = w00 * points[i, j, 0] + w01 * points[i, j1, 0] + w10 * points[i1, j, 0] + w11 * points[i1, j1, 0]
    py = w00 * points[i, j, 1] + w01 * points[i, j1, 1] + w10 * points[i1, j, 1] + w11 * points[i1, j1, 1]
    pz = w00 * points[i, j, 2] + w01 * points[i, j1, 2] + w10 * points[i1, j, 2] + w11 * points[i1, j1, 2]
    nx = w00 * normals[i, j, 0] + w01 * normals[i, j1, 0] + w10 * normals[i1, j, 0] + w11 * normals[i1, j1, 0]
    ny = w00 * normals[i, j, 1] + w01 * normals[i, j1, 1] + w10 * normals[i1, j, 1] + w11 * normals[i1, j1, 1]
    nz = w00 * normals[i, j, 2] + w01 * normals[i, j1, 2] + w10 * normals[i1, j, 2] + w11 * normals[i1, j1, 2]
    nl = math.sqrt(nx * nx + ny * ny + nz * nz)
    if nl > 0.0:
        nx /= nl
        ny /= nl
        nz /= nl
    return px, py, pz, nx, ny, nz


@njit(**PARALLEL)
def light_ratio(points, normals, valid, spread, box_corners, box_radiance, box_samples, env_luminance,
                env_samples, eps, seed, nodes_f, nodes_i, tris_f, tri_ids, out):
    """``out[i, j] = E_with / E_without`` at every receiver (1 where no light arrives at all).

    Inputs: ``points, normals`` (H, W, 3) float64 receivers and unit normals on a grid (a
    plain list of points is a 1 x N grid); ``valid`` (H, W) uint8, 0 for nodes that are not
    receivers (``out`` is set to 1 there); ``spread`` 1 to spread each node's light samples over
    its grid cell (receiver = the bilinear surface between the node and its neighbours at a
    hashed offset in [-1/2, 1/2)^2: a box prefilter of one cell, so a sparse grid does not alias
    hard shadow edges), 0 to use the node itself; ``box_corners`` (B, 4, 3) float64
    (counter-clockwise seen from the lit side), ``box_radiance`` (B,) float64 luminance;
    ``box_samples`` k (k x k jittered strata per box), ``env_luminance`` (uniform environment),
    ``env_samples`` m (m x m jittered strata of cosine-weighted directions); ``eps`` the
    origin offset along the normal; ``seed``; the occluder's BVH arrays.  Output ``out`` (H, W)
    float64 in [0, 1]; iteration ``i`` writes only row ``i``.
    """
    h = points.shape[0]
    w_grid = points.shape[1]
    n_box = box_corners.shape[0]
    k = box_samples
    m = env_samples
    for i in prange(h):
        for j in range(w_grid):
            if valid[i, j] == 0:
                out[i, j] = 1.0
                continue
            node = i * w_grid + j
            e_with = 0.0
            e_without = 0.0
            n_strata = n_box * k * k + (m * m if env_luminance > 0.0 else 0)
            for s_all in range(n_strata):
                state = sample_state(node, s_all, seed)
                if spread == 1:
                    px, py, pz, nx, ny, nz = _receiver(points, normals, valid, np.int64(i), np.int64(j),
                                                       uniform_from_state(state, 2) - 0.5,
                                                       uniform_from_state(state, 3) - 0.5)
                else:
                    px = points[i, j, 0]
                    py = points[i, j, 1]
                    pz = points[i, j, 2]
                    nx = normals[i, j, 0]
                    ny = normals[i, j, 1]
                    nz = normals[i, j, 2]
                ox = px + eps * nx
                oy = py + eps * ny
                oz = pz + eps * nz
                if s_all < n_box * k * k:
                    b = s_all // (k * k)
                    s = s_all - b * k * k
                    c0x = box_corners[b, 0, 0]
                    c0y = box_corners[b, 0, 1]
                    c0z = box_corners[b, 0, 2]
                    e1x = box_corners[b, 1, 0] - c0x
                    e1y = box_corners[b, 1, 1] - c0y
                    e1z = box_corners[b, 1, 2] - c0z
                    e2x = box_corners[b, 3, 0] - c0x
                    e2y = box_corners[b, 3, 1] - c0y
                    e2z = box_corners[b, 3, 2] - c0z
                    cx = e1y * e2z - e1z * e2y
                    cy = e1z * e2x - e1x * e2z
                    cz = e1x * e2y - e1y * e2x
                    area = math.sqrt(cx * cx + cy * cy + cz * cz)
                    if area <= 0.0:
                        continue
                    u = ((s % k) + uniform_from_state(state, 0)) / k
                    v = ((s // k) + uniform_from_state(state, 1)) / k
                    dx = c0x + u * e1x + v * e2x - ox
                    dy = c0y + u * e1y + v * e2y - oy
                    dz = c0z + u * e1z + v * e2z - oz
                    d2 = dx * dx + dy * dy + dz * dz
                    if d2 <= 0.0:
                        continue
                    dl = math.sqrt(d2)
                    cos_x = (dx * nx + dy * ny + dz * nz) / dl
                    cos_y = -(dx * cx + dy * cy + dz * cz) / (dl * area)
                    if cos_x <= 0.0 or cos_y <= 0.0:
                        continue
                    # point-to-point form factor term L cos_x cos_y dA / d^2
                    wgt = box_radiance[b] * (area / (k * k)) * cos_x * cos_y / d2
                    tmax = 1.0
                else:
                    s = s_all - n_box * k * k
                    u0 = ((s % m) + uniform_from_state(state, 0)) / m
                    u1 = ((s // m) + uniform_from_state(state, 1)) / m
                    # Malley's method: cosine-weighted about the normal, weight pi L / m^2
                    tx, ty, tz, bx, by, bz = onb_from_normal(nx, ny, nz)
                    r = math.sqrt(u0)
                    phi = 2.0 * math.pi * u1
                    lx = r * math.cos(phi)
                    ly = r * math.sin(phi)
                    lz = math.sqrt(max(0.0, 1.0 - u0))
                    dx = lx * tx + ly * bx + lz * nx
                    dy = lx * ty + ly * by + lz * ny
                    dz = lx * tz + ly * bz + lz * nz
                    wgt = math.pi * env_luminance / (m * m)
                    tmax = math.inf
                e_without += wgt
                e_with += wgt * visibility(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, tmax)
            if e_without > 0.0:
                out[i, j] = min(max(e_with / e_without, 0.0), 1.0)
            else:
                out[i, j] = 1.0
