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

from ..transport.bsdf_kernels import fresnel_dielectric
from ..transport.layers_kernels import volume_attenuation
from ..transport.light_kernels import triangle_geometry
from ..transport.path_kernels import surface_alpha, surface_attributes
from ..transport.sampling_kernels import onb_from_normal, sample_state, uniform_from_state
from ..transport.texture_kernels import sample_slot
from .bvh_kernels import any_hit, closest_hit

#: Most surfaces a shadow ray walks through before it counts as blocked.
MAX_CROSSINGS = 64


@njit(**KERNEL)
def crossing_transmittance(mat_table, mat, tex_pixels, tex_table, attrs, cos_i):
    """Share of the light (luminance) a shadow ray keeps crossing one surface of material ``mat``.

    ``(1 - a) + a T_s`` with ``a`` the glTF coverage (MASK: 0 below the cutoff, else 1; BLEND:
    alpha; OPAQUE: 1) and ``T_s`` the straight-through transmission of the layered BSDF:
    ``(1 - metallic) transmission (1 - F(cos_i, ior)) (1 - clearcoat F(cos_i, 1.5)) Y(base)``
    (factors times their textures),
    F the exact unpolarised Fresnel reflectance, Y the luminance of the base colour (which tints
    the refracted light).  Refraction (the bent direction, caustics) and roughness are ignored:
    the ray goes straight on.  ``attrs`` is ``path_kernels.surface_attributes``' tuple.
    """
    u0 = attrs[6]
    v0 = attrs[7]
    u1 = attrs[8]
    v1 = attrs[9]
    mode = int(mat_table[mat, 10])
    a = 1.0
    if mode != 0:
        alpha = surface_alpha(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1, attrs[13])
        if mode == 1:
            a = 0.0 if alpha < mat_table[mat, 11] else 1.0
        else:
            a = min(max(alpha, 0.0), 1.0)
    tr = float(mat_table[mat, 48])
    ts = 0.0
    if tr > 0.0 and a > 0.0:
        # transmissionTexture R and clearcoatTexture R scale their factors (slots 64, 80)
        tr *= sample_slot(mat_table, mat, 64, tex_pixels, tex_table, u0, v0, u1, v1)[0]
        mr = sample_slot(mat_table, mat, 24, tex_pixels, tex_table, u0, v0, u1, v1)
        metallic = min(max(float(mat_table[mat, 5]) * mr[2], 0.0), 1.0)
        bt = sample_slot(mat_table, mat, 16, tex_pixels, tex_table, u0, v0, u1, v1)
        y = (0.2126 * float(mat_table[mat, 1]) * bt[0] * attrs[10]
             + 0.7152 * float(mat_table[mat, 2]) * bt[1] * attrs[11]
             + 0.0722 * float(mat_table[mat, 3]) * bt[2] * attrs[12])
        ior = float(mat_table[mat, 13])
        f = fresnel_dielectric(cos_i, ior) if abs(ior - 1.0) > 1e-6 else 0.0
        cc = float(mat_table[mat, 53])
        if cc > 0.0:
            cc *= sample_slot(mat_table, mat, 80, tex_pixels, tex_table, u0, v0, u1, v1)[0]
        fc = cc * fresnel_dielectric(cos_i, 1.5)
        ts = (1.0 - metallic) * min(tr, 1.0) * (1.0 - f) * (1.0 - fc) * max(y, 0.0)
    return (1.0 - a) + a * ts


@njit(**KERNEL)
def visibility(nodes_f, nodes_i, tris_f, tri_ids, positions, normals, uvs, colours, triangles, tri_material,
               mat_table, tex_pixels, tex_table, walk, step_eps, ox, oy, oz, dx, dy, dz, tmax):
    """Share of the light passing the occluder along o + t d, 0 < t < tmax.

    ``walk`` 0: 0 or 1 (any hit blocks).  ``walk`` 1: the product has transmissive or
    alpha-blended/masked materials; the ray walks from hit to hit multiplying
    :func:`crossing_transmittance`, and a segment that ends on a back face of a
    ``KHR_materials_volume`` material is attenuated by the luminance of exp(-sigma_a length)
    (Beer-Lambert).  More than ``MAX_CROSSINGS`` surfaces block.
    """
    if walk == 0:
        if any_hit(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, 0.0, tmax):
            return 0.0
        return 1.0
    dl = math.sqrt(dx * dx + dy * dy + dz * dz)
    if dl <= 0.0:
        return 1.0
    ux = dx / dl
    uy = dy / dl
    uz = dz / dl
    remaining = tmax * dl  # in length units along the unit direction
    trans = 1.0
    inside = 0.0  # distance from the last surface crossed to the origin (volume absorption)
    for _ in range(MAX_CROSSINGS):
        t, tri, b1, b2 = closest_hit(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, ux, uy, uz, 0.0, remaining)
        if tri < 0:
            return trans
        t = float(t)
        mat = tri_material[tri]
        if int(mat_table[mat, 10]) == 0 and mat_table[mat, 48] <= 0.0:
            return 0.0  # an opaque surface
        area, ngx, ngy, ngz = triangle_geometry(positions, triangles, tri)
        cos_d = ngx * ux + ngy * uy + ngz * uz
        attrs = surface_attributes(positions, normals, uvs, colours, triangles, tri, b1, b2)
        trans *= crossing_transmittance(mat_table, mat, tex_pixels, tex_table, attrs, abs(cos_d))
        if cos_d > 0.0:
            # leaving through a back face: the segment since the entry ran inside the volume
            va_r, va_g, va_b = volume_attenuation(mat_table, mat, inside + t)
            trans *= 0.2126 * va_r + 0.7152 * va_g + 0.0722 * va_b
        if trans <= 0.0:
            return 0.0
        step = t + step_eps
        ox += ux * step
        oy += uy * step
        oz += uz * step
        inside = step_eps  # the new origin lies step_eps past the surface
        remaining -= step
        if remaining <= 0.0:
            return trans
    return 0.0


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
                env_samples, eps, seed, nodes_f, nodes_i, tris_f, tri_ids,
                positions, vnormals, uvs, colours, triangles, tri_material, mat_table, tex_pixels, tex_table,
                walk, step_eps, out):
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
    origin offset along the normal; ``seed``; the occluder's BVH arrays; its mesh arrays
    (``positions, vnormals, uvs, colours, triangles, tri_material``, as the path kernels take
    them), material table and texture atlas, ``walk`` and ``step_eps`` (see
    :func:`visibility`; with ``walk`` 0 the mesh arrays are not read).  Output ``out`` (H, W)
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
                e_with += wgt * visibility(nodes_f, nodes_i, tris_f, tri_ids, positions, vnormals, uvs, colours,
                                           triangles, tri_material, mat_table, tex_pixels, tex_table, walk,
                                           step_eps, ox, oy, oz, dx, dy, dz, tmax)
            if e_without > 0.0:
                out[i, j] = min(max(e_with / e_without, 0.0), 1.0)
            else:
                out[i, j] = 1.0
