"""Background compositing: exact white outside the shadow, shadow kept, transparent matte."""

import io

import numpy as np
import pytest

from variantshot.imaging.background import (
    SHADOW_SNAP,
    box_blur,
    composite_transparent,
    composite_white,
    shadow_ratio,
)


def _scene(h=64, w=64, seed=1):
    rng = np.random.default_rng(seed)
    floor = 0.6 + 0.05 * rng.standard_normal((h, w, 3))  # noisy floor, the same in both renders
    without = floor.copy()
    with_ = floor.copy()
    yy, xx = np.mgrid[0:h, 0:w]
    # a product disc in the middle, and a soft shadow below it that halves the floor at most
    cov = ((yy - 28) ** 2 + (xx - 32) ** 2 < 100).astype(float)
    shadow = 1.0 - 0.5 * np.exp(-(((yy - 42) / 4.0) ** 2 + ((xx - 32) / 10.0) ** 2))
    with_ *= shadow[..., None]
    with_[cov > 0] = (0.3, 0.1, 0.05)
    return with_, without, cov, shadow


def test_box_blur_matches_scipy_uniform_filter():
    scipy_ndimage = pytest.importorskip("scipy.ndimage")
    a = np.random.default_rng(0).random((20, 30))
    ref = scipy_ndimage.uniform_filter(a, size=5, mode="nearest")  # scipy as the reference
    np.testing.assert_allclose(box_blur(a, 2), ref, atol=1e-12)


def test_unshadowed_background_is_exactly_white_and_encodes_to_255():
    from PIL import Image

    from variantshot.imaging.files import encode_image

    with_, without, cov, true_shadow = _scene()
    rgb, s = composite_white(with_, without, cov, exposure_scale=2.0)
    outside = (cov == 0) & (true_shadow > 1 - 1e-6)
    # identical floor samples -> ratio exactly 1 -> exactly 1.0 in linear ...
    assert np.all(rgb[outside] == 1.0)
    # ... and exactly (255, 255, 255) after sRGB encoding (IEC 61966-2-1: encode(1) = 1) with dither
    png = encode_image(rgb, "png", dither=True, seed=3)
    codes = np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))
    assert np.all(codes[outside] == 255)
    # the shadow is kept where it is deeper than the snap threshold
    deep = (cov == 0) & (true_shadow < 0.8)
    assert deep.any() and np.all(rgb[deep].max(axis=-1) < 0.9)
    # product pixels are the exposed render
    np.testing.assert_allclose(rgb[cov == 1], 2.0 * with_[cov == 1])


def test_shadow_ratio_recovers_a_known_shadow():
    with_, without, cov, true_shadow = _scene()
    s = shadow_ratio(with_, without, cov, blur_frac=0.0)  # radius floors at 1 px
    region = (cov == 0) & (true_shadow < 1 - 2 * SHADOW_SNAP)
    region &= box_blur(cov, 1) == 0  # away from the product's blur footprint
    expected = np.clip(true_shadow / (1 - SHADOW_SNAP), 0, 1)
    assert np.abs(s[region] - expected[region]).max() < 0.03


def test_transparent_matte_alpha():
    with_, without, cov, true_shadow = _scene()
    rgb, alpha, s = composite_transparent(with_, without, cov, exposure_scale=1.0)
    assert np.all(alpha[cov == 1] == 1.0)
    far = (cov == 0) & (true_shadow > 1 - 1e-6)
    assert np.all(alpha[far] == 0.0)
    deep = (cov == 0) & (true_shadow < 0.8)
    # Porter & Duff (1984) "over": a black matte of opacity 1 - s
    np.testing.assert_allclose(alpha[deep], 1.0 - s[deep])
    assert np.all(rgb[deep] == 0.0)
