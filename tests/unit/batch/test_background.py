"""Background compositing: exact white outside the shadow, shadow kept, transparent matte."""

import io

import numpy as np
import pytest

from variantshot.imaging.background import (
    box_blur,
    composite_transparent,
    composite_white,
    floor_behind,
    snap_shadow,
)


def _scene(h=64, w=64):
    yy, xx = np.mgrid[0:h, 0:w]
    floor = np.full((h, w, 3), 0.6)
    cov = ((yy - 28) ** 2 + (xx - 32) ** 2 < 100).astype(float)
    cov[(yy - 28) ** 2 + (xx - 32) ** 2 == 100] = 0.5  # a ring of edge pixels
    ratio = 1.0 - 0.9 * np.exp(-(((yy - 42) / 4.0) ** 2 + ((xx - 32) / 10.0) ** 2))
    product = np.array([0.3, 0.1, 0.05])
    rgb = floor * ratio[..., None] * (1 - cov[..., None]) + cov[..., None] * product
    return rgb, cov, ratio, product


def test_box_blur_matches_scipy_uniform_filter():
    scipy_ndimage = pytest.importorskip("scipy.ndimage")
    a = np.random.default_rng(0).random((20, 30))
    ref = scipy_ndimage.uniform_filter(a, size=5, mode="nearest")  # scipy as the reference
    np.testing.assert_allclose(box_blur(a, 2), ref, atol=1e-12)


def test_snap_is_one_stop_over_white():
    # a sweep lit 1 stop (x2) over paper white burns out wherever it gets at least half its light
    r = np.array([0.0, 0.25, 0.5, 0.7, 1.0])
    np.testing.assert_array_equal(snap_shadow(r, 1.0), [0.0, 0.5, 1.0, 1.0, 1.0])
    np.testing.assert_array_equal(snap_shadow(r, 0.0), r)


def test_unshadowed_background_is_exactly_white_and_encodes_to_255():
    from PIL import Image

    from variantshot.imaging.files import encode_image

    rgb, cov, ratio, product = _scene()
    s = snap_shadow(ratio, 1.0)
    out = composite_white(rgb, cov, 2.0, s)
    outside = (cov == 0) & (ratio >= 0.5)
    assert np.all(out[outside] == 1.0)
    # exactly (255, 255, 255) after sRGB encoding (IEC 61966-2-1: encode(1) = 1), dither on
    png = encode_image(out, "png", dither=True, seed=3)
    codes = np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))
    assert np.all(codes[outside] == 255)
    deep = (cov == 0) & (ratio < 0.3)
    assert deep.any() and np.all(out[deep] < 0.6)
    np.testing.assert_allclose(out[cov == 1], 2.0 * rgb[cov == 1])
    # edge pixels: half product (exposed), half white background - no grey fringe from the floor
    edge = (cov == 0.5) & (np.mgrid[0:64, 0:64][0] < 24)  # the top of the ring, far from the shadow
    assert edge.any()
    np.testing.assert_allclose(out[edge], np.broadcast_to(0.5 * 2.0 * product + 0.5, out[edge].shape), atol=0.02)


def test_floor_behind_recovers_the_floor_next_to_the_product():
    rgb, cov, ratio, _ = _scene()
    f = floor_behind(rgb, cov, radius=3)
    edge = (cov == 0.5) & (np.mgrid[0:64, 0:64][0] < 24)  # the top of the ring, far from the shadow
    np.testing.assert_allclose(f[edge], 0.6, atol=0.01)


def test_transparent_matte_alpha():
    rgb, cov, ratio, product = _scene()
    s = snap_shadow(ratio, 1.0)
    colour, alpha = composite_transparent(rgb, cov, 1.0, s)
    assert np.all(alpha[cov == 1] == 1.0)
    far = (cov == 0) & (ratio >= 0.5)
    assert np.all(alpha[far] == 0.0)
    deep = (cov == 0) & (ratio < 0.3)
    # Porter & Duff (1984) "over": a black matte of opacity 1 - s under the product
    np.testing.assert_allclose(alpha[deep], 1.0 - s[deep])
    assert np.all(colour[deep] == 0.0)
    edge = (cov == 0.5) & (np.mgrid[0:64, 0:64][0] < 24)  # the top of the ring, far from the shadow
    np.testing.assert_allclose(colour[edge], np.broadcast_to(product, colour[edge].shape), atol=0.02)  # un-premultiplied
