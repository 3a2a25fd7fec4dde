"""The metallic-roughness BSDF against glTF 2.0 Appendix B, microfacet identities and its own PDF."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from variantshot.geometry.scene import Material
from variantshot.transport import bsdf_kernels as bk
from variantshot.transport.materials import pack_materials, resolve_params
from variantshot.geometry.scene import make_scene


def params(base=(0.8, 0.5, 0.2), metallic=0.0, roughness=0.5, ior=1.5, specular=1.0):
    return np.array(bk.make_bsdf(0.0, *base, metallic, roughness, ior, specular), np.float64)


def random_dirs(rng, n):
    """Uniform directions on the upper hemisphere."""
    z = rng.random(n)
    phi = 2 * np.pi * rng.random(n)
    r = np.sqrt(1 - z * z)
    return np.stack([r * np.cos(phi), r * np.sin(phi), z], 1)


def spec_brdf_gltf(base, metallic, roughness, wo, wi, f0_dielectric=0.04):
    """glTF 2.0 Appendix B, transcribed directly from the specification's sample implementation
    (material = mix(dielectric_brdf, metal_brdf, metallic); fresnel_mix / conductor_fresnel)."""
    alpha = roughness**2
    base = np.asarray(base, float)
    h = wo + wi
    h /= np.linalg.norm(h, axis=1, keepdims=True)
    n_dot_l = wi[:, 2]
    n_dot_v = wo[:, 2]
    n_dot_h = h[:, 2]
    v_dot_h = np.abs(np.sum(wo * h, axis=1))
    a2 = alpha**2
    d = a2 / (np.pi * (n_dot_h**2 * (a2 - 1) + 1) ** 2)
    vis = 1.0 / (2.0 * (n_dot_v * np.sqrt(a2 + (1 - a2) * n_dot_l**2) + n_dot_l * np.sqrt(a2 + (1 - a2) * n_dot_v**2)))
    specular_brdf = (vis * d)[:, None]
    diffuse_brdf = base[None, :] / np.pi
    s = ((1 - v_dot_h) ** 5)[:, None]
    metal_brdf = specular_brdf * (base[None, :] + (1 - base[None, :]) * s)
    fresnel = f0_dielectric + (1 - f0_dielectric) * s
    dielectric_brdf = diffuse_brdf * (1 - fresnel) + specular_brdf * fresnel
    return (1 - metallic) * dielectric_brdf + metallic * metal_brdf


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


@pytest.mark.parametrize("base, metallic, roughness", [((0.8, 0.5, 0.2), 0.0, 0.5), ((0.9, 0.6, 0.3), 1.0, 0.3),
                                                       ((0.2, 0.7, 0.9), 0.4, 0.8), ((1, 1, 1), 0.0, 1.0)])
def test_eval_matches_gltf_appendix_b(base, metallic, roughness):
    # glTF 2.0 Appendix B "BRDF Implementation" (REFERENCES §5): D, V, Schlick, fresnel_mix.
    rng = np.random.default_rng(1)
    wo, wi = random_dirs(rng, 2000), random_dirs(rng, 2000)
    got = eval_f(params(base, metallic, roughness), wo, wi)
    want = spec_brdf_gltf(base, metallic, roughness, wo, wi)
    np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12)


def test_eval_is_zero_below_the_surface_and_reciprocal():
    rng = np.random.default_rng(2)
    wo, wi = random_dirs(rng, 500), random_dirs(rng, 500)
    p = params(metallic=0.3, roughness=0.4)
    below = wi * np.array([1, 1, -1])
    assert np.all(eval_f(p, wo, below) == 0)
    # Helmholtz reciprocity (PBR 4ed §4.3.1): f(wo, wi) = f(wi, wo)
    np.testing.assert_allclose(eval_f(p, wo, wi), eval_f(p, wi, wo), rtol=1e-12)


@pytest.mark.parametrize("alpha", [0.05, 0.3, 0.7, 1.0])
def test_ggx_d_is_normalised(alpha):
    # Walter et al. 2007 (REFERENCES §7): the projected microfacet area integrates to 1,
    # int D(h) (n.h) dw_h = 1.
    val, _ = integrate.quad(lambda t: bk.ggx_d(alpha, math.cos(t)) * math.cos(t) * math.sin(t) * 2 * math.pi,
                            0, math.pi / 2, limit=400, points=[min(alpha, 1.0) * 0.5])
    assert val == pytest.approx(1.0, abs=1e-7)


@pytest.mark.parametrize("alpha, cos_o", [(0.2, 0.9), (0.6, 0.4), (1.0, 0.15)])
def test_weak_white_furnace_g1(alpha, cos_o):
    # Heitz 2014 (JCGT 3(2)), REFERENCES §7: int G1(o) max(0, o.h) D(h) dw_h = cos(theta_o).
    so = math.sqrt(1 - cos_o**2)

    def integrand(phi, t):
        h = (math.sin(t) * math.cos(phi), math.sin(t) * math.sin(phi), math.cos(t))
        oh = max(0.0, so * h[0] + cos_o * h[2])
        return bk.smith_g1(alpha, cos_o) * oh * bk.ggx_d(alpha, h[2]) * math.sin(t)

    val, _ = integrate.dblquad(integrand, 0, math.pi / 2, 0, 2 * math.pi, epsabs=1e-8)
    assert val == pytest.approx(cos_o, rel=2e-4)


def _albedo(p, cos_o, n=400_000, seed=3):
    """E(mu) = int f cos dwi by the BSDF's own importance sampling (f cos / pdf)."""
    rng = np.random.default_rng(seed)
    wo = np.tile([[math.sqrt(1 - cos_o**2), 0.0, cos_o]], (n, 1))
    s = sample_f(p, wo, rng.random((n, 3)))
    ok = s[:, 6] > 0
    w = np.zeros(n)
    w[ok] = s[ok, 3] * s[ok, 2] / s[ok, 6]
    return w.mean(), w.std() / math.sqrt(n)


@pytest.mark.parametrize("roughness, cos_o, expected", [(1.0, 1.0, 1 - math.log(2)), (1.0, 0.5, 0.451),
                                                        (1.0, 0.2, 0.642), (0.5, 1.0, 0.916), (0.5, 0.5, 0.856),
                                                        (0.75, 0.2, 0.772), (0.25, 0.5, 0.988)])
def test_specular_lobe_albedo_matches_reference_table(roughness, cos_o, expected):
    # REFERENCES §7: directional albedo of the glTF specular lobe with F = 1 (white metal: f0 =
    # base colour = 1 gives F = 1 exactly); 1 - ln 2 at alpha = 1 is the closed form, the other
    # values are the table's (3 digits: tolerance 0.0005 + 4 standard errors).
    mean, sem = _albedo(params((1, 1, 1), 1.0, roughness), cos_o)
    assert abs(mean - expected) < 0.0005 + 4 * sem, (mean, sem)


def test_dielectric_normal_incidence_fresnel():
    # REFERENCES §6(f): R0 = ((n - 1)/(n + 1))^2 = 0.04 for n = 1.5 (glTF f0 = 0.04).  A black
    # smooth-ish dielectric at normal view reflects F(0) times the lobe albedo (1.000 at
    # roughness 0.1, REFERENCES §7), and with ior 1.33 (KHR_materials_ior) 0.02006.
    mean, sem = _albedo(params((0, 0, 0), 0.0, 0.1), 1.0)
    assert mean == pytest.approx(0.04, abs=2e-4)
    mean, sem = _albedo(params((0, 0, 0), 0.0, 0.1, ior=1.33), 1.0)
    assert mean == pytest.approx(0.02006, abs=2e-4)


def test_specular_factor_zero_is_pure_lambert():
    # KHR_materials_specular: specularFactor 0 sets f0 = f90 = 0, leaving base/pi (Lambert).
    rng = np.random.default_rng(4)
    wo, wi = random_dirs(rng, 100), random_dirs(rng, 100)
    got = eval_f(params((0.3, 0.6, 0.9), 0.0, 0.4, specular=0.0), wo, wi)
    np.testing.assert_allclose(got, np.tile(np.array([0.3, 0.6, 0.9]) / np.pi, (100, 1)), rtol=1e-12)


@pytest.mark.parametrize("base, metallic, roughness, cos_o", [((0.7, 0.7, 0.7), 0.0, 0.6, 0.7),
                                                              ((1, 0.8, 0.4), 1.0, 0.4, 0.5),
                                                              ((0.5, 0.5, 0.5), 0.5, 0.3, 0.9),
                                                              ((0.9, 0.9, 0.9), 0.0, 0.2, 0.3)])
def test_pdf_integrates_to_the_fraction_of_valid_samples(base, metallic, roughness, cos_o):
    # pdf_f must be the exact density of sample_f: its integral over the hemisphere equals the
    # probability that a sample is valid (VNDF reflections that leave below the horizon are
    # dropped) -- pbrt-v4 bsdfs_test.cpp style consistency check.
    p = params(base, metallic, roughness)
    wo = np.array([math.sqrt(1 - cos_o**2), 0.0, cos_o])
    nt, nphi = 400, 400
    t = (np.arange(nt) + 0.5) / nt * (np.pi / 2)
    ph = (np.arange(nphi) + 0.5) / nphi * 2 * np.pi
    T, P = np.meshgrid(t, ph, indexing="ij")
    wi = np.stack([np.sin(T) * np.cos(P), np.sin(T) * np.sin(P), np.cos(T)], -1).reshape(-1, 3)
    dens = pdf_f(p, np.tile(wo, (wi.shape[0], 1)), wi)
    integral = float((dens * np.sin(T).reshape(-1)).sum() * (np.pi / 2 / nt) * (2 * np.pi / nphi))
    rng = np.random.default_rng(5)
    n = 400_000
    s = sample_f(p, np.tile(wo, (n, 1)), rng.random((n, 3)))
    valid = float((s[:, 6] > 0).mean())
    assert integral == pytest.approx(valid, abs=3e-3)


@pytest.mark.slow
@pytest.mark.parametrize("base, metallic, roughness, cos_o", [((0.7, 0.7, 0.7), 0.0, 0.6, 0.7),
                                                              ((1, 0.8, 0.4), 1.0, 0.35, 0.5),
                                                              ((0.4, 0.4, 0.4), 0.3, 0.5, 0.25)])
def test_sample_f_chi_square_against_pdf_f(base, metallic, roughness, cos_o):
    # Chi-square goodness of fit of sample_f's directions against pdf_f integrated over
    # (cos theta, phi) bins (pbrt-v4 bsdfs_test.cpp); bins with expected count < 5 are pooled.
    p = params(base, metallic, roughness)
    wo = np.array([math.sqrt(1 - cos_o**2), 0.0, cos_o])
    n = 1_000_000
    rng = np.random.default_rng(6)
    s = sample_f(p, np.tile(wo, (n, 1)), rng.random((n, 3)))
    ok = s[:, 6] > 0
    wi = s[ok, :3]
    nc, nphi = 20, 40
    ci = np.clip((wi[:, 2] * nc).astype(int), 0, nc - 1)
    pi_ = np.clip(((np.arctan2(wi[:, 1], wi[:, 0]) % (2 * np.pi)) / (2 * np.pi) * nphi).astype(int), 0, nphi - 1)
    observed = np.bincount(ci * nphi + pi_, minlength=nc * nphi).astype(float)
    # expected: integrate pdf over each bin in (cos theta, phi) with 8 x 8 midpoints per bin
    k = 8
    c = (np.arange(nc * k) + 0.5) / (nc * k)
    ph = (np.arange(nphi * k) + 0.5) / (nphi * k) * 2 * np.pi
    C, P = np.meshgrid(c, ph, indexing="ij")
    st = np.sqrt(1 - C * C)
    dirs = np.stack([st * np.cos(P), st * np.sin(P), C], -1).reshape(-1, 3)
    dens = pdf_f(p, np.tile(wo, (dirs.shape[0], 1)), dirs).reshape(nc * k, nphi * k)
    cell = (1.0 / (nc * k)) * (2 * np.pi / (nphi * k))
    expected = (dens * cell).reshape(nc, k, nphi, k).sum(axis=(1, 3)).reshape(-1) * n
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
    exp *= obs.sum() / exp.sum()  # compare shapes; the total is checked by the integral test
    chi2 = float(((obs - exp) ** 2 / exp).sum())
    pval = stats.chi2.sf(chi2, len(obs) - 1)
    assert pval > 1e-3, (chi2, len(obs), pval)


def test_material_table_columns():
    # the packed table carries the glTF values in the documented columns (bsdf_kernels docstring)
    m = Material(name="x", base_colour_factor=(0.1, 0.2, 0.3, 0.4), metallic_factor=0.25, roughness_factor=0.75,
                 emissive_factor=(1.0, 0.5, 0.25), emissive_strength=4.0, alpha_mode="MASK", alpha_cutoff=0.3,
                 double_sided=True, extensions={"KHR_materials_ior": {"ior": 1.4},
                                                "KHR_materials_specular": {"specularFactor": 0.5}})
    scene = make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]], materials=[m])
    table, atlas = pack_materials(scene)
    row = table[0]
    assert table.shape == (1, 152) and table.dtype == np.float32
    np.testing.assert_allclose(row[1:5], [0.1, 0.2, 0.3, 0.4], rtol=1e-6)
    assert row[5] == 0.25 and row[6] == 0.75
    np.testing.assert_allclose(row[7:10], [4.0, 2.0, 1.0])
    assert row[10] == 1 and row[11] == pytest.approx(0.3) and row[12] == 1
    assert row[13] == pytest.approx(1.4) and row[15] == 0.5
    assert row[16] == -1 and row[24] == -1 and row[32] == -1
    # no extension textures: every extension slot empty, clearcoat normal scale 1, no-texture flag
    np.testing.assert_array_equal(row[64:144:8], -1)
    assert row[144] == 1.0 and row[145] == 0.0
    rp = resolve_params(row)
    assert rp[6] == pytest.approx(((1.4 - 1) / 2.4) ** 2 * 0.5) and rp[7] == 0.5


def test_bad_material_values_name_the_material():
    from variantshot.errors import RenderError

    scene = make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]],
                       materials=[Material(name="paint", alpha_mode="CUTOUT")], source="chair.gltf")
    with pytest.raises(RenderError, match=r"chair.gltf -> material 0 \('paint'\): alphaMode 'CUTOUT'"):
        pack_materials(scene)
