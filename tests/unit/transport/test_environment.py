"""Tests for the environment light (transport.environment + env_kernels).

Outside references: closed-form sphere geometry (pixel solid angle (2 pi / W)(cos t0 - cos t1),
sphere area 4 pi, Archimedes' hat-box theorem for uniform sphere sampling), scipy's rotation
matrices and chi-square / Kolmogorov-Smirnov tests, and an independent numpy re-statement of the
documented density (luminance x sin theta, piecewise constant over pixels).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from variantshot.errors import InputError
from variantshot.transport import env_kernels as ek
from variantshot.transport.environment import (
    environment_mean_luminance,
    environment_pdf,
    environment_radiance,
    make_environment,
    pixel_solid_angles,
    sample_environment,
)

Y_WEIGHTS = np.array([0.2126, 0.7152, 0.0722])  # IEC 61966-2-1 Y row (4 dp)
RNG = np.random.default_rng(4 * 314159)


def _studio_map(h=16, w=32):
    """A map with a bright soft box, a dim sky gradient and a black lower half."""
    img = np.zeros((h, w, 3), np.float32)
    img[: h // 2] = np.linspace(0.2, 1.0, w, dtype=np.float32)[None, :, None] * [0.6, 0.7, 1.0]
    img[h // 4, w // 3 : w // 3 + 3] = [40.0, 38.0, 35.0]
    return img


def _unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def _world_uv(dirs):
    out = np.empty((len(dirs), 2))
    ek.uv_from_direction_batch(np.ascontiguousarray(dirs, dtype=np.float64), out)
    return out


def _sphere_grid(n_theta, n_phi):
    """Midpoint quadrature grid over the sphere: directions (N, 3) and weights sin t dt dphi."""
    t = (np.arange(n_theta) + 0.5) * math.pi / n_theta
    p = (np.arange(n_phi) + 0.5) * 2 * math.pi / n_phi - math.pi
    tt, pp = np.meshgrid(t, p, indexing="ij")
    d = np.stack([np.sin(tt) * np.sin(pp), np.cos(tt), -np.sin(tt) * np.cos(pp)], -1).reshape(-1, 3)
    w = (np.sin(tt) * (math.pi / n_theta) * (2 * math.pi / n_phi)).ravel()
    return d, w


# --- mapping --------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "d, uv",
    [((0, 0, -1), (0.5, 0.5)), ((1, 0, 0), (0.75, 0.5)), ((-1, 0, 0), (0.25, 0.5)),
     ((0, 1, 0), (None, 0.0)), ((0, -1, 0), (None, 1.0)), ((0, 1, -1), (0.5, 0.25))],
)
def test_documented_mapping(d, uv):
    u, v = ek.uv_from_direction(*map(float, d))
    if uv[0] is not None:
        assert u == pytest.approx(uv[0], abs=1e-12)
    assert v == pytest.approx(uv[1], abs=1e-12)


def test_direction_from_uv_inverts_mapping():
    uv = RNG.random((1000, 2)) * [1, 0.98] + [0, 0.01]
    d = np.array([ek.direction_from_uv(u, v) for u, v in uv])
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, atol=1e-12)
    np.testing.assert_allclose(_world_uv(d), uv, atol=1e-9)


def test_bright_pixel_seen_from_its_direction():
    h, w = 32, 64
    img = np.full((h, w, 3), 0.1, np.float32)
    # theta = 60 deg lies in row floor(60/180 * 32) = 10; +X is u = 0.75 -> column 48
    img[10, 48] = [5.0, 4.0, 3.0]
    img[0, :] = [0.0, 2.0, 0.0]  # the top row is +Y
    env = make_environment(img)
    t = math.radians(60.0)
    got = environment_radiance(env, [[math.sin(t), math.cos(t), 0.0], [-math.sin(t), math.cos(t), 0.0],
                                     [0.0, 1.0, 0.0], [0.0, 10.0, 0.01]])
    np.testing.assert_allclose(got[0], [5.0, 4.0, 3.0])
    np.testing.assert_allclose(got[1], 0.1, rtol=1e-6)
    np.testing.assert_allclose(got[2:], [[0.0, 2.0, 0.0]] * 2)  # unnormalised direction too


def test_rotation_about_y_matches_scipy():
    from scipy.spatial.transform import Rotation

    alpha = 0.9
    img = _studio_map()
    env0 = make_environment(img)
    env = make_environment(img, rotation_rad=alpha)
    r = Rotation.from_euler("y", alpha).as_matrix()  # right-handed rotation about +Y
    d = _unit(RNG.normal(size=(500, 3)))
    # what the unrotated map shows at d appears at R d after rotating the environment
    np.testing.assert_array_equal(environment_radiance(env, d @ r.T), environment_radiance(env0, d))
    np.testing.assert_allclose(environment_pdf(env, d @ r.T), environment_pdf(env0, d), rtol=1e-9)
    # the module's example: with +90 deg, the image's +X shows up at -Z
    x = np.array(ek.rotate_y(1.0, 0.0, 0.0, math.pi / 2))
    np.testing.assert_allclose(x, [0.0, 0.0, -1.0], atol=1e-15)
    np.testing.assert_allclose(Rotation.from_euler("y", math.pi / 2).apply([1.0, 0, 0]), x, atol=1e-15)


# --- tables ---------------------------------------------------------------------------------
def test_envmap_arrays_follow_contract():
    env = make_environment(_studio_map(), rotation_rad=0.25)
    h, w = 16, 32
    assert env.pixels.shape == (h, w, 3) and env.pixels.dtype == np.float32
    assert env.cdf_rows.shape == (h + 1,) and env.cdf_rows.dtype == np.float64
    assert env.cdf_cols.shape == (h, w + 1) and env.cdf_cols.dtype == np.float64
    assert env.params.shape == (4,) and env.params[0] == 0.25 and env.params[1] == 0.0
    assert env.cdf_rows[0] == 0.0 and env.cdf_rows[-1] == 1.0
    assert np.all(env.cdf_cols[:, 0] == 0.0) and np.all(env.cdf_cols[:, -1] == 1.0)
    assert np.all(np.diff(env.cdf_rows) >= 0) and np.all(np.diff(env.cdf_cols, axis=1) >= 0)


def test_total_weight_is_luminance_integral():
    img = _studio_map()
    env = make_environment(img)
    omega = np.array([(2 * math.pi / 32) * (math.cos(math.pi * i / 16) - math.cos(math.pi * (i + 1) / 16))
                      for i in range(16)])
    exact = float(((img.astype(float) @ Y_WEIGHTS) * omega[:, None]).sum())
    # row-centre sin(theta) vs exact pixel solid angles: midpoint rule, within 1 %
    assert env.params[2] == pytest.approx(exact, rel=1e-2)
    np.testing.assert_allclose(pixel_solid_angles(16, 32), omega, rtol=1e-12)
    assert 32 * pixel_solid_angles(16, 32).sum() == pytest.approx(4 * math.pi)
    assert environment_mean_luminance(env) == pytest.approx(env.params[2] / (4 * math.pi))


# --- sampling -------------------------------------------------------------------------------
@pytest.mark.parametrize("rotation", [0.0, 2.1])
def test_sample_pdf_consistency(rotation):
    env = make_environment(_studio_map(), rotation_rad=rotation)
    d, pdf, rgb = sample_environment(env, RNG.random((20000, 2)))
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, atol=1e-12)
    again = environment_pdf(env, d)
    same = np.isclose(again, pdf, rtol=1e-9)
    assert same.mean() > 0.999  # pixel-boundary rounding may move a rare sample to a neighbour
    np.testing.assert_array_equal(rgb[same], environment_radiance(env, d[same]))
    assert np.all(pdf > 0)
    # the black lower half (dy < 0 in the map frame; rotation keeps y) is never sampled
    assert np.all(d[:, 1] > -1e-12)


@pytest.mark.parametrize("rotation", [0.0, 0.7])
def test_pdf_integrates_to_one(rotation):
    env = make_environment(_studio_map(), rotation_rad=rotation)
    # grid aligned with the 16 x 32 pixels when unrotated: every cell lies inside one pixel
    d, w = _sphere_grid(16 * 12, 32 * 12)
    total = float((environment_pdf(env, d) * w).sum())
    assert total == pytest.approx(1.0, abs=2e-3 if rotation else 1e-9)


def _documented_density(img, dirs, rotation):
    """Independent numpy statement of the env_kernels docstring density (per steradian)."""
    h, w, _ = img.shape
    c, s = math.cos(-rotation), math.sin(-rotation)
    x, y, z = dirs[:, 0], dirs[:, 1], dirs[:, 2]
    ex, ey, ez = c * x + s * z, y, -s * x + c * z
    theta = np.arccos(np.clip(ey, -1, 1))
    u = 0.5 + np.arctan2(ex, -ez) / (2 * math.pi)
    row = np.minimum((theta / math.pi * h).astype(int), h - 1)
    col = np.minimum((u * w).astype(int), w - 1)
    weight = (img.astype(float) @ Y_WEIGHTS) * np.sin((np.arange(h) + 0.5) * math.pi / h)[:, None]
    p_pixel = weight / weight.sum()
    return p_pixel[row, col] * h * w / (2 * math.pi**2 * np.sin(theta))


def test_sampled_directions_follow_documented_density_chi_square():
    from scipy import stats

    rotation = 0.7
    img = _studio_map()
    img[: 8] += RNG.random((8, 32, 3)).astype(np.float32) * 0.5
    env = make_environment(img, rotation_rad=rotation)
    n = 200_000
    d, pdf, _ = sample_environment(env, RNG.random((n, 2)))
    # rtol: the 4-dp IEC Y weights here vs the derived ones in the module differ by ~1e-4
    np.testing.assert_allclose(pdf, _documented_density(img, d, rotation), rtol=3e-4)
    # histogram over a 12 x 20 world-frame (u, v) grid, not aligned with the map's pixels
    nb_v, nb_u = 12, 20
    uv = _world_uv(d)
    hist = np.zeros((nb_v, nb_u))
    np.add.at(hist, (np.minimum((uv[:, 1] * nb_v).astype(int), nb_v - 1),
                     np.minimum((uv[:, 0] * nb_u).astype(int), nb_u - 1)), 1)
    q, qw = _sphere_grid(nb_v * 24, nb_u * 24)
    dens = _documented_density(img, q, rotation) * qw
    expected = dens.reshape(nb_v, 24, nb_u, 24).sum(axis=(1, 3)) * n
    expected *= n / expected.sum()
    keep = expected > 5
    obs = np.append(hist[keep], hist[~keep].sum())
    exp = np.append(expected[keep], expected[~keep].sum())
    if exp[-1] == 0:
        obs, exp = obs[:-1], exp[:-1]
    pvalue = stats.chisquare(obs, exp).pvalue
    assert pvalue > 1e-4, pvalue


def test_mc_integral_equals_pixel_area_weighted_sum():
    img = _studio_map()
    env = make_environment(img, rotation_rad=1.3)
    h, w = img.shape[:2]
    omega = np.array([(2 * math.pi / w) * (math.cos(math.pi * i / h) - math.cos(math.pi * (i + 1) / h))
                      for i in range(h)])
    exact = (img.astype(float) * omega[:, None, None]).sum(axis=(0, 1))  # (3,)
    n = 100_000
    _, pdf, rgb = sample_environment(env, RNG.random((n, 2)))
    est = rgb / pdf[:, None]
    mean = est.mean(axis=0)
    sigma = est.std(axis=0) / math.sqrt(n)
    assert np.all(np.abs(mean - exact) < 5 * sigma + 1e-9), (mean, exact, sigma)
    np.testing.assert_allclose(mean, exact, rtol=0.01)


# --- uniform environments -------------------------------------------------------------------
def test_uniform_environment_samples_sphere_uniformly():
    from scipy import stats

    env = make_environment([0.5, 0.25, 1.0])
    assert env.params[1] == 1.0 and env.pixels.shape == (1, 1, 3)
    d, pdf, rgb = sample_environment(env, RNG.random((50000, 2)))
    np.testing.assert_allclose(pdf, 1 / (4 * math.pi))
    np.testing.assert_allclose(rgb, [[0.5, 0.25, 1.0]] * len(d))
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, atol=1e-12)
    # Archimedes: each coordinate of a uniform point on the sphere is uniform on [-1, 1]
    for k in range(3):
        assert stats.kstest(d[:, k], stats.uniform(loc=-1, scale=2).cdf).pvalue > 1e-3
    q = _unit(RNG.normal(size=(10, 3)))
    np.testing.assert_allclose(environment_pdf(env, q), 1 / (4 * math.pi))
    np.testing.assert_allclose(environment_radiance(env, q), [[0.5, 0.25, 1.0]] * 10)
    # total weight = 4 pi Y
    assert env.params[2] == pytest.approx(4 * math.pi * float(np.dot([0.5, 0.25, 1.0], Y_WEIGHTS)),
                                          rel=1e-4)


def test_uniform_from_number_none_and_constant_image():
    assert make_environment(None).params[1] == 1.0
    np.testing.assert_array_equal(make_environment(None).pixels, 0.0)
    np.testing.assert_array_equal(make_environment(2.0).pixels[0, 0], [2.0, 2.0, 2.0])
    const = make_environment(np.full((8, 16, 3), 0.7, np.float32))
    assert const.params[1] == 1.0 and const.pixels.shape == (1, 1, 3)
    assert make_environment(np.zeros((8, 16, 3))).params[1] == 1.0


def test_environment_from_file(tmp_path):
    from variantshot.imaging.files import write_hdr

    img = _studio_map()
    path = write_hdr(tmp_path / "studio.hdr", img)
    env = make_environment(path)
    assert env.pixels.shape == img.shape and env.params[1] == 0.0
    np.testing.assert_allclose(env.pixels, img, rtol=1 / 128, atol=1e-6)  # RGBE precision


@pytest.mark.parametrize("bad", [-1.0, [1.0, 2.0], [1.0, float("nan"), 1.0], "nope.exr", {"a": 1}])
def test_bad_environment_values(bad, tmp_path):
    if bad == "nope.exr":
        bad = tmp_path / "nope.exr"
        bad.write_bytes(b"x")
    with pytest.raises(InputError):
        make_environment(bad)
    img = np.ones((4, 8, 3))
    img[1, 1, 1] = np.inf
    with pytest.raises(InputError, match="NaN or infinite"):
        make_environment(img)
