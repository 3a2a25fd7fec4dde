"""Procedural test geometry for the transport tests and the render benchmark (not collected)."""

from __future__ import annotations

import numpy as np

from variantshot.geometry.scene import Camera, Material, make_scene


def uv_sphere(radius=1.0, centre=(0.0, 0.0, 0.0), n_theta=48, n_phi=96, inward=False):
    """Triangulated sphere: positions (V,3), triangles (T,3), exact radial normals (V,3)."""
    th = np.linspace(0.0, np.pi, n_theta + 1)
    ph = np.linspace(0.0, 2.0 * np.pi, n_phi + 1)
    t, p = np.meshgrid(th, ph, indexing="ij")
    n = np.stack([np.sin(t) * np.cos(p), np.cos(t), -np.sin(t) * np.sin(p)], axis=-1).reshape(-1, 3)
    pos = np.asarray(centre, float) + radius * n
    idx = np.arange((n_theta + 1) * (n_phi + 1)).reshape(n_theta + 1, n_phi + 1)
    a = idx[:-1, :-1].ravel()
    b = idx[1:, :-1].ravel()
    c = idx[1:, 1:].ravel()
    d = idx[:-1, 1:].ravel()
    tris = np.concatenate([np.stack([a, b, c], 1), np.stack([a, c, d], 1)])
    # drop degenerate pole triangles
    pp = pos[tris]
    area = np.linalg.norm(np.cross(pp[:, 1] - pp[:, 0], pp[:, 2] - pp[:, 0]), axis=1)
    tris = tris[area > 1e-12]
    # orient outward (or inward)
    pp = pos[tris]
    fn = np.cross(pp[:, 1] - pp[:, 0], pp[:, 2] - pp[:, 0])
    out = np.einsum("ij,ij->i", fn, pp.mean(axis=1) - np.asarray(centre, float)) > 0
    flip = out if inward else ~out
    tris[flip] = tris[flip][:, ::-1]
    normals = -n if inward else n
    return pos, tris.astype(np.int32), normals


def quad(centre, u_half, v_half):
    """Rectangle centre ± u_half ± v_half; front face normal = u x v."""
    c = np.asarray(centre, float)
    u = np.asarray(u_half, float)
    v = np.asarray(v_half, float)
    pos = np.array([c - u - v, c + u - v, c + u + v, c - u + v])
    return pos, np.array([[0, 1, 2], [0, 2, 3]], np.int32)


def facing_quad(centre, target, width, height):
    """A width x height rectangle at ``centre`` whose front face looks at ``target``."""
    c = np.asarray(centre, float)
    n = np.asarray(target, float) - c
    n /= np.linalg.norm(n)
    u = np.cross((0.0, 1.0, 0.0), n)
    u /= np.linalg.norm(u)
    v = np.cross(n, u)
    return quad(c, 0.5 * width * u, 0.5 * height * v)  # front normal u x v = n


def disk(centre, normal, radius, n_seg=256):
    """Triangle fan disk facing ``normal`` (front side)."""
    c = np.asarray(centre, float)
    nrm = np.asarray(normal, float) / np.linalg.norm(normal)
    a = np.array([1.0, 0, 0]) if abs(nrm[0]) < 0.9 else np.array([0, 1.0, 0])
    t = np.cross(nrm, a)
    t /= np.linalg.norm(t)
    b = np.cross(nrm, t)
    ang = np.linspace(0, 2 * np.pi, n_seg, endpoint=False)
    ring = c + radius * (np.cos(ang)[:, None] * t + np.sin(ang)[:, None] * b)
    pos = np.concatenate([c[None], ring])
    i = np.arange(n_seg)
    tris = np.stack([np.zeros(n_seg, int), 1 + i, 1 + (i + 1) % n_seg], 1)
    pp = pos[tris]
    fn = np.cross(pp[:, 1] - pp[:, 0], pp[:, 2] - pp[:, 0])
    flip = fn @ nrm < 0
    tris[flip] = tris[flip][:, ::-1]
    return pos, tris.astype(np.int32)


def combine(parts):
    """parts: list of (positions, triangles, material_index, normals or None) -> arrays."""
    pos, tris, mats, nrms = [], [], [], []
    off = 0
    from variantshot.geometry.scene import vertex_normals

    for p, t, m, n in parts:
        pos.append(np.asarray(p, float))
        tris.append(np.asarray(t) + off)
        mats.append(np.full(len(t), m, np.int32))
        nrms.append(vertex_normals(np.asarray(p, np.float32), np.asarray(t, np.int32)) if n is None else n)
        off += len(p)
    return np.concatenate(pos), np.concatenate(tris), np.concatenate(mats), np.concatenate(nrms)


def look_at(eye, target, up=(0.0, 1.0, 0.0)) -> np.ndarray:
    """world_from_camera 4x4 for a camera at ``eye`` looking at ``target`` (glTF: looks down -Z)."""
    eye = np.asarray(eye, float)
    f = np.asarray(target, float) - eye
    f /= np.linalg.norm(f)
    r = np.cross(f, np.asarray(up, float))
    r /= np.linalg.norm(r)
    u = np.cross(r, f)
    m = np.eye(4)
    m[:3, 0] = r
    m[:3, 1] = u
    m[:3, 2] = -f
    m[:3, 3] = eye
    return m


def camera(eye, target, yfov_rad=0.5, kind="perspective", ymag=1.0, name="cam") -> Camera:
    return Camera(name=name, kind=kind, world_from_camera=look_at(eye, target), yfov_rad=yfov_rad, xmag=ymag,
                  ymag=ymag)


def uniform_env(value):
    """A uniform environment, built by the environment module."""
    from variantshot.transport.environment import make_environment

    return make_environment(value)


def product_scene(sphere_res=(48, 96)):
    """Product-on-backdrop studio scene: a red glossy sphere, a gold metal sphere and a green
    card on a white floor-and-wall backdrop, a key and a fill soft box (emissive quads facing the
    product); returns (scene, camera)."""
    parts = []
    mats = [
        Material(name="backdrop", base_colour_factor=(0.8, 0.8, 0.8, 1.0), metallic_factor=0.0,
                 roughness_factor=0.9, double_sided=True),
        Material(name="red gloss", base_colour_factor=(0.7, 0.05, 0.04, 1.0), metallic_factor=0.0,
                 roughness_factor=0.25),
        Material(name="gold", base_colour_factor=(1.0, 0.77, 0.34, 1.0), metallic_factor=1.0,
                 roughness_factor=0.3),
        Material(name="key", base_colour_factor=(0, 0, 0, 1), emissive_factor=(1.0, 0.97, 0.92),
                 emissive_strength=6.0),
        Material(name="fill", base_colour_factor=(0, 0, 0, 1), emissive_factor=(0.9, 0.95, 1.0),
                 emissive_strength=2.0),
        Material(name="green card", base_colour_factor=(0.1, 0.6, 0.15, 1.0), metallic_factor=0.0,
                 roughness_factor=0.6, double_sided=True),
    ]
    # floor and wall (a simple two-plane backdrop with a bevel between them)
    floor = quad((0, 0, 0.5), (3, 0, 0), (0, 0, -2.5))  # normal +y: u x v = (3,0,0)x(0,0,-2.5) -> +y
    parts.append((*floor, 0, None))
    bevel_p = np.array([[-3, 0, -2.0], [3, 0, -2.0], [3, 0.5, -2.5], [-3, 0.5, -2.5]], float)
    parts.append((bevel_p, np.array([[0, 1, 2], [0, 2, 3]]), 0, None))
    wall = quad((0, 2.0, -2.5), (3, 0, 0), (0, 1.5, 0))
    parts.append((*wall, 0, None))
    sp, st, sn = uv_sphere(0.5, (-0.45, 0.5, 0.0), *sphere_res)
    parts.append((sp, st, 1, sn))
    sp, st, sn = uv_sphere(0.35, (0.55, 0.35, 0.35), *sphere_res)
    parts.append((sp, st, 2, sn))
    card = quad((0.9, 0.5, -0.6), (0.35, 0, 0.2), (0, 0.5, 0))
    parts.append((*card, 5, None))
    target = np.array([0.0, 0.5, 0.0])
    parts.append((*facing_quad((-1.8, 2.4, 1.6), target, 1.2, 0.9), 3, None))  # key: upper left front
    parts.append((*facing_quad((2.4, 1.3, 1.4), target, 0.9, 1.4), 4, None))  # fill: right
    pos, tris, tri_mat, nrm = combine(parts)
    scene = make_scene(pos, tris, normals=nrm, tri_material=tri_mat, materials=mats, source="product-on-backdrop")
    cam = camera((0.0, 1.3, 4.2), (0.0, 0.5, 0.0), yfov_rad=0.6)
    return scene, cam
