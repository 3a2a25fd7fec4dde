"""Transmissive and layered finishes rendered by the path tracer, against optics closed forms
(Beer-Lambert, Fresnel slab series), the white furnace and the Khronos validator samples."""

from __future__ import annotations

import math

import numpy as np
import pytest

from transport_scenes import camera, combine, quad, uv_sphere
from variantshot.geometry.gltf import load_gltf
from variantshot.geometry.scene import Material, TextureRef, make_scene
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


@pytest.mark.parametrize("name, mat, ext, column, value, slots", [
    ("Validator_KHR_materials_clearcoat.gltf", 0, "KHR_materials_clearcoat", 53, 0.5, (80, 88, 96)),
    ("Validator_KHR_materials_transmission.gltf", 0, "KHR_materials_transmission", 48, 0.5, (64,)),
    ("Validator_KHR_materials_variants.gltf", 1, "KHR_materials_sheen", 55, 0.0, (104,)),
])
def test_khronos_validator_samples_load_and_render(gltf_samples, name, mat, ext, column, value, slots):
    # Khronos glTF-Validator samples (../shared/gltf-samples, README and facts.json): their
    # materials carry the extension's factors and textures (clearcoat: three textures, normal
    # scale 1.5; transmission: transmissionTexture 0; variants: a sheenColorTexture) into the
    # table and render on a test sphere without error, finite and below a uniform environment
    # of 1.  Their textures have no image source: the loader's 1x1 white stands in.
    scene = load_gltf(gltf_samples / name)
    material = scene.materials[mat]
    assert ext in material.extensions
    table, _ = pack_materials(scene)
    assert table[mat, column] == pytest.approx(value)
    assert all(table[mat, c] >= 0 for c in slots) and table[mat, 145] == 1.0
    if ext == "KHR_materials_clearcoat":
        assert table[mat, 144] == pytest.approx(1.5)
    p, t, n = uv_sphere(1.0, (0, 0, 0), 24, 48)
    ball = make_scene(p, t, normals=n, materials=[material], textures=scene.textures)
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


def _anisotropic_highlight(tangent, rotation, texel=None):
    """(spread along image x, spread along image y) of a lamp's highlight on brushed metal."""
    from transport_scenes import disk

    aniso = {"anisotropyStrength": 0.9, "anisotropyRotation": rotation}
    textures = []
    if texel is not None:
        aniso["anisotropyTexture"] = {"index": 0}
        textures = [_nearest(texel)]
    metal = Material(name="brushed", base_colour_factor=(0.9, 0.9, 0.9, 1), metallic_factor=1.0, roughness_factor=0.2,
                     extensions={"KHR_materials_anisotropy": aniso})
    lamp = Material(name="lamp", base_colour_factor=(0, 0, 0, 1), emissive_factor=(1, 1, 1), emissive_strength=50.0)
    fp, ft = quad((0, 0, 0), (3, 0, 0), (0, 3, 0))
    lp, lt = disk((1.5, 0, 3), (-1.5, 0, -3), 0.1, 32)
    pos, tris, mats, nrm = combine([(fp, ft, 0, None), (lp, lt, 1, None)])
    tan = np.zeros((len(pos), 4))
    tan[:, :3] = tangent
    tan[:, 3] = 1.0
    scene = make_scene(pos, tris, normals=nrm, tangents=tan, materials=[metal, lamp], tri_material=mats,
                       textures=textures)
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


def test_anisotropy_texture_turns_the_highlight():
    # KHR_materials_anisotropy: anisotropyTexture red/green [0, 1] -> [-1, 1] is the direction
    # in (tangent, bitangent) space; texel (0.5, 1) is the bitangent, so with the tangent along x
    # the highlight streaks like a tangent along y; blue 1 keeps the strength.  The default
    # texel (1, 0.5, 1) is the tangent itself (no change from the untextured material).
    sx_t, sy_t = _anisotropic_highlight((1, 0, 0), 0.0, texel=(0.5, 1.0, 1.0, 1.0))
    sx_y, sy_y = _anisotropic_highlight((0, 1, 0), 0.0)
    assert sy_t > 2 * sx_t
    assert sy_t == pytest.approx(sy_y, rel=0.15) and sx_t == pytest.approx(sx_y, rel=0.3)
    assert _anisotropic_highlight((1, 0, 0), 0.0, texel=(1.0, 0.5, 1.0, 1.0)) == pytest.approx(
        _anisotropic_highlight((1, 0, 0), 0.0), rel=1e-6)


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


# --------------------------------------------------------------------- extension textures, rendered


def _nearest(pixels):
    """A nearest-filtered, clamped texture of (H, W, 4) texels, or of one RGBA texel."""
    from variantshot.geometry.scene import CLAMP_TO_EDGE, NEAREST, Texture

    px = np.asarray(pixels, np.float32)
    px = px if px.ndim == 3 else px.reshape(1, 1, 4)
    return Texture(pixels=px, mag_filter=NEAREST, wrap_s=CLAMP_TO_EDGE, wrap_t=CLAMP_TO_EDGE)


def _sphere_uv(n_theta=24, n_phi=48):
    """uv_sphere with UVs (u = phi / 2 pi, v = theta / pi over its vertex grid)."""
    p, t, n = uv_sphere(1.0, (0, 0, 0), n_theta, n_phi)
    th, ph = np.meshgrid(np.linspace(0, 1, n_theta + 1), np.linspace(0, 1, n_phi + 1), indexing="ij")
    return p, t, n, np.stack([ph.ravel(), th.ravel()], 1)


@pytest.mark.parametrize("ext, factors, key, factor_key, channels, srgb", [
    ("KHR_materials_transmission", {"transmissionFactor": 0.5}, "transmissionTexture", "transmissionFactor", (0,),
     False),
    ("KHR_materials_clearcoat", {"clearcoatFactor": 1.0, "clearcoatRoughnessFactor": 0.5},
     "clearcoatRoughnessTexture", "clearcoatRoughnessFactor", (1,), False),
    ("KHR_materials_sheen", {"sheenColorFactor": [1.0, 0.5, 0.5], "sheenRoughnessFactor": 0.5}, "sheenColorTexture",
     "sheenColorFactor", (0, 1, 2), True),
    ("KHR_materials_specular", {"specularFactor": 0.5}, "specularTexture", "specularFactor", (3,), False),
])
def test_textured_render_equals_the_render_of_the_product_factor(ext, factors, key, factor_key, channels, srgb):
    # each KHR_materials_* README: value = factor x texture channel.  The path tracer is
    # deterministic per seed, so a texture of constant texel c and factor f must give the very
    # same image as factor f x c without a texture (powers of two keep f x c exact in float32).
    from variantshot.imaging.colour import srgb_decode

    texel = np.array([0.25, 0.5, 0.75, 0.5], np.float32)
    value = texel.astype(np.float64)
    if srgb:
        value[:3] = srgb_decode(value[:3]).astype(np.float32)
    f = factors[factor_key]
    prod = ([f[i] * float(np.float32(value[c])) for i, c in enumerate(channels)] if isinstance(f, list)
            else f * float(np.float32(value[channels[0]])))
    common = dict(base_colour_factor=(0.8, 0.6, 0.4, 1), metallic_factor=0.0, roughness_factor=0.4)
    textured = Material(name="t", extensions={ext: dict(factors, **{key: {"index": 0}})}, **common)
    plain = Material(name="p", extensions={ext: dict(factors, **{factor_key: prod})}, **common)
    p, t, n, uv = _sphere_uv()
    films = []
    for m in (textured, plain):
        scene = make_scene(p, t, normals=n, uvs=uv, materials=[m], textures=[_nearest(texel)])
        films.append(render(scene, RenderSettings(width=8, height=8, spp=16, seed=9), env=make_environment(1.0),
                            camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3)))
    np.testing.assert_array_equal(films[0].radiance, films[1].radiance)
    assert films[0].radiance.max() > 0


def test_textured_coat_and_sheen_stay_below_the_furnace():
    # REFERENCES §6(a), KHR_materials_clearcoat / _sheen albedo scaling: a white Lambertian
    # (specularFactor 0) sphere under a textured clearcoat (intensity, roughness and its own
    # tilted normal map) and textured sheen never reflects more than the uniform environment (1)
    rng = np.random.default_rng(1)
    px = rng.random((8, 8, 4)).astype(np.float32)
    px[..., 2] = np.maximum(px[..., 2], 0.6)  # normal map texels: z component > 0
    tex = _nearest(px)
    mat = Material(name="flock", base_colour_factor=(1, 1, 1, 1), metallic_factor=0.0, roughness_factor=0.8,
                   extensions={"KHR_materials_specular": {"specularFactor": 0.0},
                               "KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatTexture": {"index": 0},
                                                           "clearcoatRoughnessFactor": 0.6,
                                                           "clearcoatRoughnessTexture": {"index": 0},
                                                           "clearcoatNormalTexture": {"index": 0, "scale": 1.0}},
                               "KHR_materials_sheen": {"sheenColorFactor": [1, 1, 1], "sheenColorTexture": {"index": 0},
                                                       "sheenRoughnessFactor": 1.0,
                                                       "sheenRoughnessTexture": {"index": 0}}})
    p, t, n, uv = _sphere_uv(32, 64)
    film = render(make_scene(p, t, normals=n, uvs=uv, materials=[mat], textures=[tex]),
                  RenderSettings(width=8, height=8, spp=128, seed=2), env=make_environment(1.0),
                  camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3))
    mean, sem = _covered(film)
    assert mean[0] <= 1.0 + 4 * sem[0] + 1e-3 and mean[0] > 0.8
    m = film.alpha == 1.0
    px_sem = np.sqrt(film.variance[m][:, 0])
    assert np.all(film.radiance[m][:, 0] <= 1.0 + 5 * px_sem + 2e-3)


def _coat_highlight_x(base_normal=None, coat_normal=None, size=48):
    """Image-x centroid of a small lamp's highlight on a black clearcoated quad (tangent +x)."""
    from transport_scenes import disk

    ext = {"KHR_materials_specular": {"specularFactor": 0.0},
           "KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatRoughnessFactor": 0.1}}
    textures, kw = [], {}
    if base_normal is not None:
        textures.append(_nearest(base_normal))
        kw["normal_texture"] = TextureRef(index=len(textures) - 1)
    if coat_normal is not None:
        textures.append(_nearest(coat_normal))
        ext["KHR_materials_clearcoat"]["clearcoatNormalTexture"] = {"index": len(textures) - 1}
    coated = Material(name="coat", base_colour_factor=(0, 0, 0, 1), metallic_factor=0.0, roughness_factor=1.0,
                      extensions=ext, **kw)
    lamp = Material(name="lamp", base_colour_factor=(0, 0, 0, 1), emissive_factor=(1, 1, 1), emissive_strength=50.0)
    fp, ft = quad((0, 0, 0), (3, 0, 0), (0, 3, 0))
    lp, lt = disk((1.5, 0, 3), (-1.5, 0, -3), 0.1, 32)
    pos, tris, mats, nrm = combine([(fp, ft, 0, None), (lp, lt, 1, None)])
    tan = np.zeros((len(pos), 4))
    tan[:, 0] = 1.0
    tan[:, 3] = 1.0
    scene = make_scene(pos, tris, normals=nrm, tangents=tan, materials=[coated, lamp], tri_material=mats,
                       textures=textures)
    film = render(scene, RenderSettings(width=size, height=size, spp=32, seed=5),
                  camera=camera((-1.5, 0, 3), (0, 0, 0), yfov_rad=0.6))
    img = film.radiance[..., 0]
    xx = np.mgrid[0:size, 0:size][1]
    return float((img * xx).sum() / img.sum())


def _mirror_point_pixel_x(tilt, size=48, yfov=0.6):
    """Closed form (law of reflection about N = (sin tilt, 0, cos tilt)): the point P = (x, 0, 0)
    of the plane z = 0 that reflects the camera at C = (-1.5, 0, 3) into the lamp centre
    L = (1.5, 0, 3), found by bisection, projected with the pinhole camera looking at the origin."""
    c, lamp = np.array([-1.5, 0, 3.0]), np.array([1.5, 0, 3.0])
    nrm = np.array([math.sin(tilt), 0, math.cos(tilt)])

    def miss(x):
        p = np.array([x, 0, 0.0])
        v = (c - p) / np.linalg.norm(c - p)
        r = 2 * (v @ nrm) * nrm - v
        to_l = (lamp - p) / np.linalg.norm(lamp - p)
        return r[0] * to_l[2] - r[2] * to_l[0]  # signed sine of the angle between r and P -> L

    lo, hi = -1.4, 1.4
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        if np.sign(miss(mid)) == np.sign(miss(lo)):
            lo = mid
        else:
            hi = mid
    p = np.array([0.5 * (lo + hi), 0, 0])
    fwd = -c / np.linalg.norm(c)
    right = np.cross(fwd, [0, 1, 0])
    right /= np.linalg.norm(right)
    d = p - c
    return (size / 2 - 0.5) + (d @ right) / (d @ fwd) * (size / 2) / math.tan(yfov / 2)


def test_coat_normal_texture_moves_the_coat_highlight_and_the_base_normal_map_does_not():
    # KHR_materials_clearcoat: "If clearcoatNormalTexture is not given, no normal mapping is
    # applied to the clear coat layer, even if normal mapping is applied to the base material";
    # with it, the coat reflects about its own normal (the law of reflection, closed form above).
    tilt = math.radians(4.0)
    texel = [(math.sin(tilt) + 1) / 2, 0.5, (math.cos(tilt) + 1) / 2, 1.0]  # glTF 2.0 §3.9.3 encoding
    flat = _coat_highlight_x()
    under_base_map = _coat_highlight_x(base_normal=texel)
    own_map = _coat_highlight_x(coat_normal=texel)
    want_flat, want_tilted = _mirror_point_pixel_x(0.0), _mirror_point_pixel_x(tilt)
    assert abs(want_tilted - want_flat) > 3  # the closed form moves it by several pixels
    assert flat == pytest.approx(want_flat, abs=0.5)
    assert under_base_map == pytest.approx(flat, abs=0.2)
    assert own_map == pytest.approx(want_tilted, abs=0.7)
