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
