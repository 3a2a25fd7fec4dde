"""review.metrics against images whose answer follows from how they are drawn (pixel arithmetic)."""

import numpy as np
import pytest

from variantshot.review import metrics


def frame(h=100, w=100):
    return np.full((h, w, 3), 255, np.uint8)


def box_mask(h, w, y0, x0, y1, x1):
    m = np.zeros((h, w), bool)
    m[y0:y1, x0:x1] = True
    return m


def test_fill_ratio_is_longest_side_over_frame():
    # a 60 x 85 box in a 100 x 100 frame: the longest side is 85 px -> 0.85 (REFERENCES §8 reading)
    assert metrics.fill_ratio(box_mask(100, 100, 10, 10, 70, 95)) == pytest.approx(0.85)
    # non-square frame: each side is compared with its own frame side: 40/50 > 60/100
    assert metrics.fill_ratio(box_mask(50, 100, 5, 10, 45, 70)) == pytest.approx(0.8)
    assert metrics.fill_ratio(np.zeros((10, 10), bool)) == 0.0


def test_centring_offset_signs_and_size():
    # box x 30..70 is centred in x; y 40..100 has centre 70 -> +0.2 of the frame (downwards)
    dx, dy = metrics.centring_offset(box_mask(100, 100, 40, 30, 100, 70))
    assert dx == pytest.approx(0.0)
    assert dy == pytest.approx(0.2)
    dx, _ = metrics.centring_offset(box_mask(100, 100, 0, 0, 10, 10))
    assert dx == pytest.approx(-0.45)
    assert all(np.isnan(metrics.centring_offset(np.zeros((4, 4), bool))))


def test_edge_clipping_counts_border_pixels():
    assert metrics.edge_clipping(box_mask(100, 100, 10, 10, 90, 90)) == 0.0
    # a box touching the right edge over 50 rows: 50 of the 396 border pixels
    assert metrics.edge_clipping(box_mask(100, 100, 25, 60, 75, 100)) == pytest.approx(50 / 396)


def test_white_purity_ignores_excluded_zone_and_counts_exact_white():
    img = frame()
    img[0:10, :, :] = 254  # a near-white band: not exactly white, must count against purity
    exclude = box_mask(100, 100, 40, 40, 60, 60)
    img[40:60, 40:60] = 0  # the product, excluded
    expected = (100 * 100 - 400 - 1000) / (100 * 100 - 400)
    assert metrics.white_purity(img, exclude) == pytest.approx(expected)
    assert metrics.white_purity(frame(), np.zeros((100, 100), bool)) == 1.0


def test_shadow_zone_grows_sideways_and_down():
    m = box_mask(100, 100, 20, 40, 60, 60)
    zone = metrics.shadow_zone(m, margin_frac=0.1)
    ys, xs = np.nonzero(zone)
    assert (ys.min(), ys.max() + 1, xs.min(), xs.max() + 1) == (18, 70, 30, 70)


def test_clipped_highlights_only_all_channels():
    img = frame()
    img[:] = (120, 40, 40)
    img[0:5, 0:10] = (255, 0, 0)  # saturated red: detail kept in G, B; not blown
    img[10:12, 0:10] = 255  # 20 blown pixels
    mask = np.ones((100, 100), bool)
    assert metrics.clipped_highlights(img, mask) == pytest.approx(20 / 10000)


def test_masks_from_coverage_and_non_white():
    cov = np.zeros((4, 4))
    cov[1:3, 1:3] = 0.6
    cov[0, 0] = 0.4
    assert metrics.mask_from_coverage(cov).sum() == 4
    alpha8 = (cov * 255).astype(np.uint8)
    assert metrics.mask_from_coverage(alpha8).sum() == 4
    img = frame(4, 4)
    img[2, 2] = (255, 255, 250)
    assert metrics.mask_from_non_white(img).sum() == 1
    with pytest.raises(TypeError):
        metrics.mask_from_non_white(img.astype(np.float64))


def test_relative_standard_error_matches_sample_statistics():
    # Monte Carlo check (REFERENCES §6g: standard error = sigma / sqrt(N)): per pixel, the mean of
    # N samples of a uniform(0, 2) variable (mean 1, variance 1/3) has variance 1/(3N).
    rng = np.random.default_rng(1)
    n = 64
    samples = rng.uniform(0.0, 2.0, size=(n, 32, 32, 3))
    mean = samples.mean(axis=0)
    var_of_mean = samples.var(axis=0, ddof=1) / n
    mask = np.ones((32, 32), bool)
    w = np.array([0.2126, 0.7152, 0.0722])
    expected = np.sqrt((w * w).sum() / (3 * n)) / 1.0
    # and the spread actually seen between pixels of the (flat) image
    seen = (mean @ w).std() / (mean @ w).mean()
    for statistic in ("median", "rms"):
        rse = metrics.relative_standard_error(mean, var_of_mean, mask, statistic=statistic)
        assert rse == pytest.approx(expected, rel=0.05)
        assert rse == pytest.approx(seen, rel=0.1)
    assert np.isnan(metrics.relative_standard_error(mean, var_of_mean, np.zeros((32, 32), bool)))


def test_median_noise_ignores_a_few_fireflies():
    mean = np.full((20, 20, 3), 0.5)
    var = np.full((20, 20, 3), (0.5 * 0.02) ** 2)
    var[0, :3] = 1e4  # three fireflies
    mask = np.ones((20, 20), bool)
    assert metrics.relative_standard_error(mean, var, mask) == pytest.approx(0.02 * np.sqrt(
        0.2126**2 + 0.7152**2 + 0.0722**2), rel=1e-6)
    assert metrics.relative_standard_error(mean, var, mask, statistic="rms") > 1.0


def test_mean_srgb8_averages_in_linear_light():
    # half black, half white: linear mean 0.5 -> sRGB 0.7354 (IEC 61966-2-1; REFERENCES §1 table)
    img = frame(2, 2)
    img[0] = 0
    m = metrics.mean_srgb8(img, np.ones((2, 2), bool))
    assert m == pytest.approx([0.735357 * 255] * 3, abs=1e-3)
