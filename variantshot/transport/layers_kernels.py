"""Per-hit material layers for the path kernel: the KHR extensions' textured values, the
anisotropy frame, volume absorption (KHR_materials_volume) and the coat over emission.

Extension textures (:func:`extension_values`): each value is factor x texture channel as the
KHR_materials_* READMEs define it -- transmission R, clearcoat R, clearcoatRoughness G,
sheenColor RGB (sRGB-decoded in the atlas), sheenRoughness A, specular A, specularColor RGB
(sRGB-decoded), anisotropy B (strength) and RG (direction, [0, 1] -> [-1, 1], normalised, then
rotated by anisotropyRotation).  Column 145 of the table says whether a material has any of
these slots; without it the factors are returned without a single texture lookup.

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

from .bsdf_kernels import material_bsdf_values
from .layout_kernels import (
    MAT_ANISOTROPY, MAT_ANISOTROPY_ROTATION, MAT_BASE_B, MAT_BASE_G, MAT_BASE_R, MAT_CLEARCOAT,
    MAT_CLEARCOAT_ROUGHNESS, MAT_EXT_TEXTURES, MAT_METALLIC, MAT_ROUGHNESS, MAT_SHEEN_B,
    MAT_SHEEN_G, MAT_SHEEN_R, MAT_SHEEN_ROUGHNESS, MAT_SIGMA_A_B, MAT_SIGMA_A_G, MAT_SIGMA_A_R,
    MAT_SPECULAR, MAT_SPECULAR_B, MAT_SPECULAR_G, MAT_SPECULAR_R, MAT_THICKNESS, MAT_TRANSMISSION,
    SLOT_ANISOTROPY, SLOT_CLEARCOAT, SLOT_CLEARCOAT_ROUGHNESS, SLOT_NORMAL, SLOT_SHEEN_COLOUR,
    SLOT_SHEEN_ROUGHNESS, SLOT_SPECULAR, SLOT_SPECULAR_COLOUR, SLOT_TEX_COORD, SLOT_TRANSMISSION,
)
from .sampling_kernels import onb_from_normal
from .texture_kernels import sample_slot


@njit(**KERNEL)
def extension_values(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1):
    """Textured extension values at a surface point (layout of the columns in ``bsdf_kernels``).

    Returns (transmission, clearcoat, clearcoatRoughness, sheen r, g, b, sheenRoughness,
    specular, specularColor r, g, b, anisotropy strength, direction x, y) -- the direction a unit
    vector in (tangent, bitangent) coordinates, (cos rotation, sin rotation) without a texture
    (KHR_materials_anisotropy: the default texel is (1, 0.5, 1)).  A texel direction of zero
    length keeps the untextured direction.
    """
    tr = float(mat_table[mat, MAT_TRANSMISSION])
    cc = float(mat_table[mat, MAT_CLEARCOAT])
    ccr = float(mat_table[mat, MAT_CLEARCOAT_ROUGHNESS])
    shr = float(mat_table[mat, MAT_SHEEN_R])
    shg = float(mat_table[mat, MAT_SHEEN_G])
    shb = float(mat_table[mat, MAT_SHEEN_B])
    shro = float(mat_table[mat, MAT_SHEEN_ROUGHNESS])
    sp = float(mat_table[mat, MAT_SPECULAR])
    spr = float(mat_table[mat, MAT_SPECULAR_R])
    spg = float(mat_table[mat, MAT_SPECULAR_G])
    spb = float(mat_table[mat, MAT_SPECULAR_B])
    an = float(mat_table[mat, MAT_ANISOTROPY])
    dx = 1.0
    dy = 0.0
    if an > 0.0:
        rot = float(mat_table[mat, MAT_ANISOTROPY_ROTATION])
        dx = math.cos(rot)
        dy = math.sin(rot)
    if mat_table[mat, MAT_EXT_TEXTURES] > 0.5:
        if tr > 0.0 and mat_table[mat, SLOT_TRANSMISSION] >= 0.0:
            tr *= sample_slot(mat_table, mat, SLOT_TRANSMISSION, tex_pixels, tex_table, u0, v0, u1, v1)[0]
        if cc > 0.0:
            if mat_table[mat, SLOT_CLEARCOAT] >= 0.0:
                cc *= sample_slot(mat_table, mat, SLOT_CLEARCOAT, tex_pixels, tex_table, u0, v0, u1, v1)[0]
            if mat_table[mat, SLOT_CLEARCOAT_ROUGHNESS] >= 0.0:
                ccr *= sample_slot(mat_table, mat, SLOT_CLEARCOAT_ROUGHNESS, tex_pixels, tex_table, u0, v0, u1, v1)[1]
        if mat_table[mat, SLOT_SHEEN_COLOUR] >= 0.0:
            t = sample_slot(mat_table, mat, SLOT_SHEEN_COLOUR, tex_pixels, tex_table, u0, v0, u1, v1)
            shr *= t[0]
            shg *= t[1]
            shb *= t[2]
        if mat_table[mat, SLOT_SHEEN_ROUGHNESS] >= 0.0:
            shro *= sample_slot(mat_table, mat, SLOT_SHEEN_ROUGHNESS, tex_pixels, tex_table, u0, v0, u1, v1)[3]
        if mat_table[mat, SLOT_SPECULAR] >= 0.0:
            sp *= sample_slot(mat_table, mat, SLOT_SPECULAR, tex_pixels, tex_table, u0, v0, u1, v1)[3]
        if mat_table[mat, SLOT_SPECULAR_COLOUR] >= 0.0:
            t = sample_slot(mat_table, mat, SLOT_SPECULAR_COLOUR, tex_pixels, tex_table, u0, v0, u1, v1)
            spr *= t[0]
            spg *= t[1]
            spb *= t[2]
        if an > 0.0 and mat_table[mat, SLOT_ANISOTROPY] >= 0.0:
            t = sample_slot(mat_table, mat, SLOT_ANISOTROPY, tex_pixels, tex_table, u0, v0, u1, v1)
            an *= t[2]
            x = 2.0 * t[0] - 1.0
            y = 2.0 * t[1] - 1.0
            ln = math.sqrt(x * x + y * y)
            if ln > 1e-9:
                x /= ln
                y /= ln
                # rotated counter-clockwise by anisotropyRotation (the README's mat2)
                ndx = dx * x - dy * y
                dy = dy * x + dx * y
                dx = ndx
    return tr, cc, ccr, shr, shg, shb, shro, sp, spr, spg, spb, an, dx, dy


@njit(**KERNEL)
def volume_attenuation(mat_table, mat, distance):
    """(T_r, T_g, T_b) = exp(-sigma_a distance) for material ``mat``; (1, 1, 1) without a volume."""
    if mat_table[mat, MAT_THICKNESS] <= 0.0 or distance <= 0.0:
        return 1.0, 1.0, 1.0
    sr = float(mat_table[mat, MAT_SIGMA_A_R])
    sg = float(mat_table[mat, MAT_SIGMA_A_G])
    sb = float(mat_table[mat, MAT_SIGMA_A_B])
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
def anisotropy_frame(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat, nx, ny, nz, c, s):
    """Shading frame (tx, ty, tz, bx, by, bz) whose x axis is the anisotropy direction.

    KHR_materials_anisotropy: the direction is c T + s B in the tangent plane, (c, s) the unit
    direction of :func:`extension_values` (the tangent rotated by ``anisotropyRotation``, and by
    the anisotropyTexture's direction); T, B from :func:`tangent_frame` in the normalTexture's UV
    set; without a tangent, the frame of ``onb_from_normal``.
    """
    ok, tx, ty, tz, bx, by, bz = tangent_frame(positions, uvs, tangents, triangles, tri, b1, b2,
                                               int(mat_table[mat, SLOT_NORMAL + SLOT_TEX_COORD]), nx, ny, nz)
    if not ok:
        return onb_from_normal(nx, ny, nz)
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
    cc = float(mat_table[mat, MAT_CLEARCOAT])
    if cc <= 0.0:
        return 1.0
    c = min(max(cos_n, 0.0), 1.0)
    return 1.0 - cc * (0.04 + 0.96 * (1.0 - c) ** 5)


@njit(**KERNEL)
def resolve_textured_batch(mat_table, mat, tex_pixels, tex_table, uv0, uv1, entering, out):
    """Tests: the resolved BSDF of material ``mat`` at N points with UV sets uv0, uv1 (N, 2) each.

    Base colour / metallic / roughness are the factors, the clearcoat normal the shading normal;
    out (N, N_BSDF + 2): the resolved tuple, then the anisotropy direction (x, y).
    """
    for i in range(uv0.shape[0]):
        e = extension_values(mat_table, mat, tex_pixels, tex_table, uv0[i, 0], uv0[i, 1], uv1[i, 0], uv1[i, 1])
        b = material_bsdf_values(mat_table, mat, float(mat_table[mat, MAT_BASE_R]), float(mat_table[mat, MAT_BASE_G]),
                                 float(mat_table[mat, MAT_BASE_B]), float(mat_table[mat, MAT_METALLIC]), float(mat_table[mat, MAT_ROUGHNESS]),
                                 entering, e[0], e[1], e[2], e[3], e[4], e[5], e[6], e[7], e[8], e[9], e[10],
                                 e[11], 0.0, 0.0, 1.0)
        for k in range(len(b)):
            out[i, k] = b[k]
        out[i, len(b)] = e[12]
        out[i, len(b) + 1] = e[13]
