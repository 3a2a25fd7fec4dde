"""Texture lookups in the packed texture atlas: wrap modes, bilinear or nearest filtering.

Atlas layout (built by ``textures.py``):

* ``tex_pixels`` : ``(N, 4) float32`` -- every texture's texels, row-major, concatenated; values
  already decoded to linear where the slot is an sRGB slot (colour textures), stored values
  otherwise (data textures).
* ``tex_table`` : ``(K, 8) int32`` -- per atlas entry: 0 texel offset, 1 width, 2 height,
  3 wrapS, 4 wrapT (glTF enums 10497 REPEAT, 33071 CLAMP_TO_EDGE, 33648 MIRRORED_REPEAT),
  5 nearest (1: magFilter NEAREST), 6-7 spare.

UV (0, 0) is the top-left corner of the image (glTF 2.0 §3.8.4.1 "Images"); texel row 0 is
the top row.

Minification rule (the documented simpler rule in place of mip selection by ray footprint):
every lookup reads level 0 (bilinear, or nearest for magFilter NEAREST) and ignores the
sampler's minFilter; there are no mip levels.  A pixel's many samples are spread over its
footprint by the tent pixel filter (Sobol'-stratified), so the pixel converges to the
texture's average over the footprint -- what a box-filtered mip lookup approximates -- at the
price of more noise on strongly minified, high-contrast textures at low spp.  Glossy and
diffuse bounces read level 0 as well.  ``occlusionTexture`` is not read at all: a path tracer
computes the occlusion it stands for.
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math


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
def sample_texture(tex_pixels, tex_table, entry, u, v):
    """Filtered RGBA of atlas entry ``entry`` at texture coordinates (u, v).

    Returns ``(r, g, b, a)`` floats; (1, 1, 1, 1) when ``entry < 0`` (no texture).
    """
    if entry < 0:
        return 1.0, 1.0, 1.0, 1.0
    offset = tex_table[entry, 0]
    width = tex_table[entry, 1]
    height = tex_table[entry, 2]
    wrap_s = tex_table[entry, 3]
    wrap_t = tex_table[entry, 4]
    if not (math.isfinite(u) and math.isfinite(v)):
        u = 0.0
        v = 0.0
    x = u * width - 0.5
    y = v * height - 0.5
    if tex_table[entry, 5] == 1:
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
def sample_slot(mat_table, mat, col, tex_pixels, tex_table, uv0u, uv0v, uv1u, uv1v):
    """RGBA of the material texture slot whose 8 columns start at ``col`` (layout in bsdf_kernels).

    The slot holds: atlas entry (-1: none), texCoord set, then the 2x3 KHR_texture_transform
    matrix (m00 m01 m02 m10 m11 m12): u' = m00 u + m01 v + m02, v' = m10 u + m11 v + m12.
    """
    entry = int(mat_table[mat, col])
    if entry < 0:
        return 1.0, 1.0, 1.0, 1.0
    if int(mat_table[mat, col + 1]) == 1:
        u = uv1u
        v = uv1v
    else:
        u = uv0u
        v = uv0v
    tu = mat_table[mat, col + 2] * u + mat_table[mat, col + 3] * v + mat_table[mat, col + 4]
    tv = mat_table[mat, col + 5] * u + mat_table[mat, col + 6] * v + mat_table[mat, col + 7]
    return sample_texture(tex_pixels, tex_table, entry, tu, tv)


@njit(**KERNEL)
def sample_texture_batch(tex_pixels, tex_table, entry, uv, out):
    """Batch lookup for tests: uv (N, 2) float64 -> out (N, 4)."""
    for i in range(uv.shape[0]):
        r, g, b, a = sample_texture(tex_pixels, tex_table, entry, uv[i, 0], uv[i, 1])
        out[i, 0] = r
        out[i, 1] = g
        out[i, 2] = b
        out[i, 3] = a
