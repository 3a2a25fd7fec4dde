"""BSDFs: glTF 2.0 metallic-roughness (Appendix B) with the product-finish KHR layers, exact densities.

Single entry points, dispatched on the resolved record: :func:`eval_f`, :func:`sample_f`,
:func:`pdf_f`.  Directions are unit vectors in the local shading frame (normal = +z, x = the
tangent used by anisotropy); ``wo`` points to the viewer and is always above the surface
(the path kernel turns the frame to the viewer's side); ``wi`` points to the light and is
above (reflection) or below (transmission).  A resolved BSDF at a surface point is a
``N_BSDF`` = 25-tuple of floats (built by :func:`make_bsdf_layers` / :func:`material_bsdf_values`)::

    0 kind, 1-3 base colour (linear), 4 metallic, 5 alpha (= roughness**2, isotropic),
    6 f0 dielectric (max over RGB), 7 f90 dielectric, 8-10 f0 dielectric RGB,
    11 transmission, 12 eta (ior ratio across this crossing: ior entering, 1/ior leaving),
    13 thin-walled (1/0), 14 clearcoat, 15 clearcoat alpha, 16-18 sheen colour,
    19 sheenRoughness, 20 alpha_x (along the tangent), 21 alpha_y,
    22-24 clearcoat normal Nc in the local frame (unit; (0, 0, 1) = the shading normal)

Layering (glTF 2.0 Appendix B and the KHR_materials_* READMEs; REFERENCES.md section 5)::

    base     = (1 - m) [(1 - T) fresnel_mix(diffuse, specular) + T dielectric_bsdf] + m metal
    sheened  = sheen_brdf + (1 - max(sheenColor) E_sheen(n.wo)) base          (KHR_materials_sheen)
    coated   = cc Fc(Nc.wo) coat_brdf + (1 - cc Fc(Nc.wo)) sheened             (KHR_materials_clearcoat)

* GGX D and height-correlated Smith G2 = 1 / (1 + Lambda(wo) + Lambda(wi)) (anisotropic
  form, Heitz 2014 JCGT 3(2); identical to Appendix B's V when alpha_x = alpha_y);
  alpha clamped below at ``ALPHA_MIN``, so every lobe -- "smooth" glass included -- is a
  finite density and MIS needs no delta special case.
* fresnel_mix: Schlick F = f0 + (f90 - f0)(1 - |V.H|)^5 with RGB f0 =
  min(((ior-1)/(ior+1))^2 specularColor, 1) specular, f90 = specular; diffuse weighted by
  1 - max(F) (KHR_materials_specular).  Metal: F = base + (1 - base)(1 - |V.H|)^5.
* dielectric_bsdf (KHR_materials_transmission / _ior / _volume): a rough dielectric interface
  (B. Walter et al., "Microfacet Models for Refraction through Rough Surfaces", EGSR 2007) with
  the **exact** unpolarised Fresnel reflectance (no Schlick), reflection untinted, refraction
  tinted by the base colour.  The transmitted part is written without the eta^2 radiance
  factor (it cancels along any path that enters and leaves a closed object, and keeps the
  directional albedo R + T <= 1).  Thin-walled (no KHR_materials_volume or thicknessFactor 0):
  the transmitted direction is the microfacet reflection mirrored through the tangent plane
  (no bending), with the Fresnel of entering.  Absorption inside volumes is applied by the path
  kernel (Beer-Lambert over the traced segment, ``layers_kernels``).
* Clearcoat: GGX of alpha = clearcoatRoughness^2 about its own normal Nc (KHR_materials_clearcoat:
  ``clearcoatNormalTexture``, else the unperturbed vertex normal; the path kernel passes it in
  the local frame), layered with F of ior 1.5 (f0 = 0.04) at Nc.wo -- the README's
  albedo-scaling ``fresnel_coat``.  The coat's cosine is Nc.wi: eval_f returns
  cc Fc D G2 / (4 (Nc.wo) (n.wi)) so that f x n.wi (the path kernel's cosine) is the coat BRDF
  x Nc.wi; its directional albedo stays <= cc Fc.  A coat facing away from the viewer
  (Nc.wo <= 0) reflects nothing and hides nothing.
* Sheen: the "Charlie" distribution (A. Estevez, C. Kulla, "Production Friendly Microfacet
  Sheen BRDF", 2017) D = (2 + 1/r) sin(theta_h)^(1/r) / (2 pi), r = sheenRoughness^2 (clamped
  at ``SHEEN_R_MIN``), with the Neubelt-Pettineo visibility V = 1 / (4 (n.l + n.v - n.l n.v))
  (Ashikhmin's form, as the README allows; from memory).  E_sheen(mu, sheenRoughness) is a
  17 x 17 table (``SHEEN_E``, computed by quadrature; a unit test recomputes it) bilinearly
  interpolated.  That visibility lets the raw lobe reflect more than 1 near grazing view
  (E up to ~4.8); to keep the layer energy-conserving the lobe is divided by max(1, E) and
  the base is scaled by 1 - max(sheenColor) min(E, 1) -- a deliberate normalisation beyond
  the README, which does not guard against it.

Sampling: one lobe is chosen with probability proportional to its estimated albedo at wo
(specular GGX, diffuse, dielectric, clearcoat, sheen); specular, dielectric and clearcoat
lobes by visible normals (E. Heitz, JCGT 7(4), 2018; the coat's about Nc, in a frame around
Nc), the dielectric choosing reflection with
probability F(wo.h); diffuse cosine-weighted; sheen uniform over the hemisphere.
``pdf_f`` returns the exact mixture density of ``sample_f``.

Material table ``mat_table``: ``(M, 152) float32``, one row per material:

=======  ================================================================================
cols     meaning
=======  ================================================================================
0        kind: 0 = metallic-roughness (all layers below are factors on the same kind)
1-4      baseColorFactor RGBA (linear)
5        metallicFactor
6        roughnessFactor
7-9      emissiveFactor x KHR_materials_emissive_strength (linear RGB radiance)
10       alphaMode: 0 OPAQUE, 1 MASK, 2 BLEND
11       alphaCutoff
12       doubleSided (1.0 / 0.0)
13       index of refraction (KHR_materials_ior, default 1.5)
14       normalTexture scale
15       KHR_materials_specular specularFactor (default 1)
16-23    baseColorTexture slot (sRGB-decoded atlas entry)
24-31    metallicRoughnessTexture slot (B = metallic, G = roughness)
32-39    emissiveTexture slot (sRGB-decoded)
40-47    normalTexture slot (linear; tangent-space normal map, see path_kernels.normal_mapped)
48       KHR_materials_transmission transmissionFactor (0)
49       KHR_materials_volume thicknessFactor (0 = thin-walled)
50-52    absorption coefficient sigma_a RGB (1 / scene unit) = -ln(attenuationColor) /
         attenuationDistance (0 when the distance is infinite or there is no volume)
53       KHR_materials_clearcoat clearcoatFactor (0)
54       clearcoatRoughnessFactor (0)
55-57    KHR_materials_sheen sheenColorFactor RGB (0)
58       sheenRoughnessFactor (0)
59-61    KHR_materials_specular specularColorFactor RGB (1)
62       KHR_materials_anisotropy anisotropyStrength (0)
63       anisotropyRotation (radians, counter-clockwise from the tangent)
64-71    KHR_materials_transmission transmissionTexture slot (R x transmissionFactor)
72-79    KHR_materials_volume thicknessTexture slot (G; packed, never sampled: the path
         tracer uses the traced length, not the thickness)
80-87    KHR_materials_clearcoat clearcoatTexture slot (R x clearcoatFactor)
88-95    clearcoatRoughnessTexture slot (G x clearcoatRoughnessFactor)
96-103   clearcoatNormalTexture slot (tangent-space normal map of the coat)
104-111  KHR_materials_sheen sheenColorTexture slot (sRGB-decoded RGB x sheenColorFactor)
112-119  sheenRoughnessTexture slot (A x sheenRoughnessFactor)
120-127  KHR_materials_specular specularTexture slot (A x specularFactor)
128-135  specularColorTexture slot (sRGB-decoded RGB x specularColorFactor)
136-143  KHR_materials_anisotropy anisotropyTexture slot (RG direction in [-1, 1] tangent /
         bitangent space, rotated by anisotropyRotation; B x anisotropyStrength)
144      clearcoatNormalTexture scale (1)
145      1.0 when any sampled extension slot (64-143 except thickness) is present; 0.0 lets
         the path kernel skip all extension lookups (``layers_kernels.extension_values``)
146-151  spare
=======  ================================================================================

A texture slot is 8 columns: atlas entry (-1: none), texCoord set, then the 2x3
KHR_texture_transform matrix (see ``texture_kernels.sample_slot``).  A missing texture reads
as 1 in every channel, so the factor applies alone (the extensions' READMEs).
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math

import numpy as np

from .layout_kernels import (
    B_ALPHA_X, B_ALPHA_Y, B_BASE_B, B_BASE_G, B_BASE_R, B_CLEARCOAT, B_CLEARCOAT_ALPHA, B_COAT_NX,
    B_COAT_NY, B_COAT_NZ, B_ETA, B_F0_B, B_F0_G, B_F0_R, B_F90, B_METALLIC, B_SHEEN_B, B_SHEEN_G,
    B_SHEEN_R, B_SHEEN_ROUGHNESS, B_THIN, B_TRANSMISSION, MAT_ANISOTROPY, MAT_CLEARCOAT,
    MAT_CLEARCOAT_ROUGHNESS, MAT_IOR, MAT_KIND, MAT_SHEEN_B, MAT_SHEEN_G, MAT_SHEEN_R,
    MAT_SHEEN_ROUGHNESS, MAT_SPECULAR, MAT_SPECULAR_B, MAT_SPECULAR_G, MAT_SPECULAR_R,
    MAT_THICKNESS, MAT_TRANSMISSION, MATERIAL_METAL_ROUGH, N_BSDF,  # noqa: F401 (re-exported)
)
from .sampling_kernels import cosine_hemisphere_pdf, onb_from_normal, sample_cosine_hemisphere

SHEEN_R_MIN = 0.007  # sheen r = sheenRoughness**2 never below this
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


# E_sheen[j, i]: directional albedo of D_charlie V_neubelt at mu_o = i / 16 (i = 0 evaluated at
# 1e-4), sheenRoughness = j / 16; midpoint quadrature, 600 x 600 over the hemisphere
# (tests/unit/transport/test_materials_layers.py recomputes entries).
SHEEN_E = np.array((
    4.77090, 1.48278, 0.55686, 0.20125, 0.06704, 0.02003, 0.00523, 0.00116, 0.00021, 0.00003, 0.00000, 0.00000, 0.00000, 0.00000, 0.00000, 0.00000, 0.00000,
    4.77090, 1.48278, 0.55686, 0.20125, 0.06704, 0.02003, 0.00523, 0.00116, 0.00021, 0.00003, 0.00000, 0.00000, 0.00000, 0.00000, 0.00000, 0.00000, 0.00000,
    3.21807, 1.40816, 0.72993, 0.37970, 0.19251, 0.09361, 0.04308, 0.01851, 0.00731, 0.00260, 0.00081, 0.00021, 0.00004, 0.00001, 0.00000, 0.00000, 0.00000,
    2.17808, 1.21338, 0.77667, 0.50575, 0.32807, 0.20977, 0.13119, 0.07966, 0.04659, 0.02599, 0.01365, 0.00663, 0.00289, 0.00108, 0.00032, 0.00006, 0.00000,
    1.66613, 1.05231, 0.74815, 0.54255, 0.39455, 0.28534, 0.20406, 0.14359, 0.09889, 0.06624, 0.04283, 0.02643, 0.01531, 0.00811, 0.00372, 0.00131, 0.00020,
    1.36541, 0.93123, 0.70515, 0.54484, 0.42328, 0.32834, 0.25313, 0.19320, 0.14542, 0.10747, 0.07754, 0.05422, 0.03634, 0.02293, 0.01318, 0.00640, 0.00202,
    1.17007, 0.84018, 0.66342, 0.53439, 0.43338, 0.35169, 0.28444, 0.22855, 0.18187, 0.14284, 0.11027, 0.08321, 0.06090, 0.04268, 0.02804, 0.01649, 0.00765,
    1.03467, 0.77064, 0.62682, 0.51991, 0.43449, 0.36380, 0.30413, 0.25313, 0.20923, 0.17126, 0.13838, 0.10990, 0.08529, 0.06411, 0.04599, 0.03062, 0.01773,
    0.93645, 0.71663, 0.59579, 0.50495, 0.43137, 0.36955, 0.31645, 0.27021, 0.22955, 0.19358, 0.16161, 0.13314, 0.10775, 0.08511, 0.06496, 0.04707, 0.03125,
    0.86275, 0.67400, 0.56980, 0.49091, 0.42644, 0.37171, 0.32414, 0.28216, 0.24471, 0.21102, 0.18055, 0.15287, 0.12765, 0.10462, 0.08356, 0.06431, 0.04670,
    0.80600, 0.63989, 0.54808, 0.47828, 0.42092, 0.37188, 0.32891, 0.29063, 0.25612, 0.22472, 0.19596, 0.16947, 0.14495, 0.12220, 0.10101, 0.08124, 0.06277,
    0.76135, 0.61224, 0.52990, 0.46716, 0.41542, 0.37098, 0.33183, 0.29672, 0.26483, 0.23559, 0.20855, 0.18340, 0.15987, 0.13778, 0.11694, 0.09724, 0.07854,
    0.72562, 0.58958, 0.51461, 0.45746, 0.41023, 0.36954, 0.33356, 0.30116, 0.27158, 0.24429, 0.21890, 0.19511, 0.17269, 0.15146, 0.13126, 0.11196, 0.09347,
    0.69658, 0.57082, 0.50171, 0.44903, 0.40546, 0.36787, 0.33455, 0.30445, 0.27688, 0.25134, 0.22747, 0.20500, 0.18371, 0.16342, 0.14400, 0.12531, 0.10727,
    0.67269, 0.55513, 0.49074, 0.44171, 0.40116, 0.36613, 0.33505, 0.30692, 0.28110, 0.25712, 0.23464, 0.21340, 0.19319, 0.17386, 0.15527, 0.13730, 0.11985,
    0.65281, 0.54191, 0.48138, 0.43535, 0.39730, 0.36443, 0.33525, 0.30881, 0.28451, 0.26190, 0.24066, 0.22056, 0.20138, 0.18298, 0.16522, 0.14800, 0.13121,
    0.63610, 0.53068, 0.47335, 0.42981, 0.39386, 0.36282, 0.33525, 0.31027, 0.28729, 0.26590, 0.24578, 0.22670, 0.20847, 0.19095, 0.17400, 0.15752, 0.14142,
), dtype=np.float64)


@njit(**KERNEL)
def sheen_albedo(mu, sheen_roughness):
    """E_sheen(mu, sheenRoughness), bilinear in the 17 x 17 table ``SHEEN_E``."""
    x = min(max(mu, 0.0), 1.0) * 16.0
    y = min(max(sheen_roughness, 0.0), 1.0) * 16.0
    i = min(int(x), 15)
    j = min(int(y), 15)
    fx = x - i
    fy = y - j
    e00 = SHEEN_E[j * 17 + i]
    e10 = SHEEN_E[j * 17 + i + 1]
    e01 = SHEEN_E[(j + 1) * 17 + i]
    e11 = SHEEN_E[(j + 1) * 17 + i + 1]
    return (1.0 - fy) * ((1.0 - fx) * e00 + fx * e10) + fy * ((1.0 - fx) * e01 + fx * e11)


@njit(**KERNEL)
def charlie_d(sheen_roughness, cos_h):
    """Charlie sheen distribution (Estevez & Kulla 2017): (2 + 1/r) sin^(1/r) / (2 pi), r = roughness^2."""
    r = max(sheen_roughness * sheen_roughness, SHEEN_R_MIN)
    s2 = max(0.0, 1.0 - cos_h * cos_h)
    inv = 1.0 / r
    return (2.0 + inv) * math.pow(s2, 0.5 * inv) / (2.0 * math.pi)


@njit(**KERNEL)
def sheen_visibility(cos_l, cos_v):
    """Neubelt & Pettineo 2013 / Ashikhmin visibility 1 / (4 (n.l + n.v - n.l n.v))."""
    return 1.0 / (4.0 * (cos_l + cos_v - cos_l * cos_v))


@njit(**KERNEL)
def fresnel_dielectric(cos_i, eta):
    """Exact unpolarised Fresnel reflectance of a smooth interface (Hecht, Optics; from memory).

    ``cos_i`` the cosine on the incident side, ``eta`` = n_transmitted / n_incident; 1 under
    total internal reflection.
    """
    c = min(abs(cos_i), 1.0)
    s2t = (1.0 - c * c) / (eta * eta)
    if s2t >= 1.0:
        return 1.0
    ct = math.sqrt(1.0 - s2t)
    rs = (c - eta * ct) / (c + eta * ct)
    rp = (eta * c - ct) / (eta * c + ct)
    return 0.5 * (rs * rs + rp * rp)


@njit(**KERNEL)
def ggx_d_aniso(ax, ay, hx, hy, hz):
    """Anisotropic GGX D(h) (Heitz 2014 eq. 85); 0 for hz <= 0."""
    if hz <= 0.0:
        return 0.0
    x = hx / ax
    y = hy / ay
    t = x * x + y * y + hz * hz
    return 1.0 / (math.pi * ax * ay * t * t)


@njit(**KERNEL)
def lambda_aniso(ax, ay, wx, wy, wz):
    """Smith Lambda of anisotropic GGX: (-1 + sqrt(1 + (ax^2 wx^2 + ay^2 wy^2) / wz^2)) / 2."""
    z2 = wz * wz
    if z2 <= 0.0:
        return 1e30
    a2 = (ax * ax * wx * wx + ay * ay * wy * wy) / z2
    return 0.5 * (-1.0 + math.sqrt(1.0 + a2))


@njit(**KERNEL)
def sample_vndf_aniso(ax, ay, wox, woy, woz, u0, u1):
    """A visible normal of anisotropic GGX (Heitz 2018, JCGT 7(4), listing 1)."""
    vx = ax * wox
    vy = ay * woy
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
    else:
        t1x = 1.0
        t1y = 0.0
    t2x = -vz * t1y
    t2y = vz * t1x
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
    nz = p2 * t2z + p3 * vz
    hx = ax * nx
    hy = ay * ny
    hz = max(0.0, nz)
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0, 0.0, 1.0
    return hx / hl, hy / hl, hz / hl


@njit(**KERNEL)
def vndf_pdf_h(ax, ay, wox, woy, woz, hx, hy, hz):
    """Density of the visible normal h: G1(wo) max(0, wo.h) D(h) / wo.z."""
    d = wox * hx + woy * hy + woz * hz
    if d <= 0.0 or woz <= 0.0:
        return 0.0
    g1 = 1.0 / (1.0 + lambda_aniso(ax, ay, wox, woy, woz))
    return g1 * d * ggx_d_aniso(ax, ay, hx, hy, hz) / woz


@njit(**KERNEL)
def coat_cos(bsdf, wox, woy, woz):
    """Nc.wo, the cosine of the view to the clearcoat normal."""
    return bsdf[B_COAT_NX] * wox + bsdf[B_COAT_NY] * woy + bsdf[B_COAT_NZ] * woz


@njit(**KERNEL)
def layer_scales(bsdf, mu_o, mu_c):
    """(coat weight cc Fc(mu_c), base scale under the coat, sheen E normaliser, base scale under sheen).

    ``mu_o`` = n.wo (sheen), ``mu_c`` = Nc.wo (coat); a coat seen from behind (mu_c <= 0) has weight 0.
    """
    cc = bsdf[B_CLEARCOAT]
    fc = 0.0
    if cc > 0.0 and mu_c > 0.0:
        fc = cc * (0.04 + 0.96 * (1.0 - min(mu_c, 1.0)) ** 5)
    smax = max(bsdf[B_SHEEN_R], max(bsdf[B_SHEEN_G], bsdf[B_SHEEN_B]))
    e_norm = 1.0
    s_scale = 1.0
    if smax > 0.0:
        e = sheen_albedo(mu_o, bsdf[B_SHEEN_ROUGHNESS])
        e_norm = max(e, 1.0)
        s_scale = 1.0 - smax * min(e, 1.0)
    return fc, 1.0 - fc, e_norm, s_scale


@njit(**KERNEL)
def lobe_weights(bsdf, mu_o, mu_c):
    """Estimated albedos at wo of the lobes (specular, diffuse, dielectric, coat, sheen)."""
    fc, c_scale, e_norm, s_scale = layer_scales(bsdf, mu_o, mu_c)
    scale = c_scale * s_scale
    m = bsdf[B_METALLIC]
    tr = bsdf[B_TRANSMISSION]
    s = (1.0 - min(max(mu_o, 0.0), 1.0)) ** 5
    f90 = bsdf[B_F90]
    fmax = max(bsdf[B_F0_R] + (f90 - bsdf[B_F0_R]) * s, max(bsdf[B_F0_G] + (f90 - bsdf[B_F0_G]) * s, bsdf[B_F0_B] + (f90 - bsdf[B_F0_B]) * s))
    base_lum = luminance(bsdf[B_BASE_R], bsdf[B_BASE_G], bsdf[B_BASE_B])
    w_spec = scale * ((1.0 - m) * (1.0 - tr) * fmax + m * (base_lum + (1.0 - base_lum) * s))
    w_diff = scale * (1.0 - m) * (1.0 - tr) * (1.0 - fmax) * base_lum
    w_diel = 0.0
    if tr > 0.0:
        fe = fresnel_dielectric(mu_o, bsdf[B_ETA])
        w_diel = scale * (1.0 - m) * tr * (fe + (1.0 - fe) * max(base_lum, 0.05))
    w_coat = fc
    w_sheen = 0.0
    if s_scale < 1.0 or bsdf[B_SHEEN_R] + bsdf[B_SHEEN_G] + bsdf[B_SHEEN_B] > 0.0:
        w_sheen = c_scale * (1.0 - s_scale)
    return w_spec, w_diff, w_diel, w_coat, w_sheen


@njit(**KERNEL)
def lobe_probabilities(bsdf, mu_o, mu_c):
    w0, w1, w2, w3, w4 = lobe_weights(bsdf, mu_o, mu_c)
    tot = w0 + w1 + w2 + w3 + w4
    if tot <= 0.0:
        return 1.0, 0.0, 0.0, 0.0, 0.0
    return w0 / tot, w1 / tot, w2 / tot, w3 / tot, w4 / tot


@njit(**KERNEL)
def refraction_half(eta, wox, woy, woz, wix, wiy, wiz):
    """Walter 2007 half vector -(wo + eta wi) turned to +z; (0, 0, 0) when degenerate."""
    hx = -(wox + eta * wix)
    hy = -(woy + eta * wiy)
    hz = -(woz + eta * wiz)
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 1e-12:
        return 0.0, 0.0, 0.0
    if hz < 0.0:
        hl = -hl
    return hx / hl, hy / hl, hz / hl


@njit(**KERNEL)
def eval_f(bsdf, wox, woy, woz, wix, wiy, wiz):
    """BSDF value f(wo, wi) (RGB, 1/sr); reflection for wi.z > 0, transmission for wi.z < 0."""
    if woz <= 0.0 or wiz == 0.0:
        return 0.0, 0.0, 0.0
    ax = bsdf[B_ALPHA_X]
    ay = bsdf[B_ALPHA_Y]
    m = bsdf[B_METALLIC]
    tr = bsdf[B_TRANSMISSION]
    br = bsdf[B_BASE_R]
    bg = bsdf[B_BASE_G]
    bb = bsdf[B_BASE_B]
    mu_c = coat_cos(bsdf, wox, woy, woz)
    fc, c_scale, e_norm, s_scale = layer_scales(bsdf, woz, mu_c)
    scale = c_scale * s_scale
    lam_o = lambda_aniso(ax, ay, wox, woy, woz)
    if wiz < 0.0:
        if tr <= 0.0 or m >= 1.0:
            return 0.0, 0.0, 0.0
        if bsdf[B_THIN] > 0.5:
            # thin-walled: the reflection of the mirrored direction
            rz = -wiz
            hx = wox + wix
            hy = woy + wiy
            hz = woz + rz
            hl = math.sqrt(hx * hx + hy * hy + hz * hz)
            if hl <= 0.0:
                return 0.0, 0.0, 0.0
            hx /= hl
            hy /= hl
            hz /= hl
            voh = wox * hx + woy * hy + woz * hz
            fe = fresnel_dielectric(voh, bsdf[B_ETA])
            g2 = 1.0 / (1.0 + lam_o + lambda_aniso(ax, ay, wix, wiy, rz))
            v = (1.0 - fe) * ggx_d_aniso(ax, ay, hx, hy, hz) * g2 / (4.0 * woz * rz)
        else:
            eta = bsdf[B_ETA]
            hx, hy, hz = refraction_half(eta, wox, woy, woz, wix, wiy, wiz)
            if hz <= 0.0:
                return 0.0, 0.0, 0.0
            voh = wox * hx + woy * hy + woz * hz
            ioh = wix * hx + wiy * hy + wiz * hz
            if voh <= 0.0 or ioh >= 0.0:
                return 0.0, 0.0, 0.0
            fe = fresnel_dielectric(voh, eta)
            if fe >= 1.0:
                return 0.0, 0.0, 0.0
            g2 = 1.0 / (1.0 + lam_o + lambda_aniso(ax, ay, wix, wiy, wiz))
            den = voh + eta * ioh
            v = ((1.0 - fe) * ggx_d_aniso(ax, ay, hx, hy, hz) * g2 * voh * (-ioh) * eta * eta
                 / (woz * (-wiz) * den * den))
        k = scale * (1.0 - m) * tr * v
        return k * br, k * bg, k * bb
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
    g2 = 1.0 / (1.0 + lam_o + lambda_aniso(ax, ay, wix, wiy, wiz))
    spec = ggx_d_aniso(ax, ay, hx, hy, hz) * g2 / (4.0 * woz * wiz)
    s = (1.0 - min(v_dot_h, 1.0)) ** 5
    f90 = bsdf[B_F90]
    fdr = bsdf[B_F0_R] + (f90 - bsdf[B_F0_R]) * s
    fdg = bsdf[B_F0_G] + (f90 - bsdf[B_F0_G]) * s
    fdb = bsdf[B_F0_B] + (f90 - bsdf[B_F0_B]) * s
    fmax = max(fdr, max(fdg, fdb))
    wo_ = (1.0 - m) * (1.0 - tr)
    diffuse = wo_ * (1.0 - fmax) / math.pi
    fr = spec * (wo_ * fdr + m * (br + (1.0 - br) * s)) + diffuse * br
    fg = spec * (wo_ * fdg + m * (bg + (1.0 - bg) * s)) + diffuse * bg
    fb = spec * (wo_ * fdb + m * (bb + (1.0 - bb) * s)) + diffuse * bb
    if tr > 0.0 and m < 1.0:
        fe = fresnel_dielectric(wox * hx + woy * hy + woz * hz, bsdf[B_ETA])
        kd = (1.0 - m) * tr * fe * spec
        fr += kd
        fg += kd
        fb += kd
    fr *= scale
    fg *= scale
    fb *= scale
    if s_scale < 1.0:
        ks = charlie_d(bsdf[B_SHEEN_ROUGHNESS], hz) * sheen_visibility(wiz, woz) / e_norm
        fr += c_scale * bsdf[B_SHEEN_R] * ks
        fg += c_scale * bsdf[B_SHEEN_G] * ks
        fb += c_scale * bsdf[B_SHEEN_B] * ks
    if fc > 0.0:
        # the coat about Nc; f x n.wi = coat BRDF x Nc.wi (exactly the old form when Nc = n)
        ac = bsdf[B_CLEARCOAT_ALPHA]
        hzc = bsdf[B_COAT_NX] * hx + bsdf[B_COAT_NY] * hy + bsdf[B_COAT_NZ] * hz
        wizc = bsdf[B_COAT_NX] * wix + bsdf[B_COAT_NY] * wiy + bsdf[B_COAT_NZ] * wiz
        if wizc > 0.0:
            kc = fc * ggx_d(ac, hzc) * visibility_height_correlated(ac, wizc, mu_c) * (wizc / wiz)
            fr += kc
            fg += kc
            fb += kc
    return fr, fg, fb


@njit(**KERNEL)
def coat_pdf(bsdf, wox, woy, woz, wix, wiy, wiz):
    """Density of reflecting wo about a visible normal of the coat's GGX around Nc:
    G1(Nc.wo) D(Nc.h) / (4 Nc.wo) (for wi on the reflection side of the shading normal)."""
    if wiz <= 0.0:
        return 0.0
    mu_c = coat_cos(bsdf, wox, woy, woz)
    if mu_c <= 0.0:
        return 0.0
    hx = wox + wix
    hy = woy + wiy
    hz = woz + wiz
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0
    hzc = (bsdf[B_COAT_NX] * hx + bsdf[B_COAT_NY] * hy + bsdf[B_COAT_NZ] * hz) / hl
    return smith_g1(bsdf[B_CLEARCOAT_ALPHA], mu_c) * ggx_d(bsdf[B_CLEARCOAT_ALPHA], hzc) / (4.0 * mu_c)


@njit(**KERNEL)
def reflect_pdf_aniso(ax, ay, wox, woy, woz, wix, wiy, wiz):
    """Density of wi = reflect(wo, h), h a visible normal: D_wo(h) / (4 wo.h)."""
    if woz <= 0.0 or wiz <= 0.0:
        return 0.0
    hx = wox + wix
    hy = woy + wiy
    hz = woz + wiz
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0
    hx /= hl
    hy /= hl
    hz /= hl
    d = wox * hx + woy * hy + woz * hz
    if d <= 0.0:
        return 0.0
    return vndf_pdf_h(ax, ay, wox, woy, woz, hx, hy, hz) / (4.0 * d)


@njit(**KERNEL)
def dielectric_pdf(bsdf, wox, woy, woz, wix, wiy, wiz):
    """Density of the dielectric lobe's sample (reflection with probability F(wo.h), else refraction)."""
    ax = bsdf[B_ALPHA_X]
    ay = bsdf[B_ALPHA_Y]
    eta = bsdf[B_ETA]
    if wiz > 0.0:
        hx = wox + wix
        hy = woy + wiy
        hz = woz + wiz
        hl = math.sqrt(hx * hx + hy * hy + hz * hz)
        if hl <= 0.0:
            return 0.0
        hx /= hl
        hy /= hl
        hz /= hl
        d = wox * hx + woy * hy + woz * hz
        if d <= 0.0:
            return 0.0
        return fresnel_dielectric(d, eta) * vndf_pdf_h(ax, ay, wox, woy, woz, hx, hy, hz) / (4.0 * d)
    if bsdf[B_THIN] > 0.5:
        rz = -wiz
        hx = wox + wix
        hy = woy + wiy
        hz = woz + rz
        hl = math.sqrt(hx * hx + hy * hy + hz * hz)
        if hl <= 0.0:
            return 0.0
        hx /= hl
        hy /= hl
        hz /= hl
        d = wox * hx + woy * hy + woz * hz
        if d <= 0.0:
            return 0.0
        return (1.0 - fresnel_dielectric(d, eta)) * vndf_pdf_h(ax, ay, wox, woy, woz, hx, hy, hz) / (4.0 * d)
    hx, hy, hz = refraction_half(eta, wox, woy, woz, wix, wiy, wiz)
    if hz <= 0.0:
        return 0.0
    voh = wox * hx + woy * hy + woz * hz
    ioh = wix * hx + wiy * hy + wiz * hz
    if voh <= 0.0 or ioh >= 0.0:
        return 0.0
    den = voh + eta * ioh
    jac = eta * eta * (-ioh) / (den * den)
    return (1.0 - fresnel_dielectric(voh, eta)) * vndf_pdf_h(ax, ay, wox, woy, woz, hx, hy, hz) * jac


@njit(**KERNEL)
def pdf_f(bsdf, wox, woy, woz, wix, wiy, wiz):
    """Solid-angle density with which :func:`sample_f` returns wi given wo."""
    if woz <= 0.0 or wiz == 0.0:
        return 0.0
    p0, p1, p2, p3, p4 = lobe_probabilities(bsdf, woz, coat_cos(bsdf, wox, woy, woz))
    pdf = 0.0
    if p2 > 0.0:
        pdf += p2 * dielectric_pdf(bsdf, wox, woy, woz, wix, wiy, wiz)
    if wiz < 0.0:
        return pdf
    if p0 > 0.0:
        pdf += p0 * reflect_pdf_aniso(bsdf[B_ALPHA_X], bsdf[B_ALPHA_Y], wox, woy, woz, wix, wiy, wiz)
    if p1 > 0.0:
        pdf += p1 * cosine_hemisphere_pdf(wiz)
    if p3 > 0.0:
        pdf += p3 * coat_pdf(bsdf, wox, woy, woz, wix, wiy, wiz)
    if p4 > 0.0:
        pdf += p4 / (2.0 * math.pi)
    return pdf


@njit(**KERNEL)
def sample_vndf(alpha, wox, woy, woz, u0, u1):
    """A GGX visible normal for view wo (Heitz 2018, JCGT 7(4), listing 1); returns (hx, hy, hz).

    The isotropic case of :func:`sample_vndf_aniso`.
    """
    return sample_vndf_aniso(alpha, alpha, wox, woy, woz, u0, u1)


@njit(**KERNEL)
def sample_f(bsdf, wox, woy, woz, u_lobe, u0, u1):
    """Sample wi given wo; returns (wix, wiy, wiz, fr, fg, fb, pdf); pdf = 0 means no sample."""
    if woz <= 0.0:
        return 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0
    p0, p1, p2, p3, p4 = lobe_probabilities(bsdf, woz, coat_cos(bsdf, wox, woy, woz))
    transmit = False
    if u_lobe < p0:
        hx, hy, hz = sample_vndf_aniso(bsdf[B_ALPHA_X], bsdf[B_ALPHA_Y], wox, woy, woz, u0, u1)
        d = wox * hx + woy * hy + woz * hz
        wix = 2.0 * d * hx - wox
        wiy = 2.0 * d * hy - woy
        wiz = 2.0 * d * hz - woz
    elif u_lobe < p0 + p1:
        wix, wiy, wiz = sample_cosine_hemisphere(u0, u1)
    elif u_lobe < p0 + p1 + p2:
        u_r = (u_lobe - p0 - p1) / p2
        hx, hy, hz = sample_vndf_aniso(bsdf[B_ALPHA_X], bsdf[B_ALPHA_Y], wox, woy, woz, u0, u1)
        d = wox * hx + woy * hy + woz * hz
        eta = bsdf[B_ETA]
        fe = fresnel_dielectric(d, eta)
        wix = 2.0 * d * hx - wox
        wiy = 2.0 * d * hy - woy
        wiz = 2.0 * d * hz - woz
        if u_r >= fe:
            transmit = True
            if bsdf[B_THIN] > 0.5:
                wiz = -wiz
            else:
                s2t = (1.0 - d * d) / (eta * eta)
                ct = math.sqrt(max(0.0, 1.0 - s2t))
                k = d / eta - ct
                wix = -wox / eta + k * hx
                wiy = -woy / eta + k * hy
                wiz = -woz / eta + k * hz
                wl = math.sqrt(wix * wix + wiy * wiy + wiz * wiz)
                wix /= wl
                wiy /= wl
                wiz /= wl
    elif u_lobe < p0 + p1 + p2 + p3:
        if bsdf[B_COAT_NZ] >= 1.0:
            hx, hy, hz = sample_vndf(bsdf[B_CLEARCOAT_ALPHA], wox, woy, woz, u0, u1)
        else:
            # a visible normal of the coat in a frame (t, b, Nc) around its own normal
            cx = bsdf[B_COAT_NX]
            cy = bsdf[B_COAT_NY]
            cz = bsdf[B_COAT_NZ]
            tx, ty, tz, bx, by, bz = onb_from_normal(cx, cy, cz)
            qx, qy, qz = sample_vndf(bsdf[B_CLEARCOAT_ALPHA], wox * tx + woy * ty + woz * tz, wox * bx + woy * by + woz * bz,
                                     wox * cx + woy * cy + woz * cz, u0, u1)
            hx = qx * tx + qy * bx + qz * cx
            hy = qx * ty + qy * by + qz * cy
            hz = qx * tz + qy * bz + qz * cz
        d = wox * hx + woy * hy + woz * hz
        wix = 2.0 * d * hx - wox
        wiy = 2.0 * d * hy - woy
        wiz = 2.0 * d * hz - woz
    else:
        wiz = u0
        r = math.sqrt(max(0.0, 1.0 - u0 * u0))
        phi = 2.0 * math.pi * u1
        wix = r * math.cos(phi)
        wiy = r * math.sin(phi)
    if transmit:
        if wiz >= 0.0:
            return wix, wiy, wiz, 0.0, 0.0, 0.0, 0.0
    elif wiz <= 0.0:
        return wix, wiy, wiz, 0.0, 0.0, 0.0, 0.0
    pdf = pdf_f(bsdf, wox, woy, woz, wix, wiy, wiz)
    fr, fg, fb = eval_f(bsdf, wox, woy, woz, wix, wiy, wiz)
    return wix, wiy, wiz, fr, fg, fb, pdf


@njit(**KERNEL)
def make_bsdf_ext(kind, base_r, base_g, base_b, metallic, roughness, ior, specular,
                  spec_r, spec_g, spec_b, transmission, eta, thin, clearcoat, clearcoat_roughness,
                  sheen_r, sheen_g, sheen_b, sheen_roughness, anisotropy):
    """:func:`make_bsdf_layers` with the clearcoat on the shading normal."""
    return make_bsdf_layers(kind, base_r, base_g, base_b, metallic, roughness, ior, specular,
                            spec_r, spec_g, spec_b, transmission, eta, thin, clearcoat, clearcoat_roughness,
                            sheen_r, sheen_g, sheen_b, sheen_roughness, anisotropy, 0.0, 0.0, 1.0)


@njit(**KERNEL)
def make_bsdf_layers(kind, base_r, base_g, base_b, metallic, roughness, ior, specular,
                     spec_r, spec_g, spec_b, transmission, eta, thin, clearcoat, clearcoat_roughness,
                     sheen_r, sheen_g, sheen_b, sheen_roughness, anisotropy, coat_nx, coat_ny, coat_nz):
    """The resolved ``N_BSDF``-tuple from material values (layout in the module docstring).

    alpha = roughness**2 (clamped at ALPHA_MIN); dielectric f0 = min(((ior - 1)/(ior + 1))**2 x
    specularColor, 1) x specular and f90 = specular (KHR_materials_ior, KHR_materials_specular);
    ``eta`` the ior ratio across the surface for the dielectric lobe; anisotropy
    (KHR_materials_anisotropy): alpha_x = mix(alpha, 1, strength**2) along the tangent,
    alpha_y = alpha; (coat_nx, coat_ny, coat_nz) the clearcoat normal in the local frame
    (normalised here; (0, 0, 1) when degenerate).
    """
    alpha = max(roughness * roughness, ALPHA_MIN)
    m = min(max(metallic, 0.0), 1.0)
    spec = min(max(specular, 0.0), 1.0)
    f0i = ((ior - 1.0) / (ior + 1.0)) ** 2
    f0r = min(f0i * max(spec_r, 0.0), 1.0) * spec
    f0g = min(f0i * max(spec_g, 0.0), 1.0) * spec
    f0b = min(f0i * max(spec_b, 0.0), 1.0) * spec
    an = min(max(anisotropy, 0.0), 1.0)
    # an index-matched interface (eta = 1, e.g. ior 1.0) has a degenerate refraction half vector:
    # keep eta 1e-3 away from 1 (the lobe stays a finite, very narrow density around -wo)
    eta_ = max(eta, 1e-3)
    if abs(eta_ - 1.0) < 1e-3:
        eta_ = 1.001 if eta_ >= 1.0 else 1.0 / 1.001
    ax = alpha + (1.0 - alpha) * an * an
    ca = max(clearcoat_roughness * clearcoat_roughness, ALPHA_MIN)
    sr = min(max(sheen_roughness, 0.0), 1.0)
    cx = 0.0
    cy = 0.0
    cz = 1.0
    if coat_nz < 1.0:
        cl = math.sqrt(coat_nx * coat_nx + coat_ny * coat_ny + coat_nz * coat_nz)
        if cl > 0.0 and math.isfinite(cl):
            cx = coat_nx / cl
            cy = coat_ny / cl
            cz = coat_nz / cl
    return (np.float64(kind), np.float64(base_r), np.float64(base_g), np.float64(base_b), m, alpha,
            max(f0r, max(f0g, f0b)), spec, f0r, f0g, f0b,
            min(max(transmission, 0.0), 1.0), eta_, 1.0 if thin > 0.5 else 0.0,
            min(max(clearcoat, 0.0), 1.0), ca,
            max(sheen_r, 0.0), max(sheen_g, 0.0), max(sheen_b, 0.0), sr, ax, alpha,
            np.float64(cx), np.float64(cy), np.float64(cz))


@njit(**KERNEL)
def make_bsdf(kind, base_r, base_g, base_b, metallic, roughness, ior, specular):
    """Resolved BSDF tuple of a plain metallic-roughness material (no extension layers)."""
    return make_bsdf_ext(kind, base_r, base_g, base_b, metallic, roughness, ior, specular,
                         1.0, 1.0, 1.0, 0.0, ior, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0)


@njit(**KERNEL)
def material_bsdf_values(mat_table, mat, base_r, base_g, base_b, metallic, roughness, entering,
                         transmission, clearcoat, clearcoat_roughness, sheen_r, sheen_g, sheen_b,
                         sheen_roughness, specular, spec_r, spec_g, spec_b, anisotropy,
                         coat_nx, coat_ny, coat_nz):
    """Resolved BSDF of material ``mat`` with every textured value given (factor x texture).

    The values come from ``layers_kernels.extension_values`` (extensions) and the path kernel
    (base colour, metallic, roughness; the clearcoat normal in the local frame).  ``entering``:
    the ray hit the front face (glTF winding), so the dielectric lobe refracts into the
    material (eta = ior); else out of it (eta = 1 / ior).  Thin-walled surfaces always use
    eta = ior.
    """
    ior = float(mat_table[mat, MAT_IOR])
    if ior <= 0.0:
        ior = 1.5
    thin = 1.0 if mat_table[mat, MAT_THICKNESS] <= 0.0 else 0.0
    eta = ior
    if thin < 0.5 and not entering:
        eta = 1.0 / ior
    return make_bsdf_layers(float(mat_table[mat, MAT_KIND]), base_r, base_g, base_b, metallic, roughness, ior,
                            specular, spec_r, spec_g, spec_b, transmission, eta, thin,
                            clearcoat, clearcoat_roughness, sheen_r, sheen_g, sheen_b, sheen_roughness,
                            anisotropy, coat_nx, coat_ny, coat_nz)


@njit(**KERNEL)
def material_bsdf(mat_table, mat, base_r, base_g, base_b, metallic, roughness, entering):
    """Resolved BSDF of material ``mat`` from its extension factors alone (no extension textures),
    the clearcoat on the shading normal; base colour / metallic / roughness given."""
    return material_bsdf_values(mat_table, mat, base_r, base_g, base_b, metallic, roughness, entering,
                                float(mat_table[mat, MAT_TRANSMISSION]), float(mat_table[mat, MAT_CLEARCOAT]), float(mat_table[mat, MAT_CLEARCOAT_ROUGHNESS]),
                                float(mat_table[mat, MAT_SHEEN_R]), float(mat_table[mat, MAT_SHEEN_G]), float(mat_table[mat, MAT_SHEEN_B]),
                                float(mat_table[mat, MAT_SHEEN_ROUGHNESS]), float(mat_table[mat, MAT_SPECULAR]), float(mat_table[mat, MAT_SPECULAR_R]),
                                float(mat_table[mat, MAT_SPECULAR_G]), float(mat_table[mat, MAT_SPECULAR_B]), float(mat_table[mat, MAT_ANISOTROPY]),
                                0.0, 0.0, 1.0)


# ----------------------------------------------------------------------- batch wrappers (tests)


@njit(**KERNEL)
def as_tuple(params):
    """The resolved tuple from a (N_BSDF,) float64 array."""
    return (params[0], params[1], params[2], params[3], params[4], params[5], params[6], params[7], params[8],
            params[9], params[10], params[11], params[12], params[13], params[14], params[15], params[16],
            params[17], params[18], params[19], params[20], params[21], params[22], params[23], params[24])


@njit(**KERNEL)
def eval_f_batch(params, wo, wi, out):
    """f for N direction pairs; params (N_BSDF,) float64 as the resolved tuple; out (N, 3)."""
    bsdf = as_tuple(params)
    for i in range(wo.shape[0]):
        fr, fg, fb = eval_f(bsdf, wo[i, 0], wo[i, 1], wo[i, 2], wi[i, 0], wi[i, 1], wi[i, 2])
        out[i, 0] = fr
        out[i, 1] = fg
        out[i, 2] = fb


@njit(**KERNEL)
def pdf_f_batch(params, wo, wi, out):
    bsdf = as_tuple(params)
    for i in range(wo.shape[0]):
        out[i] = pdf_f(bsdf, wo[i, 0], wo[i, 1], wo[i, 2], wi[i, 0], wi[i, 1], wi[i, 2])


@njit(**KERNEL)
def sample_f_batch(params, wo, u, out):
    """sample_f for N (wo, u) pairs; u (N, 3); out (N, 7) = wi, f, pdf."""
    bsdf = as_tuple(params)
    for i in range(wo.shape[0]):
        r = sample_f(bsdf, wo[i, 0], wo[i, 1], wo[i, 2], u[i, 0], u[i, 1], u[i, 2])
        for k in range(7):
            out[i, k] = r[k]
