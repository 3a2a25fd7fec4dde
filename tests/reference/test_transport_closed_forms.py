"""The path tracer against closed forms of radiometry (REFERENCES.md §6, §5).

Every expected value here is a formula from a published source, named beside each check;
tolerances are Monte Carlo noise (several standard errors estimated from the film's own
per-pixel variance) plus, where stated, the geometric error of a tessellated surface.
Materials use ``KHR_materials_specular`` ``specularFactor = 0`` where a pure Lambertian
surface is needed (glTF's dielectric always adds a Fresnel-weighted specular lobe otherwise).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from transport_scenes import camera, combine, disk, quad, uv_sphere
from variantshot.geometry.scene import Light, Material, make_scene
from variantshot.settings import RenderSettings
from variantshot.transport.environment import make_environment
from variantshot.transport.integrator import render

LAMBERT = {"KHR_materials_specular": {"specularFactor": 0.0}}


def lambert(rho, **kw):
    return Material(name="lambert", base_colour_factor=(rho, rho, rho, 1.0), metallic_factor=0.0,
                    roughness_factor=1.0, extensions=LAMBERT, **kw)


def _sphere_scene(material, radius=1.0, res=(32, 64), inward=False):
    p, t, n = uv_sphere(radius, (0, 0, 0), *res, inward=inward)
    return make_scene(p, t, normals=n, materials=[material])


def _covered_mean(film):
    m = film.alpha == 1.0
    mean = film.radiance[m].mean(axis=0)
    sem = np.sqrt(film.variance[m].mean(axis=0) / m.sum())
    return mean, sem


# -------------------------------------------------------------------------------- white furnace


@pytest.mark.parametrize("mode", ["full", "baseline"])
def test_white_furnace_lambert_sphere_renders_albedo(mode):
    # REFERENCES §6(a): Lambertian albedo rho, convex, uniform environment L = 1 -> pixel = rho
    # (Kulla & Conty 2017; "The white furnace test", lousodrome.net).  Tolerance 1 % (the
    # issue's bound); a faceted sphere loses < 0.1 % to directions below the true face.
    rho = 0.6
    scene = _sphere_scene(lambert(rho))
    film = render(scene, RenderSettings(width=8, height=8, spp=512, seed=1, mode=mode),
                  env=make_environment(1.0), camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3))
    mean, sem = _covered_mean(film)
    assert abs(mean[0] - rho) < 0.01 * rho
    assert abs(mean[0] - rho) < 5 * sem[0] + 1e-3


@pytest.mark.parametrize("roughness", [0.3, 0.6, 1.0])
def test_white_furnace_rough_dielectric_never_exceeds_one(roughness):
    # REFERENCES §6(a): an energy-conserving BSDF in a unit furnace never exceeds 1; white
    # base colour, default dielectric (f0 = 0.04, glTF Appendix B fresnel_mix).
    mat = Material(base_colour_factor=(1, 1, 1, 1), metallic_factor=0.0, roughness_factor=roughness)
    film = render(_sphere_scene(mat), RenderSettings(width=8, height=8, spp=256, seed=2),
                  env=make_environment(1.0), camera=camera((0, 0, 5), (0, 0, 0), yfov_rad=0.3))
    mean, sem = _covered_mean(film)
    assert mean[0] <= 1.0 + 3 * sem[0]
    # and it does not lose much either: fresnel_mix keeps (1 - F) of the white diffuse, F <= 0.09
    # averaged over the hemisphere (REFERENCES §6(f), 0.0918 for n = 1.5); a loose bound
    assert mean[0] > 0.85


@pytest.mark.parametrize("mu, expected, tol", [(1.0, 1.0 - math.log(2.0), 0.003), (0.5, 0.451, 0.006),
                                               (0.2, 0.642, 0.008)])
def test_furnace_rough_white_metal_quad_gives_ggx_directional_albedo(mu, expected, tol):
    # REFERENCES §7: a white metal (F = 1 exactly: f0 = base colour = 1) of roughness 1 has the
    # single-scattering GGX / height-correlated-Smith albedo E(mu): at normal view the closed form
    # 1 - ln 2 = 0.306853 (derived there: alpha = 1 gives D = 1/pi, Lambda = (1/mu - 1)/2);
    # E(0.5) = 0.451 and E(0.2) = 0.642 are the table's computed values (3 digits, so the
    # tolerance includes +-0.0005 rounding).  A flat quad in a unit furnace, seen by an
    # orthographic camera at cos(theta_o) = mu, shows E(mu) (one bounce, nothing else in view).
    mat = Material(base_colour_factor=(1, 1, 1, 1), metallic_factor=1.0, roughness_factor=1.0)
    p, t = quad((0, 0, 0), (50, 0, 0), (0, 50, 0))  # faces +z, large enough to fill the view
    scene = make_scene(p, t, materials=[mat])
    s = math.sqrt(1 - mu * mu)
    cam = camera((0, 3 * s, 3 * mu), (0, 0, 0), kind="orthographic", ymag=0.2)
    film = render(scene, RenderSettings(width=4, height=4, spp=4096, seed=3), env=make_environment(1.0), camera=cam)
    assert film.radiance[..., 0].mean() == pytest.approx(expected, abs=tol)


# ------------------------------------------------------------------------- closed emitting sphere


@pytest.mark.parametrize("rho", [0.5, 0.9])
def test_closed_diffuse_sphere_radiance(rho):
    # REFERENCES §6(b): uniform emission Le, albedo rho, inside a closed sphere: L = Le / (1 - rho)
    # (integrating-sphere theory, Goebel 1967).  A depth cap k would give Le (1 - rho^(k+1))/(1 - rho):
    # for rho = 0.9 a cap of 30 bounces is already 4 % low, so this catches a biased cap.
    le = 0.5
    mat = lambert(rho, emissive_factor=(le, le, le), double_sided=True)
    scene = _sphere_scene(mat, res=(24, 48))
    spp = 128 if rho < 0.8 else 512
    film = render(scene, RenderSettings(width=6, height=6, spp=spp, seed=4),
                  camera=camera((0, 0, 0), (0, 0, -1), yfov_rad=1.2))
    expected = le / (1.0 - rho)
    mean = film.radiance[..., 0].mean()
    sem = math.sqrt(film.variance[..., 0].mean() / film.variance[..., 0].size)
    assert abs(mean - expected) < max(5 * sem, 0.01 * expected), (mean, expected, sem)


# ------------------------------------------------------------------- point light over a Lambert plane


def _top_camera(half):
    from variantshot.geometry.scene import Camera
    from transport_scenes import look_at

    # straight down -y; camera right = +x, camera up = -z, so raster rows run towards +z
    return Camera(name="top", kind="orthographic", world_from_camera=look_at((0, 5, 0), (0, 0, 0), up=(0, 0, -1)),
                  xmag=half, ymag=half)


def _footprint(ix, iy, half, w, n=20000):
    """World (x, z) of tent-filtered samples of pixel (ix, iy) under :func:`_top_camera`."""
    rng = np.random.default_rng(ix * 1000 + iy)
    u = rng.random((n, 2))
    off = np.where(u < 0.5, np.sqrt(2 * u) - 1, 1 - np.sqrt(2 - 2 * u))  # tent, radius 1 px
    px = 2 * half / w
    return -half + (ix + 0.5 + off[:, 0]) * px, -half + (iy + 0.5 + off[:, 1]) * px


def test_point_light_over_lambert_plane():
    # REFERENCES §6(c): E = I cos(theta) / r^2 (KHR_lights_punctual: candela, inverse square;
    # PBR 4ed ch. 12); a Lambertian plane of albedo rho then has L = rho / pi * E.  The expected
    # pixel is that formula averaged over the pixel's tent-filter footprint; the tolerance is
    # 4 standard errors from the film's own variance estimate.
    rho, intensity, h = 0.8, 5.0, 1.0
    p, t = quad((0, 0, 0), (4, 0, 0), (0, 0, -4))  # +y normal
    light = Light(name="bulb", kind="point", intensity=intensity, position=(0.3, h, -0.2))
    scene = make_scene(p, t, materials=[lambert(rho)], lights=[light])
    w, half = 16, 1.5
    film = render(scene, RenderSettings(width=w, height=w, spp=256, seed=5), camera=_top_camera(half))
    for iy, ix in [(2, 3), (8, 8), (5, 12), (13, 4), (10, 10)]:
        xs, zs = _footprint(ix, iy, half, w)
        r2 = (xs - 0.3) ** 2 + (zs + 0.2) ** 2 + h * h
        expected = (rho / np.pi * intensity * (h / np.sqrt(r2)) / r2).mean()
        got = film.radiance[iy, ix, 0]
        assert abs(got - expected) < 4 * math.sqrt(film.variance[iy, ix, 0]) + 1e-3 * expected, (ix, iy, got, expected)
        assert got == pytest.approx(expected, rel=0.03)


def test_spot_light_cone_falloff_on_plane():
    # KHR_lights_punctual README: angular attenuation = clamp(cd * scale + offset, 0, 1)^2 with
    # scale = 1 / max(0.001, cos(inner) - cos(outer)), offset = -cos(outer) * scale; times the
    # inverse-square E of §6(c).
    rho, intensity, h = 0.5, 10.0, 1.0
    p, t = quad((0, 0, 0), (4, 0, 0), (0, 0, -4))
    inner, outer = 0.2, 0.6
    spot = Light(name="spot", kind="spot", intensity=intensity, position=(0, h, 0), direction=(0, -1, 0),
                 inner_cone_rad=inner, outer_cone_rad=outer)
    scene = make_scene(p, t, materials=[lambert(rho)], lights=[spot])
    w, half = 32, 1.0
    film = render(scene, RenderSettings(width=w, height=w, spp=128, seed=6), camera=_top_camera(half))
    scale = 1 / max(0.001, math.cos(inner) - math.cos(outer))
    offset = -math.cos(outer) * scale
    for ix in [16, 20, 22, 24, 26, 30]:
        xs, zs = _footprint(ix, 16, half, w)
        r2 = xs**2 + zs**2 + h * h
        cd = h / np.sqrt(r2)
        att = np.clip(cd * scale + offset, 0.0, 1.0) ** 2
        expected = (rho / math.pi * intensity * cd / r2 * att).mean()
        got = film.radiance[16, ix, 0]
        assert abs(got - expected) < 4 * math.sqrt(film.variance[16, ix, 0]) + 1e-3 * max(expected, 1e-3), (ix, got,
                                                                                                            expected)
    assert film.radiance[16, 31, 0] < film.radiance[16, 16, 0]


# ------------------------------------------------------------------------------- disk emitter


@pytest.mark.parametrize("mode, alpha", [("full", 1.0), ("baseline", 1.0), ("full", 0.5), ("baseline", 0.5)])
def test_disk_emitter_on_axis_irradiance(mode, alpha):
    # REFERENCES §6(d): Lambertian disk of radiance L, radius R, on-axis at height h:
    # E = pi L R^2 / (R^2 + h^2) (configuration factor element -> coaxial disk, Howell's
    # catalogue).  Measured on a Lambertian floor (L_out = rho / pi * E) seen obliquely so that
    # the camera ray passes under the disk; R = h gives E = pi L / 2.  The disk is a 512-gon
    # (area deficit 2.5e-5), the footprint 2e-3 h wide; the disk is black Lambertian (no
    # reflection of the floor's light back down).
    le, radius, h, rho = 2.0, 1.0, 1.0, 0.75
    dp, dt = disk((0, h, 0), (0, -1, 0), radius, n_seg=512)
    fp, ft = quad((0, 0, 0), (20, 0, 0), (0, 0, -20))
    pos, tris, tri_mat, nrm = combine([(dp, dt, 1, None), (fp, ft, 0, None)])
    # alpha < 1: a BLEND emitter (stochastic coverage) emits alpha x Le on average, so E scales by alpha
    emitter = Material(name="disk", base_colour_factor=(0, 0, 0, alpha), emissive_factor=(le, le, le),
                       metallic_factor=0.0, extensions=LAMBERT, alpha_mode="OPAQUE" if alpha == 1 else "BLEND")
    scene = make_scene(pos, tris, normals=nrm, tri_material=tri_mat, materials=[lambert(rho), emitter])
    cam = camera((6.0, 0.4, 0.0), (0, 0, 0), yfov_rad=0.0005)
    film = render(scene, RenderSettings(width=2, height=2, spp=16384, seed=7, mode=mode), camera=cam)
    expected = alpha * rho / math.pi * math.pi * le * radius**2 / (radius**2 + h**2)
    mean = film.radiance[..., 0].mean()
    sem = math.sqrt(film.variance[..., 0].mean() / 4)
    assert abs(mean - expected) < 4 * sem + 1e-4 * expected, (mean, expected, sem)
    assert sem < (0.002 if mode == "full" else 0.005) / alpha * expected  # the check has teeth


# ------------------------------------------------------------------- dielectric normal incidence


@pytest.mark.parametrize("ior, expected", [(1.5, 0.04), (1.33, 0.02006)])
def test_smooth_dielectric_normal_incidence_reflectance(ior, expected):
    # REFERENCES §6(f): R0 = ((n - 1)/(n + 1))^2: 0.04000 for n = 1.5, 0.02006 for n = 1.33
    # (glTF Appendix B Schlick f0; KHR_materials_ior).  A black (base colour 0) smooth dielectric
    # quad under a uniform environment of 1, seen at normal incidence by an orthographic camera:
    # the pixel is the specular lobe's albedo times Schlick's F.  At roughness 0.05 (alpha
    # clamped to 0.002) the lobe is a few thousandths of a radian wide, so V.H = 1 to 1e-5 and
    # the GGX albedo is 1.000 (REFERENCES §7, roughness 0.1 row): the pixel is R0.
    mat = Material(base_colour_factor=(0, 0, 0, 1), metallic_factor=0.0, roughness_factor=0.05,
                   extensions={"KHR_materials_ior": {"ior": ior}})
    p, t = quad((0, 0, 0), (1, 0, 0), (0, 1, 0))  # faces +z
    scene = make_scene(p, t, materials=[mat])
    cam = camera((0, 0, 3), (0, 0, 0), kind="orthographic", ymag=0.5)
    film = render(scene, RenderSettings(width=4, height=4, spp=64, seed=8), env=make_environment(1.0), camera=cam)
    assert film.radiance.mean() == pytest.approx(expected, rel=0.01)


# ------------------------------------------------------------------------------ convergence rate


def _rmse_slope(scene, cam, truth, spps, env=None, size=16):
    rmse = []
    for k, spp in enumerate(spps):
        film = render(scene, RenderSettings(width=size, height=size, spp=spp, seed=100 + k), env=env, camera=cam)
        m = film.alpha == 1.0
        rmse.append(math.sqrt(np.mean((film.radiance[m, 0] - truth) ** 2)))
    return float(np.polyfit(np.log(spps), np.log(rmse), 1)[0]), rmse


def test_error_falls_as_inverse_sqrt_n():
    # REFERENCES §6(g): RMSE of an unbiased Monte Carlo estimator = sigma / sqrt(N) (PBR 4ed
    # ch. 2): the fitted log-log slope of RMSE against spp must be -0.5 +- 0.1.  Scene with a
    # known answer: inside the closed emitting sphere, L = Le / (1 - rho) (§6(b)); its error is
    # dominated by the multi-bounce (plain, hashed) dimensions.  Independent seeds per count.
    le, rho = 0.5, 0.5
    scene = _sphere_scene(lambert(rho, emissive_factor=(le, le, le), double_sided=True), res=(24, 48))
    slope, rmse = _rmse_slope(scene, camera((0, 0, 0), (0, 0, -1), yfov_rad=1.2), le / (1 - rho), [4, 16, 64, 256])
    assert -0.6 <= slope <= -0.4, (slope, rmse)


def test_stratified_first_vertex_converges_at_least_as_fast():
    # REFERENCES §6(g): with low-discrepancy samples (here the first vertex's light and BSDF
    # pairs) the slope may be steeper than -0.5, never shallower.  The Lambert white furnace,
    # whose answer is rho (§6(a)), is a one-bounce integral, so QMC shows there.
    rho = 0.5
    scene = _sphere_scene(lambert(rho), res=(24, 48))
    slope, rmse = _rmse_slope(scene, camera((0, 0, 5), (0, 0, 0), yfov_rad=0.25), rho, [4, 16, 64, 256],
                              env=make_environment(1.0))
    assert slope <= -0.5, (slope, rmse)


# ------------------------------------------------------------------------- estimator consistency


def test_nee_mis_and_plain_path_tracing_agree_on_a_studio_scene():
    # Unbiasedness (Veach 1997, MIS with the power heuristic): NEE + MIS and BSDF-only sampling
    # estimate the same integral; the image means must agree within their joint noise.
    from transport_scenes import product_scene

    scene, cam = product_scene(sphere_res=(12, 24))
    env = make_environment(0.05)
    full = render(scene, RenderSettings(width=12, height=12, spp=256, seed=9), env=env, camera=cam)
    base = render(scene, RenderSettings(width=12, height=12, spp=1024, seed=10, mode="baseline"), env=env,
                  camera=cam)
    a = full.radiance.mean(axis=(0, 1))
    b = base.radiance.mean(axis=(0, 1))
    n = full.radiance.shape[0] * full.radiance.shape[1]
    sa = np.sqrt(full.variance.sum(axis=(0, 1))) / n
    sb = np.sqrt(base.variance.sum(axis=(0, 1))) / n
    assert np.all(np.abs(a - b) < 5 * np.sqrt(sa**2 + sb**2) + 1e-3), (a, b, sa, sb)


# ------------------------------------------------------------------- importance-sampled environment


@pytest.mark.parametrize("mode", ["full", "baseline"])
def test_lambert_floor_under_an_equirectangular_environment(mode):
    # Irradiance of a horizontal surface from a piecewise-constant equirectangular environment
    # (+Y up; each pixel spans dphi = 2 pi / W and a polar band [theta0, theta1]):
    # E = sum_ij L_ij dphi int cos(theta) sin(theta) dtheta = sum_ij L_ij dphi (sin^2 theta1 -
    # sin^2 theta0) / 2 over the upper rows (PBR 4ed §4.1 irradiance integral); L_out = rho E / pi.
    # A contrasty random image exercises env_sample / env_pdf under MIS; the rotation must not
    # change a horizontal surface's irradiance.
    rng = np.random.default_rng(11)
    h, w = 16, 32
    img = rng.random((h, w, 3)) ** 4 * 4.0
    img[2, 5] = (400.0, 300.0, 200.0)  # a small "sun"
    theta = np.linspace(0, np.pi, h + 1)
    band = 0.5 * (np.sin(theta[1:]) ** 2 - np.sin(theta[:-1]) ** 2)[: h // 2]
    irradiance = (img[: h // 2] * (band[:, None, None] * 2 * np.pi / w)).sum(axis=(0, 1))
    rho = 0.5
    p, t = quad((0, 0, 0), (100, 0, 0), (0, 0, -100))
    scene = make_scene(p, t, materials=[lambert(rho)])
    cam = camera((0, 2.0, 2.0), (0, 0, 0), yfov_rad=0.01)
    env = make_environment(img.astype(np.float32), rotation_rad=0.7)
    spp = 2048 if mode == "full" else 8192
    film = render(scene, RenderSettings(width=2, height=2, spp=spp, seed=12, mode=mode), env=env, camera=cam)
    expected = rho / math.pi * irradiance
    mean = film.radiance.mean(axis=(0, 1))
    sem = np.sqrt(film.variance.mean(axis=(0, 1)) / 4)
    assert np.all(np.abs(mean - expected) < 4 * sem + 1e-3 * expected), (mean, expected, sem)
    if mode == "full":
        assert np.all(sem < 0.02 * expected)  # importance sampling makes it a sharp check
