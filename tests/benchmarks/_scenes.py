"""Procedural benchmark scenes and ray sets (shared by the benchmarks; no file input).

Scenes are plain ``(positions (V, 3) float32, triangles (T, 3) int32)`` pairs plus a pinhole
camera, built with numpy only, deterministic for a given argument set.
"""

from __future__ import annotations

import numpy as np


def _grid_triangles(n_u: int, n_v: int, wrap_u: bool, wrap_v: bool) -> np.ndarray:
    """Two triangles per cell of an (n_u, n_v) vertex grid, optionally closed in u and/or v."""
    cu = n_u if wrap_u else n_u - 1
    cv = n_v if wrap_v else n_v - 1
    i, j = np.meshgrid(np.arange(cu), np.arange(cv), indexing="ij")
    i1 = (i + 1) % n_u
    j1 = (j + 1) % n_v
    a = i * n_v + j
    b = i1 * n_v + j
    c = i1 * n_v + j1
    d = i * n_v + j1
    return np.concatenate(
        [np.stack([a, b, c], -1).reshape(-1, 3), np.stack([a, c, d], -1).reshape(-1, 3)]
    ).astype(np.int32)


def knot_mesh(n_u: int = 1250, n_v: int = 80, p: int = 2, q: int = 3, seed: int = 0):
    """A bumpy (p, q) torus-knot tube: 2 n_u n_v triangles (200k by default), closed.

    Returns
    -------
    positions : (n_u n_v, 3) float32, triangles : (2 n_u n_v, 3) int32
    """
    rng = np.random.default_rng(seed)
    u = np.linspace(0.0, 2.0 * np.pi, n_u, endpoint=False)
    v = np.linspace(0.0, 2.0 * np.pi, n_v, endpoint=False)

    def curve(s):
        r = 2.0 + np.cos(q * s)
        return np.stack([r * np.cos(p * s), r * np.sin(p * s), -np.sin(q * s)], -1)

    c = curve(u)
    tangent = curve(u + 1e-4) - curve(u - 1e-4)
    tangent /= np.linalg.norm(tangent, axis=1, keepdims=True)
    ref = np.array([0.0, 0.0, 1.0])
    n1 = np.cross(tangent, ref)
    n1 /= np.linalg.norm(n1, axis=1, keepdims=True)
    n2 = np.cross(tangent, n1)
    phase = rng.uniform(0, 2 * np.pi, 4)
    uu, vv = np.meshgrid(u, v, indexing="ij")
    radius = 0.45 * (
        1.0
        + 0.12 * np.sin(23 * uu + phase[0]) * np.cos(5 * vv + phase[1])
        + 0.05 * np.sin(71 * uu + 3 * vv + phase[2])
        + 0.02 * np.cos(157 * uu - 11 * vv + phase[3])
    )
    pos = (
        c[:, None, :]
        + radius[..., None] * (np.cos(vv)[..., None] * n1[:, None, :] + np.sin(vv)[..., None] * n2[:, None, :])
    ).reshape(-1, 3)
    return pos.astype(np.float32), _grid_triangles(n_u, n_v, True, True)


def _lathe(profile_rz: np.ndarray, n_seg: int) -> tuple[np.ndarray, np.ndarray]:
    """Revolve a (K, 2) (radius, height) profile around +Y into a closed-by-caps surface."""
    ang = np.linspace(0.0, 2.0 * np.pi, n_seg, endpoint=False)
    r, y = profile_rz[:, 0], profile_rz[:, 1]
    pos = np.stack(
        [r[None, :] * np.cos(ang)[:, None], np.broadcast_to(y, (n_seg, len(y))), r[None, :] * np.sin(ang)[:, None]],
        -1,
    ).reshape(-1, 3)
    return pos, _grid_triangles(n_seg, len(r), True, False)


def product_scene(n_seg: int = 160, n_profile: int = 150):
    """A lathe bottle (~48k triangles) on a curved floor-to-wall backdrop with two soft boxes.

    Returns
    -------
    positions (V, 3) float32, triangles (T, 3) int32, camera dict (eye, target, up, yfov_rad)
    """
    s = np.linspace(0.0, 1.0, n_profile)
    # bottle: base, body, shoulder, neck, lip (radius, height in metres)
    height = 0.30 * s
    radius = np.interp(
        s,
        [0.0, 0.01, 0.03, 0.55, 0.70, 0.80, 0.95, 0.97, 1.0],
        [0.0, 0.035, 0.040, 0.040, 0.030, 0.013, 0.012, 0.014, 0.0],
    )
    radius = radius * (1.0 + 0.01 * np.sin(60 * s))
    bottle_p, bottle_t = _lathe(np.stack([radius, height], -1), n_seg)

    # backdrop sweep: floor (z forward) curving up into a wall behind (z = -0.6)
    n_w, n_d = 60, 80
    x = np.linspace(-0.9, 0.9, n_w)
    arc = np.linspace(0.0, 1.0, n_d)
    # floor from z=+0.6 to z=-0.3, quarter circle of radius 0.3, wall up to y=1.2
    l_floor, l_arc, l_wall = 0.9, 0.5 * np.pi * 0.3, 0.9
    total = l_floor + l_arc + l_wall
    dist = arc * total
    yz = np.empty((n_d, 2))
    for k, dd in enumerate(dist):
        if dd <= l_floor:
            yz[k] = (0.0, 0.6 - dd)
        elif dd <= l_floor + l_arc:
            a = (dd - l_floor) / 0.3
            yz[k] = (0.3 - 0.3 * np.cos(a), -0.3 - 0.3 * np.sin(a))
        else:
            yz[k] = (0.3 + (dd - l_floor - l_arc), -0.6)
    bx, bd = np.meshgrid(x, np.arange(n_d), indexing="ij")
    back_p = np.stack([bx, yz[bd, 0] - 0.001, yz[bd, 1]], -1).reshape(-1, 3)
    back_t = _grid_triangles(n_w, n_d, False, False)

    def rect(centre, u_axis, v_axis):
        c = np.asarray(centre, float)
        u = np.asarray(u_axis, float)
        v = np.asarray(v_axis, float)
        p = np.stack([c - u - v, c + u - v, c + u + v, c - u + v])
        return p, np.array([[0, 1, 2], [0, 2, 3]], np.int32)

    box1_p, box1_t = rect([-0.5, 0.6, 0.4], [0.15, 0.0, 0.15], [0.0, 0.2, 0.0])
    box2_p, box2_t = rect([0.55, 0.5, 0.2], [0.1, 0.0, -0.15], [0.0, 0.25, 0.0])
    parts = [(bottle_p, bottle_t), (back_p, back_t), (box1_p, box1_t), (box2_p, box2_t)]
    positions, triangles, base = [], [], 0
    for p, t in parts:
        positions.append(p)
        triangles.append(t + base)
        base += len(p)
    camera = dict(eye=(0.0, 0.2, 0.75), target=(0.0, 0.14, 0.0), up=(0.0, 1.0, 0.0), yfov_rad=0.6)
    return np.concatenate(positions).astype(np.float32), np.concatenate(triangles).astype(np.int32), camera


KNOT_CAMERA = dict(eye=(0.0, -7.5, 4.0), target=(0.0, 0.0, 0.0), up=(0.0, 0.0, 1.0), yfov_rad=0.75)


def camera_rays(camera: dict, width: int, height: int):
    """Pinhole camera rays through pixel centres, row-major from the top-left.

    Returns
    -------
    origins, directions : (width height, 3) float32 (directions unit length)
    """
    eye = np.asarray(camera["eye"], float)
    fwd = np.asarray(camera["target"], float) - eye
    fwd /= np.linalg.norm(fwd)
    right = np.cross(fwd, np.asarray(camera["up"], float))
    right /= np.linalg.norm(right)
    up = np.cross(right, fwd)
    th = np.tan(0.5 * camera["yfov_rad"])
    aspect = width / height
    ys, xs = np.mgrid[0:height, 0:width]
    sx = ((xs + 0.5) / width * 2 - 1) * th * aspect
    sy = (1 - (ys + 0.5) / height * 2) * th
    d = fwd + sx[..., None] * right + sy[..., None] * up
    d = d.reshape(-1, 3)
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    o = np.broadcast_to(eye, d.shape)
    return np.ascontiguousarray(o, np.float32), np.ascontiguousarray(d, np.float32)


def bounce_rays(positions, triangles, origins, directions, t, tri, seed: int = 1):
    """Cosine-distributed bounce rays leaving the hit points of (origins, directions, t, tri).

    The hemisphere is the side of the geometric normal facing the incoming ray; origins are
    offset by 1e-4 x scene size along it.  Rays that missed are dropped.

    Returns
    -------
    origins, directions : (M, 3) float32
    """
    rng = np.random.default_rng(seed)
    hit = tri >= 0
    o = origins[hit].astype(np.float64)
    d = directions[hit].astype(np.float64)
    p = o + t[hit, None].astype(np.float64) * d
    tr = triangles[tri[hit]]
    v0, v1, v2 = (positions[tr[:, k]].astype(np.float64) for k in range(3))
    n = np.cross(v1 - v0, v2 - v0)
    n /= np.maximum(np.linalg.norm(n, axis=1, keepdims=True), 1e-30)
    n *= -np.sign(np.einsum("ij,ij->i", n, d))[:, None]
    # orthonormal basis around n (Duff et al. 2017, "Building an orthonormal basis, revisited")
    sgn = np.where(n[:, 2] >= 0, 1.0, -1.0)
    a = -1.0 / (sgn + n[:, 2])
    b = n[:, 0] * n[:, 1] * a
    s_axis = np.stack([1 + sgn * n[:, 0] ** 2 * a, sgn * b, -sgn * n[:, 0]], -1)
    t_axis = np.stack([b, sgn + n[:, 1] ** 2 * a, -n[:, 1]], -1)
    u0, u1 = rng.random(len(n)), rng.random(len(n))
    r = np.sqrt(u0)
    phi = 2 * np.pi * u1
    local = np.stack([r * np.cos(phi), r * np.sin(phi), np.sqrt(np.maximum(0.0, 1 - u0))], -1)
    w = local[:, :1] * s_axis + local[:, 1:2] * t_axis + local[:, 2:] * n
    scale = float(np.abs(positions).max())
    p = p + n * (1e-4 * scale)
    return np.ascontiguousarray(p, np.float32), np.ascontiguousarray(w, np.float32)
