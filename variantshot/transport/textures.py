"""The texture atlas: every texture a material slot uses, decoded and packed for the kernels.

A texture used by a colour slot (base colour, emissive) is decoded from sRGB to linear
(IEC 61966-2-1, glTF 2.0 §3.9.2) *before* filtering; a data slot (metallic-roughness, normal)
keeps the stored values.  A texture used both ways gets two atlas entries.  Layout of the
arrays: see ``texture_kernels``.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from ..errors import RenderError
from ..geometry.scene import NEAREST, Texture, TextureRef


class TextureAtlas(NamedTuple):
    """Packed textures.

    Attributes
    ----------
    pixels : (N, 4) float32 ndarray
        All texels, row-major per texture, concatenated.
    table : (K, 8) int32 ndarray
        Per entry: offset, width, height, wrapS, wrapT, nearest, spare, spare.
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
            self._entries[key] = len(self._order)
            self._order.append(key)
        return self._entries[key]

    def build(self) -> TextureAtlas:
        from ..imaging.colour import srgb_decode

        chunks = []
        table = np.zeros((max(len(self._order), 1), 8), np.int32)
        offset = 0
        for k, (index, srgb) in enumerate(self._order):
            tex = self._textures[index]
            px = np.asarray(tex.pixels, dtype=np.float32)
            if px.ndim != 3 or px.shape[2] != 4 or px.shape[0] < 1 or px.shape[1] < 1:
                raise RenderError(f"{self._source}: texture {index} ({tex.name!r}) pixels must be (H, W, 4)")
            px = px.reshape(-1, 4).copy()
            if srgb:
                px[:, :3] = srgb_decode(px[:, :3].astype(np.float64)).astype(np.float32)
            h, w = tex.pixels.shape[:2]
            # bilinear unless magFilter is NEAREST (no mipmaps: many samples per pixel average texels)
            table[k] = (offset, w, h, tex.wrap_s, tex.wrap_t, 1 if tex.mag_filter == NEAREST else 0, 0, 0)
            chunks.append(px)
            offset += px.shape[0]
        if not chunks:
            chunks = [np.ones((1, 4), np.float32)]
            table[0] = (0, 1, 1, 10497, 10497, 0, 0, 0)
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


def sample_texture(atlas: TextureAtlas, entry: int, uv) -> np.ndarray:
    """Filtered RGBA ``(N, 4) float64`` of an atlas entry at ``uv`` ``(N, 2)`` (tests and tools)."""
    from . import texture_kernels

    uv = np.ascontiguousarray(uv, dtype=np.float64).reshape(-1, 2)
    out = np.zeros((uv.shape[0], 4), np.float64)
    texture_kernels.sample_texture_batch(atlas.pixels, atlas.table, int(entry), uv, out)
    return out
