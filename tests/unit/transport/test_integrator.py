"""render(): reproducibility, passes, alpha modes, one-sided emitters, settings errors."""

from __future__ import annotations

import math

import numpy as np
import pytest

from transport_scenes import camera, combine, product_scene, quad
from variantshot.errors import RenderError
from variantshot.geometry.scene import Material, Texture, TextureRef, make_scene
from variantshot.settings import RenderSettings
from variantshot.transport.environment import make_environment
from variantshot.transport.integrator import needs_default_light, render

LAMBERT = {"KHR_materials_specular": {"specularFactor": 0.0}}


def test_same_seed_same_bits_on_one_and_two_threads():
    # DESIGN.md reproducibility promise: the sample hash depends on (pixel, sample, dimension,
    # seed) only, each row is summed by one thread in sample order.
    scene, cam = product_scene(sphere_res=(12, 24))
    env = make_environment(0.1)
    a = render(scene, RenderSettings(width=20, height=14, spp=8, seed=3, threads=1), env=env, camera=cam)
    b = render(scene, RenderSettings(width=20, height=14, spp=8, seed=3, threads=2), env=env, camera=cam)
    for name in ("radiance", "albedo", "normal", "alpha", "depth", "variance"):
        assert getattr(a, name).tobytes() == getattr(b, name).tobytes(), name
    c = render(scene, RenderSettings(width=20, height=14, spp=8, seed=4, threads=2), env=env, camera=cam)
    assert c.radiance.tobytes() != a.radiance.tobytes()


def test_passes_report_progress_and_sum_to_the_same_image():
    scene, cam = product_scene(sphere_res=(8, 16))
    calls = []
    one = render(scene, RenderSettings(width=8, height=8, spp=12, wave_spp=5), camera=cam,
                 progress=lambda done, total: calls.append((done, total)))
    assert calls == [(5, 12), (10, 12), (12, 12)]
    whole = render(scene, RenderSettings(width=8, height=8, spp=12, wave_spp=12), camera=cam)
    np.testing.assert_allclose(one.radiance, whole.radiance, rtol=1e-12, atol=1e-15)


def test_auxiliary_passes_of_a_facing_quad():
    # a quad facing the camera at distance 3: depth 3, normal +z, albedo = base colour,
    # coverage 1 where it is seen and 0 on the background.
    mat = Material(base_colour_factor=(0.2, 0.4, 0.6, 1.0), metallic_factor=0.0)
    p, t = quad((0, 0, 0), (0.5, 0, 0), (0, 0.5, 0))
    scene = make_scene(p, t, materials=[mat])
    cam = camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=1.0)
    film = render(scene, RenderSettings(width=8, height=8, spp=4), env=make_environment(1.0), camera=cam)
    centre = (slice(3, 5), slice(3, 5))
    np.testing.assert_allclose(film.depth[centre], 3.0, rtol=1e-6)
    np.testing.assert_allclose(film.normal[centre], np.broadcast_to([0, 0, 1.0], (2, 2, 3)), atol=1e-6)
    np.testing.assert_allclose(film.albedo[centre], np.broadcast_to([0.2, 0.4, 0.6], (2, 2, 3)), rtol=1e-6)
    assert np.all(film.alpha[centre] == 1.0) and film.alpha[0, 0] == 0.0 and np.isinf(film.depth[0, 0])
    np.testing.assert_allclose(film.radiance[0, 0], 1.0)  # the environment itself


def test_alpha_mask_and_blend():
    # glTF 2.0 §3.9.4 alpha coverage: MASK drops alpha < cutoff; BLEND here is stochastic
    # coverage, so the alpha pass averages to the material's alpha.
    p, t = quad((0, 0, 0), (2, 0, 0), (0, 2, 0))
    cam = camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=0.5)
    env = make_environment(1.0)
    masked = make_scene(p, t, materials=[Material(base_colour_factor=(0, 0, 0, 0.4), alpha_mode="MASK",
                                                  alpha_cutoff=0.5)])
    f = render(masked, RenderSettings(width=4, height=4, spp=16), env=env, camera=cam)
    assert np.all(f.alpha == 0.0) and np.allclose(f.radiance, 1.0)
    kept = make_scene(p, t, materials=[Material(base_colour_factor=(0, 0, 0, 0.6), alpha_mode="MASK",
                                                alpha_cutoff=0.5, metallic_factor=0.0, extensions=LAMBERT)])
    f = render(kept, RenderSettings(width=4, height=4, spp=16), env=env, camera=cam)
    assert np.all(f.alpha == 1.0) and np.allclose(f.radiance, 0.0)
    blend = make_scene(p, t, materials=[Material(base_colour_factor=(0, 0, 0, 0.25), alpha_mode="BLEND",
                                                 metallic_factor=0.0, extensions=LAMBERT)])
    f = render(blend, RenderSettings(width=4, height=4, spp=1024), env=env, camera=cam)
    assert f.alpha.mean() == pytest.approx(0.25, abs=0.02)
    assert f.radiance.mean() == pytest.approx(0.75, abs=0.02)  # black where covered, env where not


def test_single_sided_emitters_emit_from_the_front_only():
    # back-face policy (materials.py): a single-sided emissive quad is dark from behind; a
    # double-sided one emits on both sides.
    p, t = quad((0, 0, 0), (3, 0, 0), (0, 3, 0))  # front faces +z, fills the view and the filter's reach
    for double, back in [(False, 0.0), (True, 2.0)]:
        mat = Material(base_colour_factor=(0, 0, 0, 1), emissive_factor=(2, 2, 2), double_sided=double,
                       metallic_factor=0.0, extensions=LAMBERT)
        scene = make_scene(p, t, materials=[mat])
        front = render(scene, RenderSettings(width=2, height=2, spp=4), camera=camera((0, 0, 3), (0, 0, 0)))
        behind = render(scene, RenderSettings(width=2, height=2, spp=4), camera=camera((0, 0, -3), (0, 0, 0)))
        np.testing.assert_allclose(front.radiance, 2.0)
        np.testing.assert_allclose(behind.radiance, back)


def test_base_colour_texture_is_srgb_decoded_in_the_render():
    # glTF 2.0 §3.9.2: baseColorTexture is sRGB-encoded; texel 128/255 decodes to 0.215861
    # (REFERENCES §1).  A Lambertian quad in a unit furnace renders its albedo.
    tex = Texture(pixels=np.full((2, 2, 4), 128 / 255, np.float32))
    mat = Material(base_colour_texture=TextureRef(index=0), metallic_factor=0.0, extensions=LAMBERT)
    p, t = quad((0, 0, 0), (2, 0, 0), (0, 2, 0))
    scene = make_scene(p, t, materials=[mat], textures=[tex])
    film = render(scene, RenderSettings(width=2, height=2, spp=1024), env=make_environment(1.0),
                  camera=camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=0.5))
    np.testing.assert_allclose(film.albedo, 0.215861, atol=1e-5)
    assert film.radiance.mean() == pytest.approx(0.215861, rel=0.015)


def test_vertex_colours_multiply_the_base_colour():
    p, t = quad((0, 0, 0), (2, 0, 0), (0, 2, 0))
    scene = make_scene(p, t, colours=np.tile([0.5, 1.0, 0.25, 1.0], (4, 1)),
                       materials=[Material(base_colour_factor=(0.8, 0.6, 1.0, 1), metallic_factor=0.0)])
    film = render(scene, RenderSettings(width=2, height=2, spp=4), env=make_environment(1.0),
                  camera=camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=0.5))
    np.testing.assert_allclose(film.albedo, np.broadcast_to([0.4, 0.6, 0.25], (2, 2, 3)), rtol=1e-6)


def test_settings_and_scene_errors():
    with pytest.raises(RenderError, match="RenderSettings.spp"):
        RenderSettings(spp=0)
    with pytest.raises(RenderError, match="RenderSettings.mode"):
        RenderSettings(mode="fast")
    p, t = quad((0, 0, 0), (1, 0, 0), (0, 1, 0))
    scene = make_scene(p, t, tri_material=[0, 3])
    with pytest.raises(RenderError, match="material that does not exist"):
        render(scene, RenderSettings(width=2, height=2, spp=1), camera=camera((0, 0, 3), (0, 0, 0)))


def test_default_light_is_needed_only_without_any_light():
    p, t = quad((0, 0, 0), (1, 0, 0), (0, 1, 0))
    dark = make_scene(p, t)
    assert needs_default_light(dark)
    assert not needs_default_light(dark, make_environment(1.0))
    pos, tris, mats, nrm = combine([(p, t, 0, None), (p + 1, t, 1, None)])
    lit = make_scene(pos, tris, tri_material=mats, materials=[Material(), Material(emissive_factor=(1, 1, 1))])
    assert not needs_default_light(lit)


@pytest.mark.parametrize("axis, w, computed", [(0, 1.0, True), (1, 1.0, True), (1, 1.0, False), (1, -1.0, False)])
def test_normal_texture_tilts_the_lambert_cosine(axis, w, computed):
    # glTF 2.0 §3.9.3 normalTexture: tangent-space normal n = (2 texel - 1) x (scale, scale, 1)
    # with T = TANGENT.xyz (or dp/du), B = cross(N, T) x TANGENT.w; a Lambertian quad lit by a
    # directional light (KHR_lights_punctual, lux) then shows rho / pi x E x cos(angle between
    # the light and n): tilting n by a towards the light at b gives cos(a - b), the wrong sign
    # of T or B would give cos(a + b).
    from variantshot.geometry.scene import Light

    a, b, rho, lux = 0.5, 0.3, 0.8, 3.0
    n_ts = np.zeros(3)
    n_ts[axis], n_ts[2] = math.sin(a), math.cos(a)
    tex = Texture(pixels=np.array([[[*(0.5 * (n_ts + 1)), 1.0]]], np.float32))
    p, t = quad((0, 0, 0), (2, 0, 0), (0, 2, 0))  # +z; u along +x, v down the image (-y)
    uv = np.array([[0, 1], [1, 1], [1, 0], [0, 0]], float)
    tangents = None if computed else np.tile([1.0, 0.0, 0.0, w], (4, 1))
    mat = Material(base_colour_factor=(rho, rho, rho, 1), metallic_factor=0.0, extensions=LAMBERT,
                   normal_texture=TextureRef(index=0))
    light_dir = np.zeros(3)
    light_dir[axis], light_dir[2] = math.sin(b), math.cos(b)  # towards the light
    scene = make_scene(p, t, uvs=uv, tangents=tangents, materials=[mat], textures=[tex],
                       lights=[Light(name="sun", kind="directional", intensity=lux, direction=tuple(-light_dir))])
    film = render(scene, RenderSettings(width=2, height=2, spp=4),
                  camera=camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=0.5))
    texel = np.round(0.5 * (n_ts + 1) * 1.0, 7)  # float32 round trip of the texel
    n = 2 * texel - 1
    n /= np.linalg.norm(n)
    if w < 0:
        n[1] = -n[1]
    expected = rho / math.pi * lux * float(np.dot(n, light_dir))
    np.testing.assert_allclose(film.radiance, expected, rtol=1e-5)
