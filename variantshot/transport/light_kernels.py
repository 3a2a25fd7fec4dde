"""Light sampling kernels: KHR_lights_punctual lights and emissive triangles.

Punctual light table ``punctual``: ``(L, 16) float64``, one row per light:

=====  =========================================================================
col    meaning
=====  =========================================================================
0      kind: 0 point, 1 spot, 2 directional
1-3    world position (point, spot)
4-6    unit direction the light travels (spot, directional: the node's -Z)
7-9    colour x intensity, linear RGB (candela for point/spot, lux for directional)
10     range in metres (0: infinite)
11     cos(outerConeAngle)
12     spot angle scale = 1 / max(0.001, cos(inner) - cos(outer))
13     spot angle offset = -cos(outer) * scale
14-15  spare
=====  =========================================================================

Spot fall-off and range attenuation follow the KHR_lights_punctual README: angular
attenuation = clamp(cd * scale + offset, 0, 1)**2 with cd the cosine between the spot axis and
the direction to the lit point; range: max(min(1 - (d/range)**4, 1), 0) / d**2.

Emissive triangles: ``emit_tris (E,) int32`` triangle ids and ``emit_cdf (E+1,) float64``, a
CDF proportional to area x luminance of the emission (x2 for double-sided emitters); a point
is uniform on the chosen triangle (area density 1/A).
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math

from .sampling_kernels import sample_discrete, sample_uniform_triangle


LIGHT_POINT = 0
LIGHT_SPOT = 1
LIGHT_DIRECTIONAL = 2


@njit(**KERNEL)
def sample_punctual(punctual, k, px, py, pz):
    """Incident light at point p from punctual light k.

    Returns ``(wix, wiy, wiz, dist, li_r, li_g, li_b)``: the unit direction towards the light,
    its distance (inf for directional) and the incident radiance-times-solid-angle (the
    irradiance a surface facing the light would receive, before the cosine).
    """
    kind = int(punctual[k, 0])
    if kind == 2:
        return (
            -punctual[k, 4],
            -punctual[k, 5],
            -punctual[k, 6],
            math.inf,
            punctual[k, 7],
            punctual[k, 8],
            punctual[k, 9],
        )
    wx = punctual[k, 1] - px
    wy = punctual[k, 2] - py
    wz = punctual[k, 3] - pz
    d2 = wx * wx + wy * wy + wz * wz
    if d2 <= 0.0:
        return 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0
    d = math.sqrt(d2)
    wx /= d
    wy /= d
    wz /= d
    att = 1.0 / d2
    rng = punctual[k, 10]
    if rng > 0.0:
        q = d / rng
        att *= max(min(1.0 - q * q * q * q, 1.0), 0.0)
    if kind == 1:
        # cd: cosine between the spot axis and the direction from the light to p
        cd = -(punctual[k, 4] * wx + punctual[k, 5] * wy + punctual[k, 6] * wz)
        a = min(max(cd * punctual[k, 12] + punctual[k, 13], 0.0), 1.0)
        att *= a * a
    return wx, wy, wz, d, punctual[k, 7] * att, punctual[k, 8] * att, punctual[k, 9] * att


@njit(**KERNEL)
def triangle_geometry(positions, triangles, tri):
    """(area, unit geometric normal nx, ny, nz) of triangle ``tri`` (CCW front)."""
    i0 = triangles[tri, 0]
    i1 = triangles[tri, 1]
    i2 = triangles[tri, 2]
    e1x = float(positions[i1, 0]) - float(positions[i0, 0])
    e1y = float(positions[i1, 1]) - float(positions[i0, 1])
    e1z = float(positions[i1, 2]) - float(positions[i0, 2])
    e2x = float(positions[i2, 0]) - float(positions[i0, 0])
    e2y = float(positions[i2, 1]) - float(positions[i0, 1])
    e2z = float(positions[i2, 2]) - float(positions[i0, 2])
    cx = e1y * e2z - e1z * e2y
    cy = e1z * e2x - e1x * e2z
    cz = e1x * e2y - e1y * e2x
    ln = math.sqrt(cx * cx + cy * cy + cz * cz)
    if ln <= 0.0:
        return 0.0, 0.0, 0.0, 1.0
    return 0.5 * ln, cx / ln, cy / ln, cz / ln


@njit(**KERNEL)
def sample_emissive_point(positions, triangles, emit_tris, emit_cdf, u_tri, u0, u1):
    """Pick an emissive triangle by power and a uniform point on it.

    Returns ``(tri, b1, b2, qx, qy, qz, prob_tri, area)``; ``prob_tri`` is the discrete
    probability of the triangle (the area density of the point is prob_tri / area).
    """
    k = sample_discrete(emit_cdf, u_tri)
    total = emit_cdf[emit_cdf.shape[0] - 1]
    prob = (emit_cdf[k + 1] - emit_cdf[k]) / total
    tri = emit_tris[k]
    b1, b2 = sample_uniform_triangle(u0, u1)
    b0 = 1.0 - b1 - b2
    i0 = triangles[tri, 0]
    i1 = triangles[tri, 1]
    i2 = triangles[tri, 2]
    qx = b0 * positions[i0, 0] + b1 * positions[i1, 0] + b2 * positions[i2, 0]
    qy = b0 * positions[i0, 1] + b1 * positions[i1, 1] + b2 * positions[i2, 1]
    qz = b0 * positions[i0, 2] + b1 * positions[i1, 2] + b2 * positions[i2, 2]
    area = triangle_geometry(positions, triangles, tri)[0]
    return tri, b1, b2, float(qx), float(qy), float(qz), prob, area


@njit(**KERNEL)
def sample_punctual_batch(punctual, k, points, out):
    """Tests: sample_punctual at N points (N, 3) -> out (N, 7)."""
    for i in range(points.shape[0]):
        r = sample_punctual(punctual, k, points[i, 0], points[i, 1], points[i, 2])
        for j in range(7):
            out[i, j] = r[j]
