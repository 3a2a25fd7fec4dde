"""Adaptive sampling (RenderSettings.noise_target): where it stops, that it stays unbiased, that
it is thread-invariant."""

from __future__ import annotations

import numpy as np
import pytest

from transport_scenes import camera, uv_sphere
from variantshot.errors import RenderError
from variantshot.geometry.scene import Material, make_scene
from variantshot.imaging.film import FilmSums, tile_relative_error
from variantshot.settings import RenderSettings
from variantshot.transport.environment import make_environment
from variantshot.transport.integrator import render

LAMBERT = {"KHR_materials_specular": {"specularFactor": 0.0}}
RHO = 0.6


def _furnace():
    # White furnace (REFERENCES §6(a); Kulla & Conty 2017): a convex Lambertian sphere of albedo
    # rho in a uniform environment of radiance 1 has outgoing radiance rho everywhere; the
    # environment seen directly is exactly 1 in every sample (zero variance).
    p, t, n = uv_sphere(1.0, (0, 0, 0), 32, 64)
    mat = Material(name="lambert", base_colour_factor=(RHO, RHO, RHO, 1.0), metallic_factor=0.0,
                   roughness_factor=1.0, extensions=LAMBERT)
    return make_scene(p, t, normals=n, materials=[mat]), camera((0, 0, 5), (0, 0, 0), yfov_rad=0.5)


def _settings(**kw):
    base = dict(width=48, height=48, spp=256, seed=1, noise_target=0.02)
    base.update(kw)
    return RenderSettings(**base)


def _tiles(a, tile=8):
    h, w = a.shape
    return a.reshape(h // tile, tile, w // tile, tile).swapaxes(1, 2).reshape(h // tile, w // tile, -1)


def test_flat_backdrop_tiles_stop_at_the_minimum_while_the_object_keeps_sampling():
    scene, cam = _furnace()
    film = render(scene, _settings(), env=make_environment(1.0), camera=cam)
    assert film.spp_map is not None and film.spp == film.spp_map.max() <= 256 and film.spp_map.shape == (48, 48)
    alpha_t = _tiles(film.alpha)
    spp_t = _tiles(film.spp_map)
    background = np.all(alpha_t == 0.0, axis=-1)
    covered = np.all(alpha_t == 1.0, axis=-1)
    assert background.any() and covered.any()
    # a tile that sees only the uniform environment has zero variance: it stops at the first test
    assert np.all(spp_t[background] == 16)
    # tiles on the sphere (NEE + MIS leave variance) go on past the minimum
    assert np.all(spp_t[covered] > 16)
    # every tile is sampled uniformly inside itself (the decision is per 8 x 8 tile)
    assert np.all(spp_t.min(axis=-1) == spp_t.max(axis=-1))


def test_adaptive_film_is_unbiased_against_the_closed_form_and_a_fixed_spp_render():
    scene, cam = _furnace()
    env = make_environment(1.0)
    ada = render(scene, _settings(), env=env, camera=cam)
    fixed = render(scene, _settings(noise_target=None, spp=96, seed=2), env=env, camera=cam)
    assert fixed.spp_map is None
    m = (ada.alpha == 1.0) & (fixed.alpha == 1.0)
    mean_a = ada.radiance[m].mean(axis=0)
    sem_a = np.sqrt(ada.variance[m].mean(axis=0) / m.sum())
    mean_f = fixed.radiance[m].mean(axis=0)
    sem_f = np.sqrt(fixed.variance[m].mean(axis=0) / m.sum())
    # closed form: radiance rho (white furnace, see _furnace); 5 standard errors + 1e-3 for
    # the faceted sphere (as in tests/reference/test_transport_closed_forms.py)
    assert np.all(np.abs(mean_a - RHO) < 5 * sem_a + 1e-3)
    assert np.all(np.abs(mean_a - mean_f) < 5 * np.hypot(sem_a, sem_f) + 1e-3)
    # the environment seen directly stays exactly 1
    bg = ada.alpha == 0.0
    np.testing.assert_array_equal(ada.radiance[bg], 1.0)


def test_stopped_tiles_meet_the_target_and_variance_uses_each_pixels_own_count():
    scene, cam = _furnace()
    target = 0.02
    film = render(scene, _settings(noise_target=target), env=make_environment(1.0), camera=cam)
    # rebuild the tile error from the resolved film: var of the mean x n = sample variance
    n = film.spp_map.astype(np.float64)
    sums = FilmSums.zeros(48, 48)
    sums.rgb[...] = film.radiance * n[..., None]
    sums.rgb_sq[...] = (film.variance * n[..., None] * (n[..., None] - 1.0) + film.radiance ** 2 * n[..., None])
    sums.n = film.spp
    sums.n_pixel = n
    lum = film.radiance @ np.array([0.2126, 0.7152, 0.0722])
    err = tile_relative_error(sums, 8, 0.05 * float(lum.mean()))
    spp_t = _tiles(film.spp_map)[..., 0]
    stopped = spp_t < film.spp
    assert stopped.any()
    assert np.all(err[stopped] <= target * (1 + 1e-6))


def test_one_and_two_threads_give_the_same_bits_and_the_same_stopping_pattern():
    # DESIGN.md reproducibility promise; the stopping test reads only the film sums
    scene, cam = _furnace()
    env = make_environment(1.0)
    a = render(scene, _settings(threads=1, width=24, height=20), env=env, camera=cam)
    b = render(scene, _settings(threads=2, width=24, height=20), env=env, camera=cam)
    assert a.spp_map.tobytes() == b.spp_map.tobytes()
    for name in ("radiance", "albedo", "normal", "alpha", "depth", "variance"):
        assert getattr(a, name).tobytes() == getattr(b, name).tobytes(), name


def test_progress_ends_at_the_cap_even_when_every_tile_stops_early():
    scene, cam = _furnace()
    calls = []
    film = render(scene, _settings(noise_target=0.5, spp=64), env=make_environment(1.0), camera=cam,
                  progress=lambda done, total: calls.append((done, total)))
    assert film.spp_map.max() == 16
    assert calls[-1] == (64, 64)


@pytest.mark.parametrize("field,value", [("noise_target", 0.0), ("noise_target", -1.0), ("noise_target", "low"),
                                         ("adaptive_min_spp", 1), ("noise_tile_px", 0), ("noise_floor", -0.1)])
def test_bad_adaptive_settings_name_the_field(field, value):
    with pytest.raises(RenderError, match=f"RenderSettings.{field}"):
        RenderSettings(**{field: value})


def test_sample_mask_skips_pixels_and_leaves_the_others_bit_identical():
    # pixels are independent (each sample's random numbers hash its own pixel index), so a
    # pixel inside the mask gets the very samples it gets in a full render
    scene, cam = _furnace()
    env = make_environment(1.0)
    mask = np.zeros((48, 48), bool)
    mask[10:30, 5:40] = True
    full = render(scene, _settings(noise_target=None, spp=8), env=env, camera=cam)
    part = render(scene, _settings(noise_target=None, spp=8), env=env, camera=cam, sample_mask=mask)
    assert part.radiance[mask].tobytes() == full.radiance[mask].tobytes()
    assert np.all(part.spp_map[~mask] == 0) and np.all(part.spp_map[mask] == 8)
    assert np.all(part.radiance[~mask] == 0.0) and np.all(part.alpha[~mask] == 0.0)
    with pytest.raises(RenderError, match="sample_mask"):
        render(scene, _settings(spp=2), env=env, camera=cam, sample_mask=mask[:10])


def test_qa_noise_check_passes_a_film_that_converged_at_the_presets_target():
    # batch/quality.py: the render stops tiles at ADAPTIVE_TARGET_FRACTION of the preset's
    # noise target, QA's noise check limits the median per-pixel relative standard error to the
    # full target, so a film that converged passes QA
    from variantshot.batch.quality import ADAPTIVE_TARGET_FRACTION, quality_preset
    from variantshot.batch.runner import _render_settings
    from variantshot.review.metrics import relative_standard_error

    final = quality_preset("final")
    settings = _render_settings(final)
    assert settings.noise_target == ADAPTIVE_TARGET_FRACTION * final.noise_target
    assert settings.adaptive_min_spp == final.min_spp
    scene, cam = _furnace()
    target = 0.02
    film = render(scene, _settings(noise_target=ADAPTIVE_TARGET_FRACTION * target, spp=1024),
                  env=make_environment(1.0), camera=cam)
    assert film.spp_map.max() < 1024  # every tile converged before the cap
    product = film.alpha == 1.0
    rse = relative_standard_error(film.radiance, film.variance, product)
    assert rse <= target
