"""Product-finish layers of the BSDF: exact Fresnel, rough dielectric, clearcoat, sheen, specularColor,
anisotropy -- against optics closed forms, the KHR_materials_* READMEs and the BSDF's own densities."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from variantshot.errors import RenderError
from variantshot.geometry.scene import Material, make_scene
from variantshot.transport import bsdf_kernels as bk
from variantshot.transport.materials import SUPPORTED_EXTENSIONS, pack_materials, resolve_params


def layered(base=(0.8, 0.8, 0.8), metallic=0.0, roughness=0.5, ior=1.5, specular=1.0, spec_colour=(1, 1, 1),
            transmission=0.0, eta=None, thin=False, clearcoat=0.0, cc_roughness=0.0, sheen=(0, 0, 0),
            sheen_roughness=0.0, anisotropy=0.0, coat_normal=(0.0, 0.0, 1.0)):
    return np.array(bk.make_bsdf_layers(0.0, *base, metallic, roughness, ior, specular, *spec_colour, transmission,
                                        ior if eta is None else eta, 1.0 if thin else 0.0, clearcoat, cc_roughness,
                                        *sheen, sheen_roughness, anisotropy, *coat_normal), np.float64)


def tilted(deg, azimuth_deg=0.0):
    """Unit vector at polar angle ``deg`` from +z, azimuth ``azimuth_deg`` from +x."""
    t, a = math.radians(deg), math.radians(azimuth_deg)
    return (math.sin(t) * math.cos(a), math.sin(t) * math.sin(a), math.cos(t))


def eval_f(p, wo, wi):
    out = np.zeros((wo.shape[0], 3))
    bk.eval_f_batch(p, np.ascontiguousarray(wo), np.ascontiguousarray(wi), out)
    return out


def pdf_f(p, wo, wi):
    out = np.zeros(wo.shape[0])
    bk.pdf_f_batch(p, np.ascontiguousarray(wo), np.ascontiguousarray(wi), out)
    return out


def sample_f(p, wo, u):
    out = np.zeros((wo.shape[0], 7))
    bk.sample_f_batch(p, np.ascontiguousarray(wo), np.ascontiguousarray(u), out)
    return out


def view(cos_o):
    return np.array([math.sqrt(1 - cos_o**2), 0.0, cos_o])


def albedo(p, cos_o, n=200_000, seed=3):
    """Directional albedo (reflected, transmitted) RGB by importance sampling, with standard errors."""
    s = sample_f(p, np.tile(view(cos_o), (n, 1)), np.random.default_rng(seed).random((n, 3)))
    ok = s[:, 6] > 0
    w = np.zeros((n, 3))
    w[ok] = s[ok, 3:6] * np.abs(s[ok, 2:3]) / s[ok, 6:7]
    up = s[:, 2] > 0
    refl = np.where(up[:, None], w, 0.0)
    tran = np.where(up[:, None], 0.0, w)
    return refl.mean(0), tran.mean(0), w.std(0) / math.sqrt(n)


# ------------------------------------------------------------------------ exact Fresnel (optics)


def fresnel_hecht(theta_i, n):
    """Fresnel equations in Hecht's sine/tangent form (E. Hecht, Optics, 4th ed., eq. 4.42-4.43;
    from memory): Rs = sin^2(ti - tt)/sin^2(ti + tt), Rp = tan^2(ti - tt)/tan^2(ti + tt)."""
    s = math.sin(theta_i) / n
    if s >= 1:
        return 1.0
    tt = math.asin(s)
    if theta_i == 0:
        return ((n - 1) / (n + 1)) ** 2
    rs = math.sin(theta_i - tt) ** 2 / math.sin(theta_i + tt) ** 2
    rp = math.tan(theta_i - tt) ** 2 / math.tan(theta_i + tt) ** 2
    return 0.5 * (rs + rp)


@pytest.mark.parametrize("deg, expected", [(0, 0.04000), (45, 0.05024), (60, 0.08919), (85, 0.61280)])
def test_fresnel_matches_published_values_for_n_1_5(deg, expected):
    # REFERENCES §6(f): exact unpolarised Fresnel, air -> glass n = 1.5 (computed from Hecht's
    # equations); also the sine/tangent form of Hecht, Optics, written independently above.
    got = bk.fresnel_dielectric(math.cos(math.radians(deg)), 1.5)
    assert got == pytest.approx(expected, abs=5e-5)
    assert got == pytest.approx(fresnel_hecht(math.radians(deg), 1.5), rel=1e-9)


@pytest.mark.parametrize("deg", [10.0, 30.0, 40.0, 41.0])
def test_fresnel_from_inside_glass_matches_hecht(deg):
    # glass -> air (eta = 1/1.5) below the critical angle, Hecht's form with n = 1/1.5
    got = bk.fresnel_dielectric(math.cos(math.radians(deg)), 1 / 1.5)
    assert got == pytest.approx(fresnel_hecht(math.radians(deg), 1 / 1.5), rel=1e-9)


def test_critical_angle_for_n_1_5():
    # REFERENCES §6(f): theta_c = asin(1/1.5) = 41.810 deg; total internal reflection beyond it
    tc = math.degrees(math.asin(1 / 1.5))
    assert tc == pytest.approx(41.810, abs=1e-3)
    assert bk.fresnel_dielectric(math.cos(math.radians(41.80)), 1 / 1.5) < 1.0
    assert bk.fresnel_dielectric(math.cos(math.radians(41.82)), 1 / 1.5) == 1.0


@pytest.mark.parametrize("deg, eta", [(0, 1.5), (45, 1.5), (70, 1.5), (30, 1 / 1.5), (60, 1 / 1.5)])
def test_smooth_glass_splits_light_by_exact_fresnel(deg, eta):
    # A smooth (alpha clamped at ALPHA_MIN) clear dielectric reflects F and transmits 1 - F of
    # the light, F from Hecht's equations (60 deg from inside is beyond the critical angle: R = 1).
    p = layered(base=(1, 1, 1), roughness=0.0, transmission=1.0, eta=eta)
    refl, tran, se = albedo(p, math.cos(math.radians(deg)))
    f = fresnel_hecht(math.radians(deg), eta)
    assert refl[0] == pytest.approx(f, abs=2e-3 + 4 * se[0])
    assert tran[0] == pytest.approx(1 - f, abs=2e-3 + 4 * se[0])


# ------------------------------------------------------------------------------ furnace per lobe


# Bases that conserve energy on their own: Lambertian (specular 0), metal, glass.  glTF 2.0's
# opaque dielectric fresnel_mix is *not* energy conserving at grazing view (Appendix B
# "Discussion" says so: a white rough-0.3 dielectric reflects ~1.32 at n.v = 0.05 here), so
# the layers are checked on conservative bases, and separately for adding no energy to any base.
LAMBERT_WHITE = dict(base=(1, 1, 1), specular=0.0)
CASES = {
    "smooth clear glass": dict(base=(1, 1, 1), roughness=0.0, transmission=1.0),
    "smooth glass, inside": dict(base=(1, 1, 1), roughness=0.0, transmission=1.0, eta=1 / 1.5),
    "rough glass": dict(base=(1, 1, 1), roughness=0.5, transmission=1.0),
    "rough glass, inside": dict(base=(1, 1, 1), roughness=0.4, transmission=1.0, eta=1 / 1.5),
    "thin rough film": dict(base=(1, 1, 1), roughness=0.6, transmission=1.0, thin=True),
    "half transmissive plastic": dict(LAMBERT_WHITE, roughness=0.3, transmission=0.5),
    "white under clearcoat": dict(LAMBERT_WHITE, roughness=0.3, clearcoat=1.0, cc_roughness=0.05),
    "white under rough clearcoat": dict(LAMBERT_WHITE, roughness=0.8, clearcoat=1.0, cc_roughness=0.6),
    "white metal under clearcoat": dict(base=(1, 1, 1), metallic=1.0, roughness=0.1, clearcoat=1.0),
    "white fabric with sheen": dict(LAMBERT_WHITE, roughness=0.9, sheen=(1, 1, 1), sheen_roughness=0.5),
    "sheen, smooth": dict(LAMBERT_WHITE, roughness=0.9, sheen=(1, 1, 1), sheen_roughness=0.1),
    "sheen and clearcoat": dict(LAMBERT_WHITE, roughness=0.7, sheen=(1, 1, 1), sheen_roughness=1.0,
                                clearcoat=1.0, cc_roughness=0.2),
    "glass under clearcoat and sheen": dict(base=(1, 1, 1), roughness=0.2, transmission=1.0, clearcoat=1.0,
                                            sheen=(0.5, 0.5, 0.5), sheen_roughness=0.3),
    "anisotropic white metal": dict(base=(1, 1, 1), metallic=1.0, roughness=0.3, anisotropy=0.8),
    "white under a tilted clearcoat": dict(LAMBERT_WHITE, roughness=0.3, clearcoat=1.0, cc_roughness=0.1,
                                           coat_normal=tilted(30, 20)),
    "sheen under a tilted rough clearcoat": dict(LAMBERT_WHITE, roughness=0.7, sheen=(1, 1, 1), sheen_roughness=0.6,
                                                 clearcoat=1.0, cc_roughness=0.5, coat_normal=tilted(50, 180)),
}


@pytest.mark.parametrize("name", sorted(CASES))
@pytest.mark.parametrize("cos_o", [0.05, 0.4, 1.0])
def test_directional_albedo_never_exceeds_one(name, cos_o):
    # Energy conservation (KHR_materials_clearcoat / _sheen albedo scaling; R + T <= 1 of a
    # dielectric interface): the white furnace of each layer stack, reflected + transmitted <= 1.
    refl, tran, se = albedo(layered(**CASES[name]), cos_o, n=100_000)
    total = refl + tran
    assert np.all(total <= 1.0 + 4 * se + 1e-3), (name, total, se)


@pytest.mark.parametrize("layer", [dict(clearcoat=1.0, cc_roughness=0.1), dict(clearcoat=0.5, cc_roughness=0.7),
                                   dict(sheen=(1, 1, 1), sheen_roughness=0.3),
                                   dict(sheen=(1, 1, 1), sheen_roughness=0.8, clearcoat=1.0)])
@pytest.mark.parametrize("cos_o", [0.05, 0.3, 1.0])
def test_layers_add_no_energy_to_any_base(layer, cos_o):
    # albedo scaling (KHR_materials_clearcoat, KHR_materials_sheen): layer + (1 - w E) base
    # <= max(1, albedo of the base alone), also over glTF's (non-conserving) white dielectric
    base = dict(base=(1, 1, 1), roughness=0.3)
    r0, _, se0 = albedo(layered(**base), cos_o, n=100_000)
    r1, _, se1 = albedo(layered(**base, **layer), cos_o, n=100_000)
    assert r1[0] <= max(1.0, r0[0]) + 4 * (se0[0] + se1[0]) + 1e-3, (r0, r1)


@pytest.mark.parametrize("cos_o", [0.2, 0.6, 1.0])
def test_smooth_clear_glass_albedo_is_one(cos_o):
    # no absorption, an interface only redistributes light: R + T = F + (1 - F) = 1 (REFERENCES §6a)
    refl, tran, se = albedo(layered(base=(1, 1, 1), roughness=0.0, transmission=1.0), cos_o)
    assert refl[0] + tran[0] == pytest.approx(1.0, abs=1e-3 + 4 * se[0])


def test_clearcoat_adds_its_fresnel_and_scales_the_base():
    # KHR_materials_clearcoat README: coated = mix(base, coat_brdf, cc Fc(n.v)), Fc Schlick with
    # f0 = 0.04.  A black base: the albedo is cc Fc(mu) E_ggx(mu); a smooth coat has E_ggx = 1
    # (REFERENCES §7, roughness 0.1 row: 1.000), so at normal view it is 0.04 cc.
    p = layered(base=(0, 0, 0), roughness=0.5, specular=0.0, clearcoat=0.7, cc_roughness=0.05)
    refl, _, se = albedo(p, 1.0)
    assert refl[0] == pytest.approx(0.7 * 0.04, abs=4 * se[0] + 1e-4)
    # and a white Lambertian base under it keeps 1 - cc Fc: total = 1 at normal view
    p = layered(base=(1, 1, 1), roughness=0.5, specular=0.0, clearcoat=0.7, cc_roughness=0.05)
    refl, _, se = albedo(p, 1.0)
    assert refl[0] == pytest.approx(1.0, abs=4 * se[0] + 1e-3)


def test_rougher_clearcoat_gives_a_wider_highlight():
    # KHR_materials_clearcoat: the coat is GGX of alpha = clearcoatRoughness^2; the fraction of
    # the coat's reflection within 10 deg of the mirror direction falls as the roughness grows.
    wo = view(math.cos(math.radians(30)))
    mirror = np.array([-wo[0], 0.0, wo[2]])
    frac = []
    for r in (0.1, 0.3, 0.6):
        p = layered(base=(0, 0, 0), specular=0.0, clearcoat=1.0, cc_roughness=r)
        s = sample_f(p, np.tile(wo, (50_000, 1)), np.random.default_rng(2).random((50_000, 3)))
        ok = s[:, 6] > 0
        w = s[ok, 3] * s[ok, 2] / s[ok, 6]
        near = s[ok, :3] @ mirror > math.cos(math.radians(10))
        frac.append(w[near].sum() / w.sum())
    assert frac[0] > frac[1] > frac[2], frac


def test_specular_colour_tints_f0():
    # KHR_materials_specular: f0 = min(((ior-1)/(ior+1))^2 specularColor, 1) specular
    p = layered(base=(0, 0, 0), roughness=0.3, specular=0.8, spec_colour=(1.0, 0.5, 0.25), ior=1.5)
    np.testing.assert_allclose(p[8:11], [0.04 * 0.8, 0.02 * 0.8, 0.01 * 0.8], rtol=1e-12)
    assert p[7] == 0.8


def test_anisotropy_stretches_the_lobe_along_the_tangent():
    # KHR_materials_anisotropy: alpha_t = mix(alpha, 1, strength^2), alpha_b = alpha; the
    # lobe is wider along the tangent (x) than along the bitangent (y).
    p = layered(base=(1, 1, 1), metallic=1.0, roughness=0.3, anisotropy=0.7)
    assert p[20] == pytest.approx(0.09 + 0.91 * 0.49) and p[21] == pytest.approx(0.09)
    wo = np.array([0.0, 0.0, 1.0])
    t = math.radians(25)
    along_x = eval_f(p, wo[None], np.array([[math.sin(t), 0, math.cos(t)]]))[0, 0]
    along_y = eval_f(p, wo[None], np.array([[0, math.sin(t), math.cos(t)]]))[0, 0]
    assert along_x > 3 * along_y


def test_anisotropic_d_is_normalised():
    # integral of D(h) (n.h) over the hemisphere = 1 (Walter et al. 2007; Heitz 2014 eq. 4)
    nt, nphi = 800, 400
    t = (np.arange(nt) + 0.5) / nt * (np.pi / 2)
    ph = (np.arange(nphi) + 0.5) / nphi * 2 * np.pi
    T, P = np.meshgrid(t, ph, indexing="ij")
    h = np.stack([np.sin(T) * np.cos(P), np.sin(T) * np.sin(P), np.cos(T)], -1).reshape(-1, 3)
    ax, ay = 0.5, 0.2
    x, y, z = h[:, 0] / ax, h[:, 1] / ay, h[:, 2]
    d = 1 / (np.pi * ax * ay * (x * x + y * y + z * z) ** 2)
    tot = float((d * h[:, 2] * np.sin(T).ravel()).sum() * (np.pi / 2 / nt) * (2 * np.pi / nphi))
    assert tot == pytest.approx(1.0, abs=2e-3)
    got = np.array([bk.ggx_d_aniso(ax, ay, *v) for v in h[::997]])
    np.testing.assert_allclose(got, d[::997], rtol=1e-12)


# --------------------------------------------------------------------------------- sheen table


def charlie_albedo(mu, rough, n=400):
    """E(mu) of Charlie D (Estevez & Kulla 2017) x Neubelt-Pettineo V, by Gauss-Legendre quadrature."""
    r = max(rough * rough, bk.SHEEN_R_MIN)
    xt, wt = np.polynomial.legendre.leggauss(n)
    th = (xt + 1) * np.pi / 4
    ph = (xt + 1) * np.pi / 2
    T, P = np.meshgrid(th, ph, indexing="ij")
    W = np.outer(wt, wt) * (np.pi / 4) * (np.pi / 2) * 2
    wo = view(mu)
    wi = np.stack([np.sin(T) * np.cos(P), np.sin(T) * np.sin(P), np.cos(T)], -1)
    h = wi + wo
    h /= np.linalg.norm(h, axis=-1, keepdims=True)
    d = (2 + 1 / r) * np.clip(1 - h[..., 2] ** 2, 0, 1) ** (0.5 / r) / (2 * np.pi)
    v = 1 / (4 * (wi[..., 2] + mu - wi[..., 2] * mu))
    return float((d * v * wi[..., 2] * np.sin(T) * W).sum())


@pytest.mark.parametrize("i, j", [(16, 8), (8, 8), (4, 16), (12, 4), (2, 12)])
def test_sheen_albedo_table_recomputed(i, j):
    # the table is the directional albedo of the sheen lobe the README names (Charlie D with the
    # Ashikhmin / Neubelt visibility), recomputed here by an independent quadrature
    assert bk.sheen_albedo(i / 16, j / 16) == pytest.approx(charlie_albedo(i / 16, j / 16), rel=0.01, abs=2e-3)


def test_sheen_layer_reflects_its_colour_times_albedo():
    # KHR_materials_sheen: a black base under white sheen reflects min(E, 1) (E normalised here)
    p = layered(base=(0, 0, 0), roughness=0.9, specular=0.0, sheen=(1, 1, 1), sheen_roughness=0.5)
    refl, _, se = albedo(p, 0.5)
    assert refl[0] == pytest.approx(min(bk.sheen_albedo(0.5, 0.5), 1.0), abs=4 * se[0] + 2e-3)


# ----------------------------------------------------------------- sampling densities (exact)


DENSITY_CASES = [
    ("rough glass", dict(base=(1, 1, 1), roughness=0.5, transmission=1.0), 0.7),
    ("rough glass, inside", dict(base=(0.9, 0.9, 0.9), roughness=0.6, transmission=1.0, eta=1 / 1.5), 0.8),
    ("thin film", dict(base=(1, 1, 1), roughness=0.5, transmission=0.8, thin=True), 0.5),
    ("coat + sheen", dict(base=(0.5, 0.5, 0.5), roughness=0.6, clearcoat=1.0, cc_roughness=0.3,
                          sheen=(0.8, 0.8, 0.8), sheen_roughness=0.5), 0.6),
    ("anisotropic metal", dict(base=(1, 0.8, 0.5), metallic=1.0, roughness=0.5, anisotropy=0.6), 0.5),
    # KHR_materials_clearcoat clearcoatNormalTexture: the coat about its own normal
    ("coat on a tilted normal", dict(base=(0.5, 0.5, 0.5), roughness=0.6, clearcoat=1.0, cc_roughness=0.3,
                                     sheen=(0.5, 0.5, 0.5), sheen_roughness=0.5, coat_normal=tilted(35, 60)), 0.6),
    # (narrow lobes need finer bins than this test's quadrature: coat roughness >= 0.3 here)
    ("coat tilted towards the view", dict(base=(0.2, 0.2, 0.2), metallic=1.0, roughness=0.4, clearcoat=1.0,
                                          cc_roughness=0.3, coat_normal=tilted(40, 0)), 0.3),
]


def sphere_grid(nc=40, nphi=80, k=6):
    c = (np.arange(2 * nc * k) + 0.5) / (nc * k) - 1.0
    ph = (np.arange(nphi * k) + 0.5) / (nphi * k) * 2 * np.pi
    C, P = np.meshgrid(c, ph, indexing="ij")
    st = np.sqrt(1 - C * C)
    dirs = np.stack([st * np.cos(P), st * np.sin(P), C], -1).reshape(-1, 3)
    cell = (1.0 / (nc * k)) * (2 * np.pi / (nphi * k))
    return dirs, cell


@pytest.mark.parametrize("name, kw, cos_o", DENSITY_CASES)
def test_pdf_integrates_to_the_fraction_of_valid_samples(name, kw, cos_o):
    # pbrt-v4 bsdfs_test.cpp style: the integral of pdf_f over the sphere = P(sample valid)
    p = layered(**kw)
    wo = view(cos_o)
    dirs, cell = sphere_grid(100, 200, 1)
    integral = float(pdf_f(p, np.tile(wo, (dirs.shape[0], 1)), dirs).sum() * cell)
    n = 200_000
    s = sample_f(p, np.tile(wo, (n, 1)), np.random.default_rng(5).random((n, 3)))
    assert integral == pytest.approx(float((s[:, 6] > 0).mean()), abs=5e-3)


@pytest.mark.parametrize("name, kw, cos_o", DENSITY_CASES)
def test_sample_f_chi_square_against_pdf_f(name, kw, cos_o):
    # chi-square goodness of fit over (cos theta, phi) bins of the whole sphere (pbrt-v4
    # bsdfs_test.cpp); bins with expected count < 5 pooled.  Also: f and pdf returned by
    # sample_f equal eval_f and pdf_f at the sampled direction.
    p = layered(**kw)
    wo = view(cos_o)
    n = 300_000
    s = sample_f(p, np.tile(wo, (n, 1)), np.random.default_rng(6).random((n, 3)))
    ok = s[:, 6] > 0
    wi = s[ok, :3]
    np.testing.assert_allclose(pdf_f(p, np.tile(wo, (2000, 1)), wi[:2000]), s[ok, 6][:2000], rtol=1e-9)
    np.testing.assert_allclose(eval_f(p, np.tile(wo, (2000, 1)), wi[:2000]), s[ok, 3:6][:2000], rtol=1e-9)
    nc, nphi, k = 20, 40, 6
    ci = np.clip(((wi[:, 2] + 1) * nc).astype(int), 0, 2 * nc - 1)
    pi_ = np.clip(((np.arctan2(wi[:, 1], wi[:, 0]) % (2 * np.pi)) / (2 * np.pi) * nphi).astype(int), 0, nphi - 1)
    observed = np.bincount(ci * nphi + pi_, minlength=2 * nc * nphi).astype(float)
    dirs, cell = sphere_grid(nc, nphi, k)
    dens = pdf_f(p, np.tile(wo, (dirs.shape[0], 1)), dirs).reshape(2 * nc * k, nphi * k)
    expected = (dens * cell).reshape(2 * nc, k, nphi, k).sum(axis=(1, 3)).reshape(-1) * n
    order = np.argsort(expected)
    obs, exp = [], []
    acc_o = acc_e = 0.0
    for i in order:
        acc_o += observed[i]
        acc_e += expected[i]
        if acc_e >= 5:
            obs.append(acc_o)
            exp.append(acc_e)
            acc_o = acc_e = 0.0
    obs[-1] += acc_o
    exp[-1] += acc_e
    obs, exp = np.array(obs), np.array(exp)
    exp *= obs.sum() / exp.sum()
    chi2 = float(((obs - exp) ** 2 / exp).sum())
    assert stats.chi2.sf(chi2, len(obs) - 1) > 1e-3, (name, chi2, len(obs))


# ------------------------------------------------------------------------------ material table


def test_extension_columns_and_supported_list():
    # KHR_materials_* parameter names and defaults from their READMEs (REFERENCES §5)
    m = Material(name="bottle", base_colour_factor=(1, 1, 1, 1), metallic_factor=0.0, roughness_factor=0.1,
                 extensions={"KHR_materials_transmission": {"transmissionFactor": 0.9},
                             "KHR_materials_volume": {"thicknessFactor": 0.01, "attenuationDistance": 0.2,
                                                      "attenuationColor": [0.5, 1.0, 0.25]},
                             "KHR_materials_clearcoat": {"clearcoatFactor": 0.6, "clearcoatRoughnessFactor": 0.2},
                             "KHR_materials_sheen": {"sheenColorFactor": [0.3, 0.2, 0.1], "sheenRoughnessFactor": 0.4},
                             "KHR_materials_specular": {"specularColorFactor": [1.0, 0.9, 0.8]},
                             "KHR_materials_anisotropy": {"anisotropyStrength": 0.5, "anisotropyRotation": 0.3}})
    plain = Material(name="plain")
    table, _ = pack_materials(make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]], materials=[m, plain]))
    row = table[0]
    assert row[48] == pytest.approx(0.9) and row[49] == pytest.approx(0.01)
    # sigma = -ln(c) / d (KHR_materials_volume)
    np.testing.assert_allclose(row[50:53], -np.log([0.5, 1.0, 0.25]) / 0.2, rtol=1e-6)
    np.testing.assert_allclose(row[53:59], [0.6, 0.2, 0.3, 0.2, 0.1, 0.4], rtol=1e-6)
    np.testing.assert_allclose(row[59:64], [1.0, 0.9, 0.8, 0.5, 0.3], rtol=1e-6)
    # defaults: no transmission, thin, no absorption, no coat or sheen, white specular colour
    np.testing.assert_array_equal(table[1, 48:64], [0] * 11 + [1, 1, 1, 0, 0])
    entering, leaving = resolve_params(row, entering=True), resolve_params(row, entering=False)
    assert entering[12] == pytest.approx(1.5) and leaving[12] == pytest.approx(1 / 1.5)
    assert entering[13] == 0.0 and resolve_params(table[1])[13] == 1.0  # thickness 0 -> thin-walled
    for ext in ("KHR_materials_transmission", "KHR_materials_volume", "KHR_materials_clearcoat",
                "KHR_materials_sheen", "KHR_materials_anisotropy", "KHR_materials_specular"):
        assert ext in SUPPORTED_EXTENSIONS


@pytest.mark.parametrize("ext, bad, match", [
    ({"KHR_materials_transmission": {"transmissionFactor": 1.5}}, "transmissionFactor", r"\[0.0, 1.0\]"),
    ({"KHR_materials_volume": {"thicknessFactor": 1, "attenuationDistance": 0}}, "attenuationDistance", "> 0"),
    ({"KHR_materials_sheen": {"sheenColorFactor": [1, 2]}}, "sheenColorFactor", "3 numbers"),
])
def test_bad_extension_values_name_the_material(ext, bad, match):
    scene = make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]],
                       materials=[Material(name="vase", extensions=ext)], source="vase.gltf")
    with pytest.raises(RenderError, match=r"vase.gltf -> material 0 \('vase'\)") as e:
        pack_materials(scene)
    assert bad in str(e.value) and e.match(match)


@pytest.mark.parametrize("eta", [1.5, 1 / 1.33])
def test_rough_btdf_matches_walter_2007(eta):
    # B. Walter et al., "Microfacet Models for Refraction through Rough Surfaces", EGSR 2007,
    # eq. 16 (h_t = -(eta_i i + eta_o o)) and eq. 21 (f_t), with GGX D (eq. 33) and the
    # height-correlated Smith G2 (Heitz 2014 eq. 99) instead of the separable G; the kernel
    # writes f_t without the eta^2 radiance factor (module docstring): f = f_t,Walter x eta^2.
    rough, base = 0.5, np.array([0.9, 0.7, 0.5])
    alpha = rough**2
    p = layered(base=tuple(base), roughness=rough, transmission=1.0, eta=eta)
    rng = np.random.default_rng(11)
    n = 400
    z = rng.random(n) * 0.95 + 0.05
    ph = 2 * np.pi * rng.random(n)
    wo = np.stack([np.sqrt(1 - z * z) * np.cos(ph), np.sqrt(1 - z * z) * np.sin(ph), z], 1)
    z = -(rng.random(n) * 0.95 + 0.05)
    ph = 2 * np.pi * rng.random(n)
    wi = np.stack([np.sqrt(1 - z * z) * np.cos(ph), np.sqrt(1 - z * z) * np.sin(ph), z], 1)
    h = -(eta * wi + wo)
    h /= np.linalg.norm(h, axis=1, keepdims=True)
    h *= np.sign(h[:, 2:3])
    oh, ih = np.sum(wo * h, 1), np.sum(wi * h, 1)
    valid = (oh > 0) & (ih < 0)
    d = alpha**2 / (np.pi * (h[:, 2] ** 2 * (alpha**2 - 1) + 1) ** 2)

    def lam(w):
        t2 = (1 - w[:, 2] ** 2) / w[:, 2] ** 2
        return 0.5 * (-1 + np.sqrt(1 + alpha**2 * t2))

    g2 = 1 / (1 + lam(wo) + lam(wi))
    f = np.array([bk.fresnel_dielectric(c, eta) for c in oh])
    walter = np.abs(ih) * np.abs(oh) / (np.abs(wi[:, 2]) * wo[:, 2]) * (1 - f) * g2 * d / (eta * ih + oh) ** 2
    want = np.where(valid, walter * eta**2, 0.0)[:, None] * base[None]
    np.testing.assert_allclose(eval_f(p, wo, wi), want, rtol=1e-9, atol=1e-12)
    assert valid.sum() > 50


@pytest.mark.parametrize("ior", [1.0, 1.0005])
def test_index_matched_glass_transmits_everything(ior):
    # KHR_materials_ior lists air, 1.0: an index-matched smooth interface reflects nothing
    # (R0 = ((n-1)/(n+1))^2 = 0, REFERENCES §6f) and transmits all the light straight on
    refl, tran, se = albedo(layered(base=(1, 1, 1), roughness=0.0, transmission=1.0, ior=ior), 0.6)
    assert refl[0] < 1e-3 and tran[0] == pytest.approx(1.0, abs=2e-3)


# ------------------------------------------------------------------- clearcoat on its own normal


def test_untilted_coat_normal_is_the_old_coat_exactly():
    # Nc = n: the coat term reduces to cc Fc(n.wo) D(n.h) V(n.wi, n.wo) (KHR_materials_clearcoat)
    p = layered(base=(0.4, 0.4, 0.4), roughness=0.5, clearcoat=0.8, cc_roughness=0.2)
    rng = np.random.default_rng(4)
    wo = rng.normal(size=(500, 3))
    wi = rng.normal(size=(500, 3))
    wo[:, 2] = np.abs(wo[:, 2])
    wi[:, 2] = np.abs(wi[:, 2])
    wo /= np.linalg.norm(wo, axis=1, keepdims=True)
    wi /= np.linalg.norm(wi, axis=1, keepdims=True)
    base = eval_f(layered(base=(0.4, 0.4, 0.4), roughness=0.5), wo, wi)
    h = (wo + wi) / np.linalg.norm(wo + wi, axis=1, keepdims=True)
    a = 0.04
    fc = 0.8 * (0.04 + 0.96 * (1 - wo[:, 2]) ** 5)
    d = a * a / (np.pi * (h[:, 2] ** 2 * (a * a - 1) + 1) ** 2)
    v = 0.5 / (wi[:, 2] * np.sqrt(wo[:, 2] ** 2 * (1 - a * a) + a * a) + wo[:, 2] * np.sqrt(wi[:, 2] ** 2 * (1 - a * a) + a * a))
    want = base * (1 - fc)[:, None] + (fc * d * v)[:, None]
    np.testing.assert_allclose(eval_f(p, wo, wi), want, rtol=1e-9)


@pytest.mark.parametrize("tilt", [15.0, 30.0])
def test_tilted_coat_normal_moves_the_coat_highlight_not_the_base_one(tilt):
    # KHR_materials_clearcoat: clearcoat_brdf = specular_brdf(normal = clearcoatNormal, ...), and
    # the clearcoat normal "affects the top layer, but not the base".  A smooth GGX lobe peaks
    # at the mirror direction about its normal (closed form r = 2 (wo.N) N - wo), so the coat's
    # peak moves to the mirror about Nc while the base's specular peak stays at the mirror about n.
    nc = np.array(tilted(tilt, 0.0))
    wo = view(math.cos(math.radians(40.0)))
    r_coat = 2 * (wo @ nc) * nc - wo
    r_base = np.array([-wo[0], -wo[1], wo[2]])
    ang = np.radians(np.linspace(-89.95, 89.95, 36_000))  # in the plane of incidence (x, z)
    wi = np.stack([np.sin(ang), np.zeros_like(ang), np.cos(ang)], 1)
    wos = np.tile(wo, (len(ang), 1))

    def peak(p, near):
        f = eval_f(p, wos, wi)[:, 0] * wi[:, 2]
        win = np.abs(ang - math.atan2(near[0], near[2])) < math.radians(6)
        return math.degrees(ang[win][np.argmax(f[win])])

    coat_only = layered(base=(0, 0, 0), specular=0.0, clearcoat=1.0, cc_roughness=0.08, coat_normal=tuple(nc))
    base_and_coat = layered(base=(0, 0, 0), roughness=0.15, clearcoat=1.0, cc_roughness=0.08, coat_normal=tuple(nc))
    want_c = math.degrees(math.atan2(r_coat[0], r_coat[2]))
    want_b = math.degrees(math.atan2(r_base[0], r_base[2]))
    assert peak(coat_only, r_coat) == pytest.approx(want_c, abs=0.05)
    # a tilted and an untilted coat put the base's peak at the same place (the mirror about n)
    assert peak(base_and_coat, r_base) == pytest.approx(want_b, abs=0.3)
    flat = layered(base=(0, 0, 0), roughness=0.15, clearcoat=1.0, cc_roughness=0.08)
    assert peak(flat, r_base) == pytest.approx(want_b, abs=0.3)
    assert peak(base_and_coat, r_coat) == pytest.approx(want_c, abs=0.05)


def test_tilted_coat_weight_uses_its_own_fresnel():
    # fresnel_coat(normal = clearcoatNormal): the base under the coat is weighted by
    # 1 - cc Fc(Nc.wo); for wi far from both mirror directions the coat's own lobe is ~0
    nc = np.array(tilted(25.0, 90.0))
    wo = view(0.5)
    wi = np.array([[0.0, -0.3, math.sqrt(1 - 0.09)]])
    lam = layered(base=(1, 1, 1), specular=0.0, roughness=0.5)
    coated = layered(base=(1, 1, 1), specular=0.0, roughness=0.5, clearcoat=0.7, cc_roughness=0.05,
                     coat_normal=tuple(nc))
    fc = 0.7 * (0.04 + 0.96 * (1 - wo @ nc) ** 5)
    np.testing.assert_allclose(eval_f(coated, wo[None], wi), eval_f(lam, wo[None], wi) * (1 - fc), rtol=1e-6)
