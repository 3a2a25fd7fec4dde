"""Volume absorption inside transmissive materials (KHR_materials_volume), for the path kernel.

Beer-Lambert (KHR_materials_volume README): the transmittance over a traced distance x inside
a homogeneous medium is T(x) = exp(-sigma_a x) per channel, sigma_a = -ln(attenuationColor) /
attenuationDistance (material table columns 50-52, see ``bsdf_kernels``).  The path kernel
knows a segment ran inside a medium when it ends on a **back** face of a volume material
(closed meshes with outward winding, as the extension requires).
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math

from .sampling_kernels import onb_from_normal


@njit(**KERNEL)
def volume_attenuation(mat_table, mat, distance):
    """(T_r, T_g, T_b) = exp(-sigma_a distance) for material ``mat``; (1, 1, 1) without a volume."""
    if mat_table[mat, 49] <= 0.0 or distance <= 0.0:
        return 1.0, 1.0, 1.0
    sr = float(mat_table[mat, 50])
    sg = float(mat_table[mat, 51])
    sb = float(mat_table[mat, 52])
    if sr <= 0.0 and sg <= 0.0 and sb <= 0.0:
        return 1.0, 1.0, 1.0
    return math.exp(-sr * distance), math.exp(-sg * distance), math.exp(-sb * distance)


@njit(**KERNEL)
def tangent_frame(positions, uvs, tangents, triangles, tri, b1, b2, uv_set, nx, ny, nz):
    """Unit tangent T and bitangent B = (N x T) w at barycentrics (b1, b2): ``(ok, tx, ty, tz, bx, by, bz)``.

    T is the interpolated TANGENT (xyz, w = handedness) when the mesh has one, else dp/du of the
    triangle in UV set ``uv_set`` (the glTF sample viewer's fallback), Gram-Schmidt-orthogonalised
    against the shading normal N.  ``ok`` is False when neither gives a direction (degenerate UVs
    or T parallel to N); the other values are then meaningless.
    """
    i0 = triangles[tri, 0]
    i1 = triangles[tri, 1]
    i2 = triangles[tri, 2]
    b0 = 1.0 - b1 - b2
    tx = b0 * tangents[i0, 0] + b1 * tangents[i1, 0] + b2 * tangents[i2, 0]
    ty = b0 * tangents[i0, 1] + b1 * tangents[i1, 1] + b2 * tangents[i2, 1]
    tz = b0 * tangents[i0, 2] + b1 * tangents[i1, 2] + b2 * tangents[i2, 2]
    w = tangents[i0, 3]
    if tx * tx + ty * ty + tz * tz <= 1e-20:
        if uv_set < 0 or uv_set > 1:
            uv_set = 0
        du1 = float(uvs[i1, uv_set, 0]) - float(uvs[i0, uv_set, 0])
        dv1 = float(uvs[i1, uv_set, 1]) - float(uvs[i0, uv_set, 1])
        du2 = float(uvs[i2, uv_set, 0]) - float(uvs[i0, uv_set, 0])
        dv2 = float(uvs[i2, uv_set, 1]) - float(uvs[i0, uv_set, 1])
        det = du1 * dv2 - du2 * dv1
        if det == 0.0:
            return False, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
        e1x = float(positions[i1, 0]) - float(positions[i0, 0])
        e1y = float(positions[i1, 1]) - float(positions[i0, 1])
        e1z = float(positions[i1, 2]) - float(positions[i0, 2])
        e2x = float(positions[i2, 0]) - float(positions[i0, 0])
        e2y = float(positions[i2, 1]) - float(positions[i0, 1])
        e2z = float(positions[i2, 2]) - float(positions[i0, 2])
        tx = (dv2 * e1x - dv1 * e2x) / det
        ty = (dv2 * e1y - dv1 * e2y) / det
        tz = (dv2 * e1z - dv1 * e2z) / det
        w = 1.0
    d = tx * nx + ty * ny + tz * nz  # Gram-Schmidt against N
    tx -= d * nx
    ty -= d * ny
    tz -= d * nz
    tl = math.sqrt(tx * tx + ty * ty + tz * tz)
    if tl <= 1e-12:
        return False, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    tx /= tl
    ty /= tl
    tz /= tl
    sign = 1.0 if w >= 0.0 else -1.0
    bx = (ny * tz - nz * ty) * sign
    by = (nz * tx - nx * tz) * sign
    bz = (nx * ty - ny * tx) * sign
    return True, tx, ty, tz, bx, by, bz


@njit(**KERNEL)
def anisotropy_frame(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat, nx, ny, nz):
    """Shading frame (tx, ty, tz, bx, by, bz) whose x axis is the anisotropy direction.

    KHR_materials_anisotropy: the direction is the tangent T rotated by ``anisotropyRotation``
    towards the bitangent B in the tangent plane (:func:`tangent_frame`, in the normalTexture's UV
    set); without a tangent, the frame of ``onb_from_normal``.
    """
    ok, tx, ty, tz, bx, by, bz = tangent_frame(positions, uvs, tangents, triangles, tri, b1, b2,
                                               int(mat_table[mat, 41]), nx, ny, nz)
    if not ok:
        return onb_from_normal(nx, ny, nz)
    rot = float(mat_table[mat, 63])
    c = math.cos(rot)
    s = math.sin(rot)
    ax = c * tx + s * bx
    ay = c * ty + s * by
    az = c * tz + s * bz
    # right-handed (a, n x a, n) so local coordinates match onb_from_normal's convention
    return ax, ay, az, ny * az - nz * ay, nz * ax - nx * az, nx * ay - ny * ax


@njit(**KERNEL)
def coat_emission_scale(mat_table, mat, cos_n):
    """1 - clearcoat Fc(cos_n): emission seen through a clearcoat (KHR_materials_clearcoat README,
    Fc Schlick with f0 = 0.04); ``cos_n`` = |geometric normal . direction| (the same on both
    ends of a light path, so light sampling and BSDF hits agree); 1 without a coat."""
    cc = float(mat_table[mat, 53])
    if cc <= 0.0:
        return 1.0
    c = min(max(cos_n, 0.0), 1.0)
    return 1.0 - cc * (0.04 + 0.96 * (1.0 - c) ** 5)
