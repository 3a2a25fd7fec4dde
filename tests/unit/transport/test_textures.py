"""Texture atlas and lookups: sRGB decoding, glTF wrap modes, filtering, KHR_texture_transform."""

from __future__ import annotations

import math

import colour
import numpy as np
import pytest

from variantshot.geometry.scene import (CLAMP_TO_EDGE, MIRRORED_REPEAT, NEAREST, REPEAT, Material, Texture,
                                        TextureRef, TextureTransform, make_scene)
from variantshot.transport.materials import pack_materials
from variantshot.transport.textures import AtlasBuilder, sample_texture, transform_matrix


def _atlas(pixels, srgb=False, **sampler):
    b = AtlasBuilder([Texture(pixels=pixels.astype(np.float32), **sampler)])
    entry = b.entry(TextureRef(index=0), srgb)
    return b.build(), entry


def test_colour_slots_are_srgb_decoded_before_filtering():
    # IEC 61966-2-1 decode, checked against colour-science's cctf_decoding (REFERENCES §1).
    rng = np.random.default_rng(0)
    px = rng.random((5, 7, 4))
    atlas, entry = _atlas(px, srgb=True, mag_filter=NEAREST)
    h, w = px.shape[:2]
    uv = np.array([[(x + 0.5) / w, (y + 0.5) / h] for y in range(h) for x in range(w)])
    got = sample_texture(atlas, entry, uv).reshape(h, w, 4)
    np.testing.assert_allclose(got[..., :3], colour.cctf_decoding(px[..., :3].astype(np.float32), function="sRGB"),
                               atol=2e-6)
    np.testing.assert_allclose(got[..., 3], px[..., 3].astype(np.float32), atol=1e-7)  # alpha stays linear


@pytest.mark.parametrize("mode, pad", [(REPEAT, "wrap"), (CLAMP_TO_EDGE, "edge"), (MIRRORED_REPEAT, "symmetric")])
def test_wrap_modes_match_numpy_padding(mode, pad):
    # glTF 2.0 §5.26 sampler wrapS/wrapT: REPEAT, CLAMP_TO_EDGE, MIRRORED_REPEAT behave like
    # numpy.pad's wrap, edge and symmetric modes on texel indices.
    rng = np.random.default_rng(1)
    px = rng.random((4, 6, 4))
    atlas, entry = _atlas(px, mag_filter=NEAREST, wrap_s=mode, wrap_t=mode)
    big = np.pad(px, ((8, 8), (12, 12), (0, 0)), mode=pad)
    ys, xs = np.meshgrid(np.arange(-8, 12), np.arange(-12, 18), indexing="ij")
    uv = np.stack([(xs.ravel() + 0.5) / 6, (ys.ravel() + 0.5) / 4], 1)
    got = sample_texture(atlas, entry, uv)
    np.testing.assert_allclose(got, big[ys.ravel() + 8, xs.ravel() + 12].astype(np.float32), atol=1e-7)


def test_bilinear_filter_interpolates_between_texel_centres():
    px = np.zeros((2, 2, 4))
    px[0, 0] = 1.0  # top-left texel (UV origin top-left, glTF §3.8.4.1)
    atlas, entry = _atlas(px, wrap_s=CLAMP_TO_EDGE, wrap_t=CLAMP_TO_EDGE)
    got = sample_texture(atlas, entry, [[0.25, 0.25], [0.5, 0.25], [0.5, 0.5], [0.75, 0.75], [0.0, 0.0]])
    np.testing.assert_allclose(got[:, 0], [1.0, 0.5, 0.25, 0.0, 1.0], atol=1e-7)


def test_texture_transform_readme_example():
    # KHR_texture_transform README: offset (0, 1), rotation pi/2, scale (0.5, 0.5) "utilizes only the
    # lower left quadrant of the source image, rotated clockwise 90 degrees".
    ref = TextureRef(index=0, transform=TextureTransform(offset=(0.0, 1.0), rotation_rad=math.pi / 2,
                                                         scale=(0.5, 0.5)))
    m = np.array(transform_matrix(ref)).reshape(2, 3)
    corners = np.array([[0, 0, 1], [1, 0, 1], [0, 1, 1], [1, 1, 1]], float)
    out = corners @ m.T
    assert np.all(out[:, 0] >= -1e-12) and np.all(out[:, 0] <= 0.5 + 1e-12)
    assert np.all(out[:, 1] >= 0.5 - 1e-12) and np.all(out[:, 1] <= 1.0 + 1e-12)
    # second README example: offset (0, 1), scale (1, -1) flips v (bottom-left origin)
    m2 = np.array(transform_matrix(TextureRef(index=0, transform=TextureTransform(offset=(0, 1), scale=(1, -1)))))
    np.testing.assert_allclose(m2, [1, 0, 0, 0, -1, 1], atol=1e-12)


def test_a_texture_used_as_colour_and_data_gets_two_entries():
    px = np.full((2, 2, 4), 0.5, np.float32)
    ref = TextureRef(index=0)
    mat = Material(base_colour_texture=ref, metallic_roughness_texture=ref, emissive_texture=ref)
    scene = make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]], materials=[mat],
                       textures=[Texture(pixels=px)])
    table, atlas = pack_materials(scene)
    assert table[0, 16] == table[0, 32] != table[0, 24]
    assert atlas.table.shape[0] == 4  # two entries of two levels (2 x 2, 1 x 1) each
    lin = sample_texture(atlas, int(table[0, 16]), [[0.5, 0.5]])[0, 0]
    raw = sample_texture(atlas, int(table[0, 24]), [[0.5, 0.5]])[0, 0]
    assert raw == pytest.approx(0.5) and lin == pytest.approx(0.21404114, abs=1e-6)  # sRGB 0.5 -> 0.214041
