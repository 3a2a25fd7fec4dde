"""Texture lookups in the packed texture atlas: wrap modes, bilinear or nearest filtering.

Atlas layout (built by ``textures.py``):

* ``tex_pixels`` : ``(N, 4) float32`` -- every texture's texels, row-major, concatenated; values
  already decoded to linear where the slot is an sRGB slot (colour textures), stored values
  otherwise (data textures).  Mip levels are box-filtered in those (linear) values.
* ``tex_table`` : ``(K, 8) int32`` -- one row per texture *level*; an atlas entry is the row of
  its level 0, its levels 1 .. L-1 follow in the next rows.  Per row: 0 texel offset, 1 width,
  2 height, 3 wrapS, 4 wrapT (glTF enums 10497 REPEAT, 33071 CLAMP_TO_EDGE, 33648
  MIRRORED_REPEAT), 5 magnification nearest (1: magFilter NEAREST), 6 number of levels L
  (1: the sampler's minFilter asks for no mipmaps), 7 minification mode bits (1: nearest
  texel -- minFilter NEAREST*; 2: nearest level -- *_MIPMAP_NEAREST).

UV (0, 0) is the top-left corner of the image (glTF 2.0 §3.8.4.1 "Images"); texel row 0 is
the top row.

Level of detail (``sample_slot_lod``): the path kernel carries a ray cone (T. Akenine-Möller et
al., "Texture Level of Detail Strategies for Real-Time Ray Tracing", Ray Tracing Gems, 2019):
its width at a hit is ``base + spread x distance travelled``, with the spread of one pixel
scaled by ``max(1/8, 1/sqrt(spp))`` because the pixel's samples already average over its
footprint (the camera ray differential scaling of pbrt-v4, from memory).  The cone's footprint
on the surface, ``width / sqrt(|cos theta|)`` (the area-preserving isotropic width between the
minor and major axes), times the triangle's texel density sqrt(uv area x W x H x |det T| / world
area) (T the KHR_texture_transform matrix), gives ``lod = log2(texels across the footprint)``.
lod <= 0 magnifies (magFilter); lod > 0 minifies (minFilter): trilinear between the two
nearest levels, or as the glTF sampler's minFilter says (glTF 2.0 §5.26: NEAREST / LINEAR read
level 0 only; *_MIPMAP_NEAREST the nearest level; NEAREST_* the nearest texel; an undefined
minFilter is LINEAR_MIPMAP_LINEAR here).  The cone ignores the widening by rough bounces (it
keeps the pixel's spread), so textures seen through glossy or diffuse bounces are filtered
no wider than a mirror would see them.  Lookups without a cone (light sampling, shadow rays,
tests) read level 0.  ``occlusionTexture`` is not read at all: a path tracer computes the
occlusion it stands for.
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math

from .layout_kernels import SLOT_M00, SLOT_M01, SLOT_M02, SLOT_M10, SLOT_M11, SLOT_M12, SLOT_TEX_COORD

# Columns of the atlas table ``tex_table`` (K, N_TEX) int32, one row per mip level (``textures.py``).
TEX_OFFSET = 0  # first texel in ``tex_pixels``
TEX_WIDTH = 1
TEX_HEIGHT = 2
TEX_WRAP_S = 3  # glTF sampler wrap codes
TEX_WRAP_T = 4
TEX_NEAREST = 5  # 1: nearest magnification
TEX_LEVELS = 6  # mip levels from this row on
TEX_MODE = 7  # minification mode bits (module docstring)
N_TEX = 8


@njit(**KERNEL)
def wrap_index(i, n, mode):
    """Integer texel index under a glTF wrap mode."""
    if mode == 33071:  # CLAMP_TO_EDGE
        if i < 0:
            return 0
        if i >= n:
            return n - 1
        return i
    if mode == 33648:  # MIRRORED_REPEAT
        period = 2 * n
        k = i % period
        if k < 0:
            k += period
        if k >= n:
            k = period - 1 - k
        return k
    k = i % n  # REPEAT
    if k < 0:
        k += n
    return k


@njit(**KERNEL)
def texel(tex_pixels, offset, width, x, y, c):
    return tex_pixels[offset + y * width + x, c]


@njit(**KERNEL)
def sample_level(tex_pixels, tex_table, row, u, v, nearest):
    """RGBA of one level (table ``row``) at (u, v): bilinear, or nearest when ``nearest``."""
    offset = tex_table[row, TEX_OFFSET]
    width = tex_table[row, TEX_WIDTH]
    height = tex_table[row, TEX_HEIGHT]
    wrap_s = tex_table[row, TEX_WRAP_S]
    wrap_t = tex_table[row, TEX_WRAP_T]
    x = u * width - 0.5
    y = v * height - 0.5
    if nearest:
        xi = wrap_index(int(math.floor(x + 0.5)), width, wrap_s)
        yi = wrap_index(int(math.floor(y + 0.5)), height, wrap_t)
        k = offset + yi * width + xi
        return (
            float(tex_pixels[k, 0]),
            float(tex_pixels[k, 1]),
            float(tex_pixels[k, 2]),
            float(tex_pixels[k, 3]),
        )
    x0f = math.floor(x)
    y0f = math.floor(y)
    fx = x - x0f
    fy = y - y0f
    x0 = wrap_index(int(x0f), width, wrap_s)
    x1 = wrap_index(int(x0f) + 1, width, wrap_s)
    y0 = wrap_index(int(y0f), height, wrap_t)
    y1 = wrap_index(int(y0f) + 1, height, wrap_t)
    k00 = offset + y0 * width + x0
    k10 = offset + y0 * width + x1
    k01 = offset + y1 * width + x0
    k11 = offset + y1 * width + x1
    w00 = (1.0 - fx) * (1.0 - fy)
    w10 = fx * (1.0 - fy)
    w01 = (1.0 - fx) * fy
    w11 = fx * fy
    r = w00 * tex_pixels[k00, 0] + w10 * tex_pixels[k10, 0] + w01 * tex_pixels[k01, 0] + w11 * tex_pixels[k11, 0]
    g = w00 * tex_pixels[k00, 1] + w10 * tex_pixels[k10, 1] + w01 * tex_pixels[k01, 1] + w11 * tex_pixels[k11, 1]
    b = w00 * tex_pixels[k00, 2] + w10 * tex_pixels[k10, 2] + w01 * tex_pixels[k01, 2] + w11 * tex_pixels[k11, 2]
    a = w00 * tex_pixels[k00, 3] + w10 * tex_pixels[k10, 3] + w01 * tex_pixels[k01, 3] + w11 * tex_pixels[k11, 3]
    return float(r), float(g), float(b), float(a)


@njit(**KERNEL)
def sample_texture_lod(tex_pixels, tex_table, entry, u, v, lod):
    """Filtered RGBA of atlas entry ``entry`` at (u, v) and level of detail ``lod`` (log2 texels
    per footprint; <= 0 or NaN magnifies).  (1, 1, 1, 1) when ``entry < 0`` (no texture)."""
    if entry < 0:
        return 1.0, 1.0, 1.0, 1.0
    if not (math.isfinite(u) and math.isfinite(v)):
        u = 0.0
        v = 0.0
    if not lod > 0.0:  # magnification (NaN included)
        return sample_level(tex_pixels, tex_table, entry, u, v, tex_table[entry, TEX_NEAREST] == 1)
    levels = tex_table[entry, TEX_LEVELS]
    mode = tex_table[entry, TEX_MODE]
    nearest_texel = (mode & 1) == 1
    top = float(levels - 1)
    if lod > top:
        lod = top
    if (mode & 2) == 2 or levels == 1:
        level = int(lod + 0.5)  # the nearest level (level 0 when there is no chain)
        return sample_level(tex_pixels, tex_table, entry + level, u, v, nearest_texel)
    l0 = int(math.floor(lod))
    f = lod - l0
    r0, g0, b0, a0 = sample_level(tex_pixels, tex_table, entry + l0, u, v, nearest_texel)
    if f <= 0.0 or l0 + 1 >= levels:
        return r0, g0, b0, a0
    r1, g1, b1, a1 = sample_level(tex_pixels, tex_table, entry + l0 + 1, u, v, nearest_texel)
    return r0 + f * (r1 - r0), g0 + f * (g1 - g0), b0 + f * (b1 - b0), a0 + f * (a1 - a0)


@njit(**KERNEL)
def sample_texture(tex_pixels, tex_table, entry, u, v):
    """Filtered RGBA of atlas entry ``entry`` at texture coordinates (u, v), level 0.

    Returns ``(r, g, b, a)`` floats; (1, 1, 1, 1) when ``entry < 0`` (no texture).
    """
    return sample_texture_lod(tex_pixels, tex_table, entry, u, v, 0.0)


@njit(**KERNEL)
def slot_uv(mat_table, mat, col, uv0u, uv0v, uv1u, uv1v):
    """Transformed (u', v') of the slot at ``col``: its texCoord set through its
    KHR_texture_transform matrix (m00 m01 m02 m10 m11 m12): u' = m00 u + m01 v + m02,
    v' = m10 u + m11 v + m12."""
    if int(mat_table[mat, col + SLOT_TEX_COORD]) == 1:
        u = uv1u
        v = uv1v
    else:
        u = uv0u
        v = uv0v
    tu = mat_table[mat, col + SLOT_M00] * u + mat_table[mat, col + SLOT_M01] * v + mat_table[mat, col + SLOT_M02]
    tv = mat_table[mat, col + SLOT_M10] * u + mat_table[mat, col + SLOT_M11] * v + mat_table[mat, col + SLOT_M12]
    return tu, tv


@njit(**KERNEL)
def sample_slot(mat_table, mat, col, tex_pixels, tex_table, uv0u, uv0v, uv1u, uv1v):
    """RGBA of the material texture slot whose 8 columns start at ``col`` (layout in bsdf_kernels),
    level 0.  The slot holds: atlas entry (-1: none), texCoord set, then the 2x3
    KHR_texture_transform matrix (see :func:`slot_uv`)."""
    entry = int(mat_table[mat, col])
    if entry < 0:
        return 1.0, 1.0, 1.0, 1.0
    tu, tv = slot_uv(mat_table, mat, col, uv0u, uv0v, uv1u, uv1v)
    return sample_texture_lod(tex_pixels, tex_table, entry, tu, tv, 0.0)


@njit(**KERNEL)
def sample_slot_lod(mat_table, mat, col, tex_pixels, tex_table, uv0u, uv0v, uv1u, uv1v, fw0, fw1):
    """As :func:`sample_slot`, filtered for a footprint ``fw0`` / ``fw1`` wide in the units of UV
    set 0 / 1 (:func:`footprint_uv_widths`; <= 0 reads level 0)."""
    entry = int(mat_table[mat, col])
    if entry < 0:
        return 1.0, 1.0, 1.0, 1.0
    tu, tv = slot_uv(mat_table, mat, col, uv0u, uv0v, uv1u, uv1v)
    fw = fw1 if int(mat_table[mat, col + SLOT_TEX_COORD]) == 1 else fw0
    lod = 0.0
    if fw > 0.0:
        det = abs(mat_table[mat, col + SLOT_M00] * mat_table[mat, col + SLOT_M11]
                  - mat_table[mat, col + SLOT_M01] * mat_table[mat, col + SLOT_M10])
        texels = fw * math.sqrt(float(tex_table[entry, TEX_WIDTH]) * float(tex_table[entry, TEX_HEIGHT]) * det)
        if texels > 0.0:
            lod = math.log2(texels)
    return sample_texture_lod(tex_pixels, tex_table, entry, tu, tv, lod)


@njit(**KERNEL)
def footprint_uv_widths(uvs, triangles, tri, area, cone_width, cos_theta):
    """Width of a ray cone's footprint in UV units of sets 0 and 1 at a hit on triangle ``tri``
    of world ``area`` (``light_kernels.triangle_geometry``).

    ``cone_width`` (world units) over sqrt(|cos theta|) is the footprint's isotropic width on the
    surface; sqrt(uv area / world area) converts it to UV units (0 for a degenerate triangle or
    UV set, which then reads level 0).
    """
    c = abs(cos_theta)
    if area <= 0.0 or cone_width <= 0.0 or c <= 0.0:
        return 0.0, 0.0
    i0 = triangles[tri, 0]
    i1 = triangles[tri, 1]
    i2 = triangles[tri, 2]
    w = cone_width / math.sqrt(max(c, 1e-4))
    out0 = 0.0
    out1 = 0.0
    for s in range(2):
        a1u = float(uvs[i1, s, 0]) - float(uvs[i0, s, 0])
        a1v = float(uvs[i1, s, 1]) - float(uvs[i0, s, 1])
        a2u = float(uvs[i2, s, 0]) - float(uvs[i0, s, 0])
        a2v = float(uvs[i2, s, 1]) - float(uvs[i0, s, 1])
        uv_area = 0.5 * abs(a1u * a2v - a1v * a2u)
        width = w * math.sqrt(uv_area / area)
        if s == 0:
            out0 = width
        else:
            out1 = width
    return out0, out1


@njit(**KERNEL)
def sample_texture_batch(tex_pixels, tex_table, entry, uv, lod, out):
    """Batch lookup for tests: uv (N, 2) float64, lod (N,) float64 -> out (N, 4)."""
    for i in range(uv.shape[0]):
        r, g, b, a = sample_texture_lod(tex_pixels, tex_table, entry, uv[i, 0], uv[i, 1], lod[i])
        out[i, 0] = r
        out[i, 1] = g
        out[i, 2] = b
        out[i, 3] = a
