"""The texture atlas: every texture a material slot uses, decoded and packed for the kernels.

A texture used by a colour slot (base colour, emissive, and the KHR extensions' sheenColorTexture
and specularColorTexture) is decoded from sRGB to linear (IEC 61966-2-1, glTF 2.0 §3.9.2) *before*
filtering; a data slot (metallic-roughness, normal, the other extension textures) keeps the
stored values.  A texture used both ways gets two atlas entries.  Each entry whose
sampler allows mipmaps (glTF 2.0 §5.26 minFilter *_MIPMAP_* or undefined) gets its full chain
of levels down to 1 x 1, each level the box-filtered (area-average) halving of the one above,
computed in the linear values.  Layout of the arrays and the level of detail: see
``texture_kernels``.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from ..errors import RenderError
from ..geometry.scene import NEAREST, Texture, TextureRef

# glTF 2.0 sampler minFilter enums (§5.26)
NEAREST_MIPMAP_NEAREST, LINEAR_MIPMAP_NEAREST, NEAREST_MIPMAP_LINEAR, LINEAR_MIPMAP_LINEAR = 9984, 9985, 9986, 9987
_MIN_NEAREST_TEXEL = 1
_MIN_NEAREST_LEVEL = 2


def min_filter_mode(min_filter: int | None) -> tuple[bool, int]:
    """(uses mip levels, minification mode bits of ``texture_kernels``) of a glTF minFilter."""
    if min_filter is None:
        return True, 0  # undefined: our choice, trilinear
    mipmapped = min_filter in (NEAREST_MIPMAP_NEAREST, LINEAR_MIPMAP_NEAREST, NEAREST_MIPMAP_LINEAR,
                               LINEAR_MIPMAP_LINEAR)
    bits = 0
    if min_filter in (NEAREST, NEAREST_MIPMAP_NEAREST, NEAREST_MIPMAP_LINEAR):
        bits |= _MIN_NEAREST_TEXEL
    if min_filter in (NEAREST_MIPMAP_NEAREST, LINEAR_MIPMAP_NEAREST):
        bits |= _MIN_NEAREST_LEVEL
    return mipmapped, bits


def mip_levels(width: int, height: int) -> int:
    """Levels of a full chain: halve (rounding down, never below 1) until 1 x 1."""
    n = 1
    while width > 1 or height > 1:
        width, height = max(1, width // 2), max(1, height // 2)
        n += 1
    return n


def _halve_axis(a: np.ndarray, axis: int) -> np.ndarray:
    """Area-average ``a`` along ``axis`` from n to max(1, n // 2) samples: output cell i covers
    [i r, (i + 1) r) of the input, r = n / out, each input texel weighted by its overlap."""
    n = a.shape[axis]
    out = max(1, n // 2)
    if n == 2 * out:
        a = np.moveaxis(a, axis, 0)
        return np.moveaxis(0.5 * (a[0::2] + a[1::2]), 0, axis)
    r = n / out
    taps = int(math.ceil(r)) + 1
    start = np.floor(np.arange(out) * r).astype(np.int64)
    idx = np.minimum(start[:, None] + np.arange(taps)[None, :], n - 1)
    lo = np.arange(out)[:, None] * r
    hi = lo + r
    j = start[:, None] + np.arange(taps)[None, :]
    w = np.clip(np.minimum(hi, j + 1) - np.maximum(lo, j), 0.0, None) / r
    a = np.moveaxis(a, axis, 0)
    res = sum(w[:, k].reshape((-1,) + (1,) * (a.ndim - 1)) * a[idx[:, k]] for k in range(taps))
    return np.moveaxis(res, 0, axis)


def mip_chain(pixels: np.ndarray) -> list[np.ndarray]:
    """Every level of ``pixels`` ``(H, W, 4) float32``: level k + 1 is level k area-averaged to
    (max(1, H // 2), max(1, W // 2)) -- an exact box filter, odd sizes included."""
    levels = [np.ascontiguousarray(pixels, dtype=np.float32)]
    while levels[-1].shape[0] > 1 or levels[-1].shape[1] > 1:
        top = levels[-1].astype(np.float64)
        nxt = _halve_axis(_halve_axis(top, 0), 1)
        levels.append(np.ascontiguousarray(nxt, dtype=np.float32))
    return levels


class TextureAtlas(NamedTuple):
    """Packed textures.

    Attributes
    ----------
    pixels : (N, 4) float32 ndarray
        All texels, row-major per texture, concatenated.
    table : (K, 8) int32 ndarray
        Per level row: offset, width, height, wrapS, wrapT, magnification nearest, number of
        levels, minification mode (``texture_kernels``); an entry is the row of its level 0.
    """

    pixels: np.ndarray
    table: np.ndarray


class AtlasBuilder:
    """Collects (texture, colour space) pairs and packs them into a :class:`TextureAtlas`."""

    def __init__(self, textures: list[Texture], source: str = "<memory>"):
        self._textures = textures
        self._source = source
        self._entries: dict[tuple[int, bool], int] = {}
        self._order: list[tuple[int, bool]] = []
        self._rows = 0

    @property
    def n_textures(self) -> int:
        """How many textures the scene has (valid indices are 0 .. n_textures - 1)."""
        return len(self._textures)

    def entry(self, ref: TextureRef | None, srgb: bool) -> int:
        """Atlas entry for a material's texture reference (-1 when there is none)."""
        if ref is None:
            return -1
        if not 0 <= ref.index < len(self._textures):
            raise RenderError(
                f"{self._source}: texture {ref.index} does not exist (the scene has {len(self._textures)})"
            )
        key = (int(ref.index), bool(srgb))
        if key not in self._entries:
            self._entries[key] = self._rows
            self._order.append(key)
            self._rows += self._level_count(self._textures[ref.index])
        return self._entries[key]

    @staticmethod
    def _level_count(tex: Texture) -> int:
        shape = np.shape(tex.pixels)
        if len(shape) != 3 or shape[0] < 1 or shape[1] < 1:
            return 1  # build() reports the bad shape
        return mip_levels(shape[1], shape[0]) if min_filter_mode(tex.min_filter)[0] else 1

    def build(self) -> TextureAtlas:
        from ..imaging.colour import srgb_decode

        chunks = []
        table = np.zeros((max(self._rows, 1), 8), np.int32)
        offset = 0
        for index, srgb in self._order:
            row = self._entries[(index, srgb)]
            tex = self._textures[index]
            px = np.asarray(tex.pixels, dtype=np.float32)
            if px.ndim != 3 or px.shape[2] != 4 or px.shape[0] < 1 or px.shape[1] < 1:
                raise RenderError(f"{self._source}: texture {index} ({tex.name!r}) pixels must be (H, W, 4)")
            px = px.copy()
            if srgb:
                px[..., :3] = srgb_decode(px[..., :3].astype(np.float64)).astype(np.float32)
            mipmapped, min_bits = min_filter_mode(tex.min_filter)
            levels = mip_chain(px) if mipmapped else [px]
            nearest = 1 if tex.mag_filter == NEAREST else 0
            for k, level in enumerate(levels):
                h, w = level.shape[:2]
                table[row + k] = (offset, w, h, tex.wrap_s, tex.wrap_t, nearest, len(levels), min_bits)
                chunks.append(level.reshape(-1, 4))
                offset += h * w
        if not chunks:
            chunks = [np.ones((1, 4), np.float32)]
            table[0] = (0, 1, 1, 10497, 10497, 0, 1, 0)
        return TextureAtlas(np.ascontiguousarray(np.concatenate(chunks, axis=0)), table)


def transform_matrix(ref: TextureRef | None) -> tuple[float, float, float, float, float, float]:
    """2x3 matrix (m00, m01, m02, m10, m11, m12) of KHR_texture_transform: T(offset) R(rotation) S(scale).

    The rotation turns UVs counter-clockwise as the extension defines it; its README example
    (offset (0, 1), rotation pi/2, scale 0.5 picks the lower-left quadrant of the image) fixes
    the sign: u' = cos s_u u + sin s_v v + o_u, v' = -sin s_u u + cos s_v v + o_v.
    """
    if ref is None or ref.transform is None:
        return (1.0, 0.0, 0.0, 0.0, 1.0, 0.0)
    t = ref.transform
    c = float(np.cos(t.rotation_rad))
    s = float(np.sin(t.rotation_rad))
    su, sv = float(t.scale[0]), float(t.scale[1])
    ou, ov = float(t.offset[0]), float(t.offset[1])
    return (c * su, s * sv, ou, -s * su, c * sv, ov)


def sample_texture(atlas: TextureAtlas, entry: int, uv, lod=0.0) -> np.ndarray:
    """Filtered RGBA ``(N, 4) float64`` of an atlas entry at ``uv`` ``(N, 2)`` and level of
    detail ``lod`` (scalar or ``(N,)``; 0 reads level 0) (tests and tools)."""
    from . import texture_kernels

    uv = np.ascontiguousarray(uv, dtype=np.float64).reshape(-1, 2)
    lod = np.ascontiguousarray(np.broadcast_to(np.asarray(lod, np.float64), (uv.shape[0],)))
    out = np.zeros((uv.shape[0], 4), np.float64)
    texture_kernels.sample_texture_batch(atlas.pixels, atlas.table, int(entry), uv, lod, out)
    return out
