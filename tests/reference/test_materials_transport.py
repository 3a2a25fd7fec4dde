"""Transmissive and layered finishes rendered by the path tracer, against optics closed forms
(Beer-Lambert, Fresnel slab series), the white furnace and the Khronos validator samples."""

from __future__ import annotations

import math

import numpy as np
import pytest

from transport_scenes import camera, combine, quad, uv_sphere
from variantshot.geometry.gltf import load_gltf
from variantshot.geometry.scene import Material, make_scene
from variantshot.settings import RenderSettings
from variantshot.transport.environment import make_environment
from variantshot.transport.integrator import render
from variantshot.transport.materials import pack_materials


def glass(colour=(1.0, 1.0, 1.0), distance=math.inf, roughness=0.0, ior=1.5, thickness=1.0):
    vol = {"thicknessFactor": thickness, "attenuationColor": list(colour)}
    if math.isfinite(distance):
        vol["attenuationDistance"] = distance
    return Material(name="glass", base_colour_factor=(1, 1, 1, 1), metallic_factor=0.0, roughness_factor=roughness,
                    extensions={"KHR_materials_transmission": {"transmissionFactor": 1.0},
                                "KHR_materials_ior": {"ior": ior}, "KHR_materials_volume": vol})


def box(half):
    """Closed axis-aligned box, outward-facing quads (flat normals)."""
    hx, hy, hz = half
    faces = [((0, 0, hz), (hx, 0, 0), (0, hy, 0)), ((0, 0, -hz), (0, hy, 0), (hx, 0, 0)),
             ((hx, 0, 0), (0, hy, 0), (0, 0, hz)), ((-hx, 0, 0), (0, 0, hz), (0, hy, 0)),
             ((0, hy, 0), (0, 0, hz), (hx, 0, 0)), ((0, -hy, 0), (hx, 0, 0), (0, 0, hz))]
    parts = []
    for c, u, v in faces:
        p, t = quad(c, u, v)
        n = np.tile(np.cross(u, v) / np.linalg.norm(np.cross(u, v)), (4, 1))
        parts.append((p, t, 0, n))
    pos, tris, _, nrm = combine(parts)
    return pos, tris, nrm


def _covered(film):
    m = film.alpha == 1.0
    return film.radiance[m].mean(axis=0), np.sqrt(film.variance[m].mean(axis=0) / m.sum())


def test_beer_lambert_through_a_glass_slab():
    # KHR_materials_volume: T = exp(-sigma d), sigma = -ln(attenuationColor)/attenuationDistance
    # (Beer-Lambert).  A wide slab of thickness d at normal incidence in a uniform environment
    # of 1, ior 1.5 (R0 = 0.04, exact Fresnel, REFERENCES §6f): summing the inter-reflections
    # (the Airy / Stokes slab series, Hecht, Optics; from memory) the pixel is
    # P = R0 + (1 - R0)^2 T / (1 - R0 T).  Solve P for T and compare with exp(-sigma d).
    colour, dist, d = np.array([0.3, 0.6, 0.9]), 0.4, 0.5
    p, t, n = box((4.0, 4.0, d / 2))
    scene = make_scene(p, t, normals=n, materials=[glass(colour, dist)])
    cam = camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=0.3)
    film = render(scene, RenderSettings(width=4, height=4, spp=256, seed=3), env=make_environment(1.0), camera=cam)
    got, sem = _covered(film)
    sigma = -np.log(colour) / dist
    want_t = np.exp(-sigma * d)
    r0 = 0.04
    want = r0 + (1 - r0) ** 2 * want_t / (1 - r0 * want_t)
    np.testing.assert_allclose(got, want, atol=2e-3 + 4 * sem.max())
    # the recovered transmittance itself: T = (P - R0) / ((1 - R0)^2 + R0 (P - R0))
    t_got = (got - r0) / ((1 - r0) ** 2 + r0 * (got - r0))
    np.testing.assert_allclose(t_got, want_t, atol=4e-3)


@pytest.mark.parametrize("roughness", [0.0, 0.3])
def test_glass_sphere_in_a_white_furnace(roughness):
    # REFERENCES §6(a): clear glass without absorption is invisible in a uniform environment
    # (pixel = 1) when smooth; a rough interface only loses energy (single-scattering GGX), <= 1
    p, t, n = uv_sphere(1.0, (0, 0, 0), 32, 64)
    scene = make_scene(p, t, normals=n, materials=[glass(roughness=roughness)])
    film = render(scene, RenderSettings(width=8, height=8, spp=128, seed=1), env=make_environment(1.0),
                  camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3))
    mean, sem = _covered(film)
    if roughness == 0.0:
        assert abs(mean[0] - 1.0) < 2e-3 + 4 * sem[0]
    else:
        assert mean[0] <= 1.0 + 4 * sem[0] and mean[0] > 0.8


@pytest.mark.parametrize("ext", [{"KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatRoughnessFactor": 0.1}},
                                 {"KHR_materials_sheen": {"sheenColorFactor": [1, 1, 1], "sheenRoughnessFactor": 0.5}}])
def test_coat_and_sheen_on_white_lambert_stay_below_the_furnace(ext):
    # REFERENCES §6(a) on a Lambertian (specularFactor 0) white sphere: a layer with albedo
    # scaling never raises the pixel above the environment (1)
    ext = dict(ext, KHR_materials_specular={"specularFactor": 0.0})
    mat = Material(name="coated", base_colour_factor=(1, 1, 1, 1), metallic_factor=0.0, roughness_factor=0.8,
                   extensions=ext)
    p, t, n = uv_sphere(1.0, (0, 0, 0), 32, 64)
    film = render(make_scene(p, t, normals=n, materials=[mat]), RenderSettings(width=8, height=8, spp=128, seed=2),
                  env=make_environment(1.0), camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3))
    mean, sem = _covered(film)
    assert mean[0] <= 1.0 + 4 * sem[0] + 1e-3 and mean[0] > 0.9


@pytest.mark.parametrize("name, ext, column, value", [
    ("Validator_KHR_materials_clearcoat.gltf", "KHR_materials_clearcoat", 53, 0.5),
    ("Validator_KHR_materials_transmission.gltf", "KHR_materials_transmission", 48, 0.5),
])
def test_khronos_validator_samples_load_and_render(gltf_samples, name, ext, column, value):
    # Khronos glTF-Validator samples (../shared/gltf-samples, facts.json): their materials carry
    # the extension's factors into the table and render on a test sphere without error,
    # finite and below a uniform environment of 1
    scene = load_gltf(gltf_samples / name)
    assert ext in scene.materials[0].extensions
    table, _ = pack_materials(scene)
    assert table[0, column] == pytest.approx(value)
    p, t, n = uv_sphere(1.0, (0, 0, 0), 24, 48)
    ball = make_scene(p, t, normals=n, materials=[scene.materials[0]])
    film = render(ball, RenderSettings(width=8, height=8, spp=32, seed=4), env=make_environment(1.0),
                  camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3))
    mean, sem = _covered(film)
    assert np.all(np.isfinite(film.radiance)) and mean.max() <= 1.0 + 4 * sem.max() + 1e-3


def _highlight_width(cc_roughness):
    """Angular spread of a clearcoat highlight: a black coated quad under a small emitter."""
    from transport_scenes import disk

    coated = Material(name="coat", base_colour_factor=(0, 0, 0, 1), metallic_factor=0.0, roughness_factor=1.0,
                      extensions={"KHR_materials_specular": {"specularFactor": 0.0},
                                  "KHR_materials_clearcoat": {"clearcoatFactor": 1.0,
                                                              "clearcoatRoughnessFactor": cc_roughness}})
    lamp = Material(name="lamp", base_colour_factor=(0, 0, 0, 1), emissive_factor=(1, 1, 1), emissive_strength=50.0)
    fp, ft = quad((0, 0, 0), (3, 0, 0), (0, 3, 0))
    lp, lt = disk((1.5, 0, 3), (-1.5, 0, -3), 0.1, 32)
    pos, tris, mats, nrm = combine([(fp, ft, 0, None), (lp, lt, 1, None)])
    scene = make_scene(pos, tris, normals=nrm, materials=[coated, lamp], tri_material=mats)
    # the camera sees the lamp's mirror image at the origin (the lamp itself is out of view)
    cam = camera((-1.5, 0, 3), (0, 0, 0), yfov_rad=0.6)
    film = render(scene, RenderSettings(width=24, height=24, spp=32, seed=5), camera=cam)
    img = film.radiance[..., 0]
    yy, xx = np.mgrid[0:24, 0:24]
    cx, cy = (img * xx).sum() / img.sum(), (img * yy).sum() / img.sum()
    return float((img * ((xx - cx) ** 2 + (yy - cy) ** 2)).sum() / img.sum())


def test_rougher_clearcoat_gives_a_wider_highlight():
    # KHR_materials_clearcoat: the coat lobe is GGX with alpha = clearcoatRoughness^2, so the
    # reflected highlight of a small lamp spreads wider as the coat roughness grows
    w = [_highlight_width(r) for r in (0.2, 0.4, 0.7)]
    assert w[0] < w[1] < w[2], w


def _anisotropic_highlight(tangent, rotation):
    """(spread along image x, spread along image y) of a lamp's highlight on brushed metal."""
    from transport_scenes import disk

    metal = Material(name="brushed", base_colour_factor=(0.9, 0.9, 0.9, 1), metallic_factor=1.0, roughness_factor=0.2,
                     extensions={"KHR_materials_anisotropy": {"anisotropyStrength": 0.9,
                                                              "anisotropyRotation": rotation}})
    lamp = Material(name="lamp", base_colour_factor=(0, 0, 0, 1), emissive_factor=(1, 1, 1), emissive_strength=50.0)
    fp, ft = quad((0, 0, 0), (3, 0, 0), (0, 3, 0))
    lp, lt = disk((1.5, 0, 3), (-1.5, 0, -3), 0.1, 32)
    pos, tris, mats, nrm = combine([(fp, ft, 0, None), (lp, lt, 1, None)])
    tan = np.zeros((len(pos), 4))
    tan[:, :3] = tangent
    tan[:, 3] = 1.0
    scene = make_scene(pos, tris, normals=nrm, tangents=tan, materials=[metal, lamp], tri_material=mats)
    film = render(scene, RenderSettings(width=24, height=24, spp=16, seed=6),
                  camera=camera((-1.5, 0, 3), (0, 0, 0), yfov_rad=0.9))
    img = film.radiance[..., 0]
    yy, xx = np.mgrid[0:24, 0:24]
    cx, cy = (img * xx).sum() / img.sum(), (img * yy).sum() / img.sum()
    return float((img * (xx - cx) ** 2).sum() / img.sum()), float((img * (yy - cy) ** 2).sum() / img.sum())


def test_brushed_metal_stretches_the_highlight_along_the_tangent():
    # KHR_materials_anisotropy: alpha along the (rotated) tangent = mix(alpha, 1, strength^2),
    # so the highlight is long along the tangent's direction on screen; a rotation of pi/2
    # turns a tangent along x into one along y (the bitangent, w = +1)
    sx_x, sy_x = _anisotropic_highlight((1, 0, 0), 0.0)
    sx_y, sy_y = _anisotropic_highlight((0, 1, 0), 0.0)
    sx_r, sy_r = _anisotropic_highlight((1, 0, 0), math.pi / 2)
    assert sx_x > 2 * sy_x and sy_y > 2 * sx_y, (sx_x, sy_x, sx_y, sy_y)
    assert sy_r > 2 * sx_r
    assert sy_r == pytest.approx(sy_y, rel=0.15) and sx_r == pytest.approx(sx_y, rel=0.3)


@pytest.mark.parametrize("deg", [0.0, 60.0])
def test_emission_under_a_clearcoat_is_scaled_by_one_minus_its_fresnel(deg):
    # KHR_materials_clearcoat README: the coat also covers emission, emitted x (1 - cc Fc),
    # Fc = 0.04 + 0.96 (1 - cos)^5 (Schlick, f0 of ior 1.5); black environment, black base
    cc = 0.8
    mat = Material(name="display", base_colour_factor=(0, 0, 0, 1), metallic_factor=0.0, roughness_factor=1.0,
                   emissive_factor=(1.0, 0.5, 0.25), emissive_strength=2.0,
                   extensions={"KHR_materials_specular": {"specularFactor": 0.0},
                               "KHR_materials_clearcoat": {"clearcoatFactor": cc}})
    p, t = quad((0, 0, 0), (5, 0, 0), (0, 5, 0))
    th = math.radians(deg)
    cam = camera((0, -3 * math.sin(th), 3 * math.cos(th)), (0, 0, 0), kind="orthographic", ymag=0.2)
    film = render(make_scene(p, t, materials=[mat]), RenderSettings(width=4, height=4, spp=8, seed=2), camera=cam)
    fc = 0.04 + 0.96 * (1 - math.cos(th)) ** 5
    np.testing.assert_allclose(film.radiance.mean(axis=(0, 1)), np.array([2.0, 1.0, 0.5]) * (1 - cc * fc), rtol=1e-3)
