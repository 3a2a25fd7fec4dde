"""Mip levels and the ray-cone level of detail: box-filtered chains, glTF minFilter rules, footprints."""

from __future__ import annotations

import math

import numpy as np
import pytest

from variantshot.geometry.scene import CLAMP_TO_EDGE, LINEAR, NEAREST, Camera, Material, Texture, TextureRef, make_scene
from variantshot.settings import RenderSettings
from variantshot.transport import texture_kernels
from variantshot.transport.integrator import ray_cone, render
from variantshot.transport.textures import (LINEAR_MIPMAP_LINEAR, LINEAR_MIPMAP_NEAREST, NEAREST_MIPMAP_NEAREST,
                                            AtlasBuilder, mip_chain, mip_levels, sample_texture)


def _area_average(img: np.ndarray, h: int, w: int) -> np.ndarray:
    """Independent reference: the exact mean of the piecewise-constant image over each of h x w
    equal output cells (overlap-weighted), the definition of a box-filtered resize."""
    H, W = img.shape[:2]

    def weights(n_in, n_out):
        m = np.zeros((n_out, n_in))
        for i in range(n_out):
            a, b = i * n_in / n_out, (i + 1) * n_in / n_out
            for j in range(int(math.floor(a)), int(math.ceil(b))):
                m[i, j] = max(0.0, min(b, j + 1) - max(a, j))
        return m / m.sum(axis=1, keepdims=True)

    return np.einsum("iy,yxc,jx->ijc", weights(H, h), img.astype(np.float64), weights(W, w))


def _atlas(px, **sampler):
    b = AtlasBuilder([Texture(pixels=px.astype(np.float32), **sampler)])
    entry = b.entry(TextureRef(index=0), False)
    return b.build(), entry


@pytest.mark.parametrize("shape", [(8, 8), (5, 7), (1, 6), (13, 4)])
def test_each_level_is_the_area_average_of_the_one_above(shape):
    rng = np.random.default_rng(3)
    px = rng.random(shape + (4,)).astype(np.float32)
    levels = mip_chain(px)
    assert len(levels) == mip_levels(shape[1], shape[0]) and levels[-1].shape[:2] == (1, 1)
    for top, nxt in zip(levels, levels[1:]):
        h, w = max(1, top.shape[0] // 2), max(1, top.shape[1] // 2)
        assert nxt.shape == (h, w, 4)
        np.testing.assert_allclose(nxt, _area_average(top, h, w), atol=2e-6)


def test_min_filter_decides_whether_levels_exist():
    # glTF 2.0 §5.26: minFilter NEAREST / LINEAR sample the base level only; the *_MIPMAP_* modes use
    # the chain; undefined leaves the choice to the renderer (here: trilinear).
    px = np.zeros((16, 16, 4), np.float32)
    for min_filter, levels in [(NEAREST, 1), (LINEAR, 1), (NEAREST_MIPMAP_NEAREST, 5), (LINEAR_MIPMAP_LINEAR, 5),
                               (None, 5)]:
        atlas, entry = _atlas(px, min_filter=min_filter)
        assert atlas.table.shape[0] == levels and atlas.table[entry, 6] == levels


def _checker(n, cell=1):
    y, x = np.indices((n, n))
    v = (((x // cell) + (y // cell)) % 2).astype(np.float32)
    return np.repeat(v[:, :, None], 4, axis=2)


def test_lod_picks_and_blends_levels():
    # Level k of a 1-texel checker is uniform 0.5 for k >= 1 (2 x 2 block means), level 0 is the
    # checker; a texel-centre lookup at lod 0.25 is 0.75 x level 0 + 0.25 x level 1 (trilinear).
    px = _checker(8)
    atlas, entry = _atlas(px, wrap_s=CLAMP_TO_EDGE, wrap_t=CLAMP_TO_EDGE, min_filter=LINEAR_MIPMAP_LINEAR)
    uv = [[0.5 / 8, 0.5 / 8]]  # centre of texel (0, 0), value 0
    assert sample_texture(atlas, entry, uv, -1.0)[0, 0] == pytest.approx(0.0)  # magnified: level 0
    assert sample_texture(atlas, entry, uv, 0.25)[0, 0] == pytest.approx(0.125, abs=1e-6)
    assert sample_texture(atlas, entry, uv, 2.0)[0, 0] == pytest.approx(0.5, abs=1e-6)
    assert sample_texture(atlas, entry, uv, 99.0)[0, 0] == pytest.approx(0.5, abs=1e-6)  # clamped at 1 x 1
    # LINEAR_MIPMAP_NEAREST picks the nearest level instead of blending
    atlas, entry = _atlas(px, wrap_s=CLAMP_TO_EDGE, wrap_t=CLAMP_TO_EDGE, min_filter=LINEAR_MIPMAP_NEAREST)
    assert sample_texture(atlas, entry, uv, 0.4)[0, 0] == pytest.approx(0.0)
    assert sample_texture(atlas, entry, uv, 0.6)[0, 0] == pytest.approx(0.5, abs=1e-6)
    # minFilter LINEAR: no chain, every lod reads level 0
    atlas, entry = _atlas(px, wrap_s=CLAMP_TO_EDGE, wrap_t=CLAMP_TO_EDGE, min_filter=LINEAR)
    assert sample_texture(atlas, entry, uv, 3.0)[0, 0] == pytest.approx(0.0)


def test_footprint_width_closed_form():
    # Ray-cone footprint (Akenine-Moller et al., Ray Tracing Gems 2019, ch. 20): width w / sqrt(cos)
    # on the surface, times sqrt(uv area / world area).  Triangle of world area 2 x 3 / 2 with UV
    # set 0 of area 0.5 x 0.25 / 2 and UV set 1 of area 1 x 1 / 2.
    positions = np.array([[0, 0, 0], [2, 0, 0], [0, 3, 0]], np.float32)
    uvs = np.zeros((3, 2, 2), np.float32)
    uvs[:, 0] = [[0, 0], [0.5, 0], [0, 0.25]]
    uvs[:, 1] = [[0, 0], [1, 0], [0, 1]]
    triangles = np.array([[0, 1, 2]], np.int32)
    cos_theta = 0.5
    area = _triangle_area(positions)
    fw0, fw1 = texture_kernels.footprint_uv_widths(uvs, triangles, 0, area, 0.01, cos_theta)
    w = 0.01 / math.sqrt(cos_theta)
    assert fw0 == pytest.approx(w * math.sqrt(0.125 / 6.0), rel=1e-6)
    assert fw1 == pytest.approx(w * math.sqrt(1.0 / 6.0), rel=1e-6)


def _triangle_area(positions):
    from variantshot.transport.light_kernels import triangle_geometry

    area = triangle_geometry(positions, np.array([[0, 1, 2]], np.int32), 0)[0]
    assert area == pytest.approx(3.0)  # 2 x 3 / 2
    return area


def _textured_quad(n, cell, min_filter, side=1.0):
    # A camera-facing quad of the given side in the z = 0 plane, UV (0, 0) at its top-left.
    s = side / 2
    positions = [[-s, -s, 0], [s, -s, 0], [s, s, 0], [-s, s, 0]]
    uvs = np.array([[0, 1], [1, 1], [1, 0], [0, 0]], np.float32)
    mat = Material(base_colour_texture=TextureRef(index=0), roughness_factor=1.0)
    tex = Texture(pixels=_checker(n, cell), mag_filter=LINEAR, min_filter=min_filter)
    return make_scene(positions, [[0, 1, 2], [0, 2, 3]], uvs=uvs, materials=[mat], textures=[tex])


def _ortho(ymag):
    m = np.eye(4)
    m[2, 3] = 2.0
    return Camera(name="ortho", kind="orthographic", world_from_camera=m, xmag=ymag, ymag=ymag)


@pytest.mark.parametrize("texels_per_pixel, expect_flat", [(8, True), (2, False)])
def test_cone_filters_a_minified_checker_to_its_mean(texels_per_pixel, expect_flat):
    # Orthographic camera, 1 spp: the cone is one pixel wide, 2 ymag / H (ray_cone); a 256-texel
    # checker of 2-texel cells over a unit quad seen at 8 texels per pixel has lod 3 -- at level 2 the
    # cells are already averaged away, so every pixel's albedo is the checker mean 0.5 (linear).  At 2
    # texels per pixel (lod 1) the cells are still there.  With minFilter LINEAR (no levels) the
    # pixels keep the full 0 / 1 contrast either way.
    n, size = 256, 256 // texels_per_pixel
    ymag = 0.5  # the quad fills the image
    settings = RenderSettings(width=size, height=size, spp=1, seed=1, max_depth=1, threads=1)
    from variantshot.transport.camera import pack_camera

    assert ray_cone(pack_camera(_ortho(ymag), size, size), 1) == (0.0, pytest.approx(2 * ymag / size))
    mipped = render(_textured_quad(n, 2, None), settings, camera=_ortho(ymag)).albedo[..., 0]
    flat = render(_textured_quad(n, 2, LINEAR), settings, camera=_ortho(ymag)).albedo[..., 0]
    inner = (slice(2, -2), slice(2, -2))
    assert mipped[inner].mean() == pytest.approx(0.5, abs=0.02) and flat[inner].mean() == pytest.approx(0.5, abs=0.1)
    assert flat[inner].std() > 0.3
    if expect_flat:
        assert mipped[inner].std() < 0.01
    else:
        assert mipped[inner].std() > 0.1


def test_perspective_cone_spread_is_one_pixel_shrunk_by_spp():
    # One pixel subtends 2 tan(yfov / 2) / H at the image centre; pbrt-v4's max(1/8, 1/sqrt(spp))
    # scaling (from memory).
    from variantshot.transport.camera import pack_camera

    cam = pack_camera(Camera(name="c", kind="perspective", world_from_camera=np.eye(4), yfov_rad=0.6), 200, 100)
    spread, base = ray_cone(cam, 16)
    assert base == 0.0 and spread == pytest.approx(2 * math.tan(0.3) / 100 * 0.25)
    assert ray_cone(cam, 4096)[0] == pytest.approx(2 * math.tan(0.3) / 100 / 8)
