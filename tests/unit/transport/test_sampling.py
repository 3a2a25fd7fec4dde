"""The hashed sampler and the warps of sampling_kernels (pbrt-v4 util/sampling_test.cpp style)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from variantshot.transport import sampling_kernels as sk


def _uniforms(pixels, samples, dims, seed=0):
    return np.array([[sk.uniform(p, s, d, seed) for d in dims] for p in pixels for s in samples])


def test_uniform_is_deterministic_and_in_unit_interval():
    a = _uniforms(range(20), range(20), range(4))
    b = _uniforms(range(20), range(20), range(4))
    assert np.array_equal(a, b)
    assert a.min() >= 0.0 and a.max() < 1.0
    assert not np.array_equal(a, _uniforms(range(20), range(20), range(4), seed=1))


def test_uniform_passes_chi_square_and_independence():
    # Pearson chi-square on 64 equal bins (scipy.stats.chisquare) for values streamed along
    # each of the hash's inputs, and near-zero correlation between neighbouring dimensions.
    u = _uniforms(range(64), range(64), range(3)).reshape(-1, 3)
    for col in range(3):
        counts = np.bincount((u[:, col] * 64).astype(int), minlength=64)
        assert stats.chisquare(counts).pvalue > 1e-3
    r = np.corrcoef(u.T)
    assert np.all(np.abs(r[np.triu_indices(3, 1)]) < 0.03)
    # 2-D uniformity of (dim 0, dim 1) pairs: 16 x 16 bins
    counts = np.bincount((u[:, 0] * 16).astype(int) * 16 + (u[:, 1] * 16).astype(int), minlength=256)
    assert stats.chisquare(counts).pvalue > 1e-3


def test_cosine_hemisphere_round_trip_and_density():
    rng = np.random.default_rng(0)
    for u0, u1 in rng.random((200, 2)):
        x, y, z = sk.sample_cosine_hemisphere(u0, u1)
        assert x * x + y * y + z * z == pytest.approx(1.0, abs=1e-12)
        v0, v1 = sk.invert_cosine_hemisphere_sample(x, y, z)
        assert (v0, v1) == pytest.approx((u0, u1), abs=1e-9)
    # the density integrates to 1 over the hemisphere; cos(theta) of samples is ~ sqrt(U) (KS test)
    val = sum(sk.cosine_hemisphere_pdf(math.cos((i + 0.5) / 2000 * math.pi / 2)) * math.sin((i + 0.5) / 2000 * math.pi / 2)
              for i in range(2000)) * (math.pi / 2 / 2000) * 2 * math.pi
    assert val == pytest.approx(1.0, abs=1e-6)
    z = np.array([sk.sample_cosine_hemisphere(a, b)[2] for a, b in rng.random((5000, 2))])
    assert stats.kstest(z**2, "uniform").pvalue > 1e-3


def test_tent_round_trip_and_density():
    rng = np.random.default_rng(1)
    xs = np.array([sk.sample_tent(u, 1.5) for u in rng.random(20000)])
    for u in rng.random(100):
        assert sk.invert_tent_sample(sk.sample_tent(u, 1.5), 1.5) == pytest.approx(u, abs=1e-12)
    # tent CDF on [-r, r]: F(x) = (1 + x/r)^2 / 2 for x < 0, 1 - (1 - x/r)^2 / 2 otherwise
    r = 1.5
    cdf = lambda x: np.where(x < 0, 0.5 * (1 + x / r) ** 2, 1 - 0.5 * (1 - x / r) ** 2)  # noqa: E731
    assert stats.kstest(xs, cdf).pvalue > 1e-3
    grid = np.linspace(-r, r, 20001)
    dens = np.array([sk.tent_pdf(x, r) for x in grid])
    assert np.trapezoid(dens, grid) == pytest.approx(1.0, abs=1e-6)


def test_uniform_sphere_disk_and_triangle_warps():
    rng = np.random.default_rng(2)
    d = np.array([sk.sample_uniform_sphere(a, b) for a, b in rng.random((5000, 2))])
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, atol=1e-12)
    assert stats.kstest(d[:, 2], "uniform", args=(-1, 2)).pvalue > 1e-3  # Archimedes: z uniform
    assert sk.uniform_sphere_pdf() == pytest.approx(1 / (4 * math.pi))
    p = np.array([sk.sample_uniform_disk_concentric(a, b) for a, b in rng.random((5000, 2))])
    r2 = (p**2).sum(axis=1)
    assert r2.max() <= 1.0 + 1e-12
    assert stats.kstest(r2, "uniform").pvalue > 1e-3  # uniform on the disk: r^2 ~ U
    b = np.array([sk.sample_uniform_triangle(a, c) for a, c in rng.random((5000, 2))])
    assert np.all(b.sum(axis=1) <= 1 + 1e-12) and np.all(b >= 0)
    # uniform on the triangle: the marginal of b0 = 1 - b1 - b2 has density 2(1 - x)
    b0 = 1 - b.sum(axis=1)
    assert stats.kstest(b0, lambda x: 1 - (1 - x) ** 2).pvalue > 1e-3


def test_sample_discrete_follows_the_cdf_and_skips_empty_entries():
    cdf = np.array([0.0, 0.0, 1.0, 1.0, 4.0])
    rng = np.random.default_rng(3)
    picks = np.array([sk.sample_discrete(cdf, u) for u in rng.random(20000)])
    assert set(picks.tolist()) == {1, 3}
    assert (picks == 1).mean() == pytest.approx(0.25, abs=0.01)


def test_power_heuristic_and_orthonormal_basis():
    # Veach 1997 power heuristic (beta = 2): weights of the two strategies sum to 1
    for a, b in [(0.3, 2.0), (5.0, 0.01), (1.0, 1.0)]:
        assert sk.power_heuristic(a, b) + sk.power_heuristic(b, a) == pytest.approx(1.0)
    assert sk.power_heuristic(1.0, 1.0) == pytest.approx(0.5)
    rng = np.random.default_rng(4)
    for n in rng.normal(size=(50, 3)).tolist() + [[0, 0, 1.0], [0, 0, -1.0]]:
        n = np.asarray(n) / np.linalg.norm(n)
        t = np.array(sk.onb_from_normal(*n))
        m = np.stack([t[:3], t[3:], n])
        np.testing.assert_allclose(m @ m.T, np.eye(3), atol=1e-12)


def test_sobol_pairs_form_nets_per_pixel():
    # Owen-scrambled Sobol' dims 0-1 form a (0, 2)-sequence (Sobol' 1967; Owen scrambling keeps
    # the net property, Burley 2020 JCGT 9(4)): the first 2^k samples of a pixel put exactly one
    # point in every elementary interval of area 2^-k, for every split 2^a x 2^(k-a).
    for pixel, pair in [(0, 0), (12345, 1), (2**33 + 7, 0)]:
        k = 8
        pts = np.array([sk.sobol_pair(pixel, s, pair, 9) for s in range(2**k)])
        assert pts.min() >= 0 and pts.max() < 1
        for a in range(k + 1):
            cells = (pts[:, 0] * 2**a).astype(int) * 2 ** (k - a) + (pts[:, 1] * 2 ** (k - a)).astype(int)
            assert np.array_equal(np.sort(cells), np.arange(2**k)), (pixel, a)
    # and different pixels / pairs / seeds get different (decorrelated) point sets
    a = np.array([sk.sobol_pair(1, s, 0, 9) for s in range(64)])
    b = np.array([sk.sobol_pair(2, s, 0, 9) for s in range(64)])
    c = np.array([sk.sobol_pair(1, s, 0, 10) for s in range(64)])
    assert abs(np.corrcoef(a[:, 0], b[:, 0])[0, 1]) < 0.3 and not np.allclose(a, c)


def test_sobol_dimension_one_direction_numbers():
    # Sobol' dim 1 generator (x + 1, m_1 = 1) = Pascal's triangle mod 2: the first points are
    # 0, 1/2, 3/4, 1/4, 5/8, 1/8, 3/8, 7/8 in natural index order (direction numbers m = 1, 3, 5, 15 as
    # in Joe & Kuo 2008, from memory; the net test above is the independent check).
    got = [sk.sobol_dim1(i) / 2**32 for i in range(8)]
    assert got == [0.0, 0.5, 0.75, 0.25, 0.625, 0.125, 0.375, 0.875]
