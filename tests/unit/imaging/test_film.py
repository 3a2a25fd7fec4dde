"""Film sums and resolve: means, variance of the mean, normals, coverage and depth."""

from __future__ import annotations

import numpy as np

from variantshot.imaging.film import FilmSums, resolve_film


def test_resolve_matches_numpy_statistics():
    rng = np.random.default_rng(0)
    n, h, w = 37, 3, 5
    samples = rng.gamma(2.0, 0.3, size=(n, h, w, 3))
    sums = FilmSums.zeros(w, h)
    for s in samples:
        sums.rgb += s
        sums.rgb_sq += s * s
    normals = rng.normal(size=(h, w, 3))
    sums.normal[:] = normals * 7
    sums.alpha[:] = 18.5
    sums.depth[:] = 10.0
    sums.depth_n[:] = 4.0
    sums.depth_n[0, 0] = 0
    sums.n = n
    film = resolve_film(sums)
    np.testing.assert_allclose(film.radiance, samples.mean(axis=0), rtol=1e-12)
    # variance of the mean: unbiased sample variance / n (numpy var with ddof=1)
    np.testing.assert_allclose(film.variance, samples.var(axis=0, ddof=1) / n, rtol=1e-9)
    np.testing.assert_allclose(film.normal, normals / np.linalg.norm(normals, axis=-1, keepdims=True), rtol=1e-12)
    np.testing.assert_allclose(film.alpha, 0.5)
    assert np.isinf(film.depth[0, 0]) and film.depth[1, 1] == 2.5
    assert film.spp == n and film.radiance.dtype == np.float64 and film.radiance.shape == (h, w, 3)


def test_mean_sampled_luminance_matches_numpy():
    # Rec. ITU-R BT.709 / IEC 61966-2-1 luminance weights of linear sRGB; unsampled pixels left out.
    from variantshot.imaging.film_kernels import mean_sampled_luminance

    rng = np.random.default_rng(4)
    sums = rng.random((13, 17, 3)) * 40
    n = rng.integers(0, 5, (13, 17)).astype(np.float64)
    sampled = n > 0
    lum = (sums / np.maximum(n, 1)[..., None]) @ np.array([0.2126, 0.7152, 0.0722])
    assert np.isclose(mean_sampled_luminance(sums, n), lum[sampled].mean(), rtol=1e-12, atol=0.0)
    assert mean_sampled_luminance(sums, np.zeros((13, 17))) == 0.0
