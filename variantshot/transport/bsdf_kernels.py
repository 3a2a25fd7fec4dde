"""BSDFs: the glTF 2.0 metallic-roughness BRDF (Appendix B) with exact sampling densities.

Single entry points, dispatched on the material kind: :func:`eval_f`, :func:`sample_f`,
:func:`pdf_f`.  Directions are unit vectors in the local shading frame (normal = +z), both
pointing away from the surface (``wo`` to the viewer, ``wi`` to the light).  A resolved BSDF at
a surface point is an 8-tuple of floats::

    (kind, base_r, base_g, base_b, metallic, alpha, f0_dielectric, f90_dielectric)

Model (glTF 2.0 Appendix B, "BRDF Implementation"):

* alpha = roughness**2, clamped below at ``ALPHA_MIN`` (the spec warns alpha = 0 is singular;
  the clamp keeps every lobe a finite density so MIS needs no delta special case);
* D = GGX / Trowbridge-Reitz, V = height-correlated Smith visibility;
* Schlick Fresnel; dielectric: fresnel_mix(f0 = 0.04 (or from KHR_materials_ior), base/pi, D V)
  with F = f0 + (f90 - f0)(1 - |V.H|)^5, f90 = 1; KHR_materials_specular's specularFactor s
  scales both (f0 -> s f0, f90 = s), so s = 0 leaves a pure Lambertian diffuse;
  metal: D V (base + (1 - base)(1 - |V.H|)^5); material = mix(dielectric, metal, metallic).

Sampling: the specular lobe by visible normals (E. Heitz, "Sampling the GGX Distribution of
Visible Normals", JCGT 7(4), 2018), pdf = G1(wo) D(h) / (4 wo.z); the diffuse lobe
cosine-weighted; the lobe is chosen with probability proportional to its estimated weight
at wo.  ``pdf_f`` returns the exact mixture density of ``sample_f``.

Material table ``mat_table``: ``(M, 64) float32``, one row per material:

=======  ================================================================================
cols     meaning
=======  ================================================================================
0        kind: 0 = metallic-roughness (later kinds add clearcoat, transmission, sheen ...)
1-4      baseColorFactor RGBA (linear)
5        metallicFactor
6        roughnessFactor
7-9      emissiveFactor x KHR_materials_emissive_strength (linear RGB radiance)
10       alphaMode: 0 OPAQUE, 1 MASK, 2 BLEND
11       alphaCutoff
12       doubleSided (1.0 / 0.0)
13       index of refraction (KHR_materials_ior, default 1.5)
14       normalTexture scale
15       KHR_materials_specular specularFactor (default 1; specularColorFactor not applied yet)
16-23    baseColorTexture slot (sRGB-decoded atlas entry)
24-31    metallicRoughnessTexture slot (B = metallic, G = roughness)
32-39    emissiveTexture slot (sRGB-decoded)
40-47    normalTexture slot (linear; tangent-space normal map, see path_kernels.normal_mapped)
48-63    spare, for extensions
=======  ================================================================================

A texture slot is 8 columns: atlas entry (-1: none), texCoord set, then the 2x3
KHR_texture_transform matrix (see ``texture_kernels.sample_slot``).
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math

from .sampling_kernels import cosine_hemisphere_pdf, sample_cosine_hemisphere


MATERIAL_METAL_ROUGH = 0
ALPHA_MIN = 0.002  # alpha = roughness**2 never below this (roughness ~0.045)


@njit(**KERNEL)
def ggx_d(alpha, cos_h):
    """GGX normal distribution D(h) for cos_h = n.h (0 for cos_h <= 0)."""
    if cos_h <= 0.0:
        return 0.0
    a2 = alpha * alpha
    t = cos_h * cos_h * (a2 - 1.0) + 1.0
    return a2 / (math.pi * t * t)


@njit(**KERNEL)
def smith_lambda(alpha, cos_v):
    """Smith Lambda for GGX: (-1 + sqrt(1 + alpha^2 tan^2 theta)) / 2."""
    c2 = cos_v * cos_v
    if c2 >= 1.0:
        return 0.0
    if c2 <= 0.0:
        return 1e30
    tan2 = (1.0 - c2) / c2
    return 0.5 * (-1.0 + math.sqrt(1.0 + alpha * alpha * tan2))


@njit(**KERNEL)
def smith_g1(alpha, cos_v):
    """Smith masking G1 = 1 / (1 + Lambda)."""
    return 1.0 / (1.0 + smith_lambda(alpha, cos_v))


@njit(**KERNEL)
def visibility_height_correlated(alpha, n_dot_l, n_dot_v):
    """V = G2 / (4 |n.l| |n.v|), height-correlated Smith, as glTF 2.0 Appendix B writes it."""
    a2 = alpha * alpha
    gv = n_dot_l * math.sqrt(n_dot_v * n_dot_v * (1.0 - a2) + a2)
    gl = n_dot_v * math.sqrt(n_dot_l * n_dot_l * (1.0 - a2) + a2)
    s = gv + gl
    if s <= 0.0:
        return 0.0
    return 0.5 / s


@njit(**KERNEL)
def luminance(r, g, b):
    """Rec.709 / sRGB luminance weights (IEC 61966-2-1, middle row of the XYZ matrix)."""
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


@njit(**KERNEL)
def specular_probability(bsdf, cos_o):
    """Probability of sampling the specular lobe: its estimated weight / total, at n.wo."""
    metallic = bsdf[4]
    f0 = bsdf[6]
    s = (1.0 - min(max(cos_o, 0.0), 1.0)) ** 5
    fd = f0 + (bsdf[7] - f0) * s
    base_lum = luminance(bsdf[1], bsdf[2], bsdf[3])
    spec_w = (1.0 - metallic) * fd + metallic * (base_lum + (1.0 - base_lum) * s)
    diff_w = (1.0 - metallic) * (1.0 - fd) * base_lum
    total = spec_w + diff_w
    if total <= 0.0:
        return 1.0
    return spec_w / total


@njit(**KERNEL)
def eval_f(bsdf, wox, woy, woz, wix, wiy, wiz):
    """BSDF value f(wo, wi) (RGB, 1/sr); zero unless both directions are above the surface."""
    if woz <= 0.0 or wiz <= 0.0:
        return 0.0, 0.0, 0.0
    hx = wox + wix
    hy = woy + wiy
    hz = woz + wiz
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0, 0.0, 0.0
    hx /= hl
    hy /= hl
    hz /= hl
    v_dot_h = abs(wox * hx + woy * hy + woz * hz)
    alpha = bsdf[5]
    metallic = bsdf[4]
    f0 = bsdf[6]
    spec = ggx_d(alpha, hz) * visibility_height_correlated(alpha, wiz, woz)
    s = (1.0 - min(v_dot_h, 1.0)) ** 5
    fd = f0 + (bsdf[7] - f0) * s
    dielectric_spec = (1.0 - metallic) * fd
    diffuse = (1.0 - metallic) * (1.0 - fd) / math.pi
    br = bsdf[1]
    bg = bsdf[2]
    bb = bsdf[3]
    fr = spec * (dielectric_spec + metallic * (br + (1.0 - br) * s)) + diffuse * br
    fg = spec * (dielectric_spec + metallic * (bg + (1.0 - bg) * s)) + diffuse * bg
    fb = spec * (dielectric_spec + metallic * (bb + (1.0 - bb) * s)) + diffuse * bb
    return fr, fg, fb


@njit(**KERNEL)
def vndf_pdf(alpha, wox, woy, woz, wix, wiy, wiz):
    """Density of reflecting wo about a visible normal: D_wo(h) / (4 wo.h) = G1(wo) D(h) / (4 wo.z)."""
    if woz <= 0.0 or wiz <= 0.0:
        return 0.0
    hx = wox + wix
    hy = woy + wiy
    hz = woz + wiz
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0
    hz /= hl
    return smith_g1(alpha, woz) * ggx_d(alpha, hz) / (4.0 * woz)


@njit(**KERNEL)
def pdf_f(bsdf, wox, woy, woz, wix, wiy, wiz):
    """Solid-angle density with which :func:`sample_f` returns wi given wo."""
    if woz <= 0.0 or wiz <= 0.0:
        return 0.0
    p_spec = specular_probability(bsdf, woz)
    pdf = 0.0
    if p_spec > 0.0:
        pdf += p_spec * vndf_pdf(bsdf[5], wox, woy, woz, wix, wiy, wiz)
    if p_spec < 1.0:
        pdf += (1.0 - p_spec) * cosine_hemisphere_pdf(wiz)
    return pdf


@njit(**KERNEL)
def sample_vndf(alpha, wox, woy, woz, u0, u1):
    """A GGX visible normal for view wo (Heitz 2018, JCGT 7(4), listing 1); returns (hx, hy, hz)."""
    vx = alpha * wox
    vy = alpha * woy
    vz = woz
    vl = math.sqrt(vx * vx + vy * vy + vz * vz)
    vx /= vl
    vy /= vl
    vz /= vl
    lensq = vx * vx + vy * vy
    if lensq > 0.0:
        inv = 1.0 / math.sqrt(lensq)
        t1x = -vy * inv
        t1y = vx * inv
        t1z = 0.0
    else:
        t1x = 1.0
        t1y = 0.0
        t1z = 0.0
    # T2 = V x T1
    t2x = vy * t1z - vz * t1y
    t2y = vz * t1x - vx * t1z
    t2z = vx * t1y - vy * t1x
    r = math.sqrt(u0)
    phi = 2.0 * math.pi * u1
    p1 = r * math.cos(phi)
    p2 = r * math.sin(phi)
    s = 0.5 * (1.0 + vz)
    p2 = (1.0 - s) * math.sqrt(max(0.0, 1.0 - p1 * p1)) + s * p2
    p3 = math.sqrt(max(0.0, 1.0 - p1 * p1 - p2 * p2))
    nx = p1 * t1x + p2 * t2x + p3 * vx
    ny = p1 * t1y + p2 * t2y + p3 * vy
    nz = p1 * t1z + p2 * t2z + p3 * vz
    hx = alpha * nx
    hy = alpha * ny
    hz = max(0.0, nz)
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0, 0.0, 1.0
    return hx / hl, hy / hl, hz / hl


@njit(**KERNEL)
def sample_f(bsdf, wox, woy, woz, u_lobe, u0, u1):
    """Sample wi given wo; returns (wix, wiy, wiz, fr, fg, fb, pdf); pdf = 0 means no sample."""
    if woz <= 0.0:
        return 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0
    p_spec = specular_probability(bsdf, woz)
    if u_lobe < p_spec:
        hx, hy, hz = sample_vndf(bsdf[5], wox, woy, woz, u0, u1)
        d = wox * hx + woy * hy + woz * hz
        wix = 2.0 * d * hx - wox
        wiy = 2.0 * d * hy - woy
        wiz = 2.0 * d * hz - woz
    else:
        wix, wiy, wiz = sample_cosine_hemisphere(u0, u1)
    if wiz <= 0.0:
        return wix, wiy, wiz, 0.0, 0.0, 0.0, 0.0
    pdf = pdf_f(bsdf, wox, woy, woz, wix, wiy, wiz)
    fr, fg, fb = eval_f(bsdf, wox, woy, woz, wix, wiy, wiz)
    return wix, wiy, wiz, fr, fg, fb, pdf


@njit(**KERNEL)
def make_bsdf(kind, base_r, base_g, base_b, metallic, roughness, ior, specular):
    """Resolved BSDF tuple from material values.

    alpha = roughness**2 (clamped at ALPHA_MIN); dielectric f0 = ((ior - 1)/(ior + 1))**2 x
    specular and f90 = specular (KHR_materials_ior, KHR_materials_specular).
    """
    alpha = max(roughness * roughness, ALPHA_MIN)
    m = min(max(metallic, 0.0), 1.0)
    spec = min(max(specular, 0.0), 1.0)
    f0 = min(((ior - 1.0) / (ior + 1.0)) ** 2, 1.0) * spec
    return (float(kind), float(base_r), float(base_g), float(base_b), m, alpha, f0, spec)


# ----------------------------------------------------------------------- batch wrappers (tests)


@njit(**KERNEL)
def eval_f_batch(params, wo, wi, out):
    """f for N direction pairs; params (8,) float64 as the resolved tuple; out (N, 3)."""
    bsdf = (params[0], params[1], params[2], params[3], params[4], params[5], params[6], params[7])
    for i in range(wo.shape[0]):
        fr, fg, fb = eval_f(bsdf, wo[i, 0], wo[i, 1], wo[i, 2], wi[i, 0], wi[i, 1], wi[i, 2])
        out[i, 0] = fr
        out[i, 1] = fg
        out[i, 2] = fb


@njit(**KERNEL)
def pdf_f_batch(params, wo, wi, out):
    bsdf = (params[0], params[1], params[2], params[3], params[4], params[5], params[6], params[7])
    for i in range(wo.shape[0]):
        out[i] = pdf_f(bsdf, wo[i, 0], wo[i, 1], wo[i, 2], wi[i, 0], wi[i, 1], wi[i, 2])


@njit(**KERNEL)
def sample_f_batch(params, wo, u, out):
    """sample_f for N (wo, u) pairs; u (N, 3); out (N, 7) = wi, f, pdf."""
    bsdf = (params[0], params[1], params[2], params[3], params[4], params[5], params[6], params[7])
    for i in range(wo.shape[0]):
        r = sample_f(bsdf, wo[i, 0], wo[i, 1], wo[i, 2], u[i, 0], u[i, 1], u[i, 2])
        for k in range(7):
            out[i, k] = r[k]


@njit(**KERNEL)
def ggx_d_batch(alpha, cos_h, out):
    for i in range(cos_h.shape[0]):
        out[i] = ggx_d(alpha, cos_h[i])
