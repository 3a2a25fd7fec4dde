"""The path tracer: unbiased path tracing with NEE, MIS and Russian roulette, over image rows.

Estimator (per camera sample)
-----------------------------
At every surface vertex the path adds

* emission hit by the path, weighted by the power heuristic against the light-sampling density
  of that point (camera rays and ``mode = baseline`` count emission with weight 1);
* one light sample (next-event estimation): a light entry chosen by ``sel_cdf`` (environment,
  the emissive-triangle group, each punctual light; rule in ``lights.py``), a point on it, a
  shadow ray; area densities are turned into solid angle by d^2 / |cos theta_light|; weighted
  by the power heuristic against ``pdf_f``; punctual lights are delta lights (weight 1);
* then continues by sampling the BSDF; a sample below the surface (transmission) leaves from
  the far side, and the next emission it reaches counts with weight 1 (light samples only go
  to the reflection side, so no other strategy covers it).  A segment that ends on a back face
  of a ``KHR_materials_volume`` material is attenuated by exp(-sigma_a length) (Beer-Lambert,
  ``layers_kernels``).  After three bounces Russian roulette ends the path
  with probability 1 - min(1, max(throughput)) and divides survivors by the survival
  probability.  ``max_depth`` is only a safety net.

Geometry conventions: the geometric normal is turned towards the incoming ray; the shading
normal (interpolated vertex normals) is turned to the same side.  Rays leave a surface from
a point offset along the geometric normal by ``eps`` (scale-aware, ``fopts[FOPT_EPS]``).  Back faces
of single-sided materials are shaded like fronts but do not emit (see ``materials.py``).

Alpha: MASK passes rays where alpha < cutoff; BLEND passes a ray with probability 1 - alpha
(stochastic transparency); shadow rays through BLEND surfaces are attenuated by 1 - alpha.

Sample dimensions: 0-1 filter, 2-3 lens (both Owen-scrambled Sobol' pairs), then per bounce
``b`` the hashed block 4 + 16 b:
+0 light entry, +1 triangle, +2..3 point on the light, +4 lobe, +5..6 BSDF direction,
+7 roulette; alpha pass-through uses 1 << 20 + 64 b + k.  At the first vertex (b = 0) the
light point and the BSDF direction come from Sobol' pairs 2 and 3 instead of +2..3, +5..6.

Packed integer options ``opts`` (int64): 0 width, 1 height, 2 first sample, 3 end sample,
4 seed, 5 max depth, 6 mode (0 full, 1 baseline), 7 has environment, 8 has non-opaque
materials, 9 see-through material (-1: off).  Float options ``fopts`` (float64): 0 ray offset
eps, 1 filter radius (pixels), 2 ray-cone spread (radians per unit length travelled), 3 ray-cone
base width (world units; orthographic cameras), 4 see-through background radiance; base colour
and metallic-roughness lookups on the path's surfaces are filtered for the cone's footprint
(``texture_kernels``), the other slots read level 0.

See-through mode (``opts[OPT_SEE_MATERIAL]`` = the studio floor's material, set by the batch for the white and
transparent backgrounds): a camera path that reaches that material after only BSDF
transmissions (at least one) and alpha pass-throughs is not shaded there; it ends, adds its
throughput x ``fopts[FOPT_SEE_RADIANCE]`` (the scene-linear value the exposure maps to paper white) to the
radiance -- the white background seen through the glass, so that adaptive sampling, the
denoiser and QA see the pixel as it will be composited -- and returns the throughput as the
"see-through" RGB, with which the compositor puts its own background value there instead
(``imaging.background``).  Paths that reflected off anything shade the floor as usual.
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, PARALLEL, njit, prange

import math

from ..geometry.bvh_kernels import any_hit, closest_hit
from .bsdf_kernels import eval_f, material_bsdf_values, pdf_f, sample_f
from .camera_kernels import generate_ray
from .env_kernels import env_pdf, env_radiance, env_sample
from .light_kernels import sample_emissive_point, sample_punctual, triangle_geometry
from .sampling_kernels import (
    onb_from_normal,
    power_heuristic,
    sample_discrete,
    sample_state,
    sobol_pair,
    sample_tent,
    uniform_from_state,
)
from .layout_kernels import (
    ALPHA_MASK, ALPHA_OPAQUE, MODE_BASELINE,
    FOPT_CONE_BASE, FOPT_CONE_SPREAD, FOPT_EPS, FOPT_FILTER_RADIUS, FOPT_SEE_RADIANCE,
    MAT_ALPHA_CUTOFF, MAT_ALPHA_MODE, MAT_BASE_A, MAT_BASE_B, MAT_BASE_G, MAT_BASE_R,
    MAT_CLEARCOAT_NORMAL_SCALE, MAT_DOUBLE_SIDED, MAT_EMISSIVE_B, MAT_EMISSIVE_G, MAT_EMISSIVE_R,
    MAT_METALLIC, MAT_NORMAL_SCALE, MAT_ROUGHNESS, OPT_END_SAMPLE, OPT_FIRST_SAMPLE, OPT_HAS_ALPHA,
    OPT_HAS_ENV, OPT_MAX_DEPTH, OPT_MODE, OPT_SEED, OPT_SEE_MATERIAL, OPT_WIDTH, SLOT_BASE_COLOUR,
    SLOT_CLEARCOAT_NORMAL, SLOT_EMISSIVE, SLOT_METALLIC_ROUGHNESS, SLOT_NORMAL, SLOT_TEX_COORD,
)
from .layers_kernels import anisotropy_frame, coat_emission_scale, extension_values, tangent_frame, volume_attenuation
from .texture_kernels import footprint_uv_widths, sample_slot, sample_slot_lod


@njit(**KERNEL)
def surface_attributes(positions, normals, uvs, colours, triangles, tri, b1, b2):
    """Interpolated point, shading normal, UV sets and vertex colour at barycentrics (b1, b2)."""
    b0 = 1.0 - b1 - b2
    i0 = triangles[tri, 0]
    i1 = triangles[tri, 1]
    i2 = triangles[tri, 2]
    px = b0 * positions[i0, 0] + b1 * positions[i1, 0] + b2 * positions[i2, 0]
    py = b0 * positions[i0, 1] + b1 * positions[i1, 1] + b2 * positions[i2, 1]
    pz = b0 * positions[i0, 2] + b1 * positions[i1, 2] + b2 * positions[i2, 2]
    nx = b0 * normals[i0, 0] + b1 * normals[i1, 0] + b2 * normals[i2, 0]
    ny = b0 * normals[i0, 1] + b1 * normals[i1, 1] + b2 * normals[i2, 1]
    nz = b0 * normals[i0, 2] + b1 * normals[i1, 2] + b2 * normals[i2, 2]
    u0 = b0 * uvs[i0, 0, 0] + b1 * uvs[i1, 0, 0] + b2 * uvs[i2, 0, 0]
    v0 = b0 * uvs[i0, 0, 1] + b1 * uvs[i1, 0, 1] + b2 * uvs[i2, 0, 1]
    u1 = b0 * uvs[i0, 1, 0] + b1 * uvs[i1, 1, 0] + b2 * uvs[i2, 1, 0]
    v1 = b0 * uvs[i0, 1, 1] + b1 * uvs[i1, 1, 1] + b2 * uvs[i2, 1, 1]
    cr = b0 * colours[i0, 0] + b1 * colours[i1, 0] + b2 * colours[i2, 0]
    cg = b0 * colours[i0, 1] + b1 * colours[i1, 1] + b2 * colours[i2, 1]
    cb = b0 * colours[i0, 2] + b1 * colours[i1, 2] + b2 * colours[i2, 2]
    ca = b0 * colours[i0, 3] + b1 * colours[i1, 3] + b2 * colours[i2, 3]
    return (float(px), float(py), float(pz), float(nx), float(ny), float(nz),
            float(u0), float(v0), float(u1), float(v1), float(cr), float(cg), float(cb), float(ca))


@njit(**KERNEL)
def surface_alpha(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1, ca):
    """glTF alpha: baseColorFactor.a x baseColorTexture.a x COLOR_0.a."""
    a = sample_slot(mat_table, mat, SLOT_BASE_COLOUR, tex_pixels, tex_table, u0, v0, u1, v1)[3]
    return float(mat_table[mat, MAT_BASE_A]) * a * ca


@njit(**KERNEL)
def emission(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1):
    """Emitted radiance (RGB): emissiveFactor x strength x emissiveTexture."""
    er = float(mat_table[mat, MAT_EMISSIVE_R])
    eg = float(mat_table[mat, MAT_EMISSIVE_G])
    eb = float(mat_table[mat, MAT_EMISSIVE_B])
    if er <= 0.0 and eg <= 0.0 and eb <= 0.0:
        return 0.0, 0.0, 0.0
    tr, tg, tb, ta = sample_slot(mat_table, mat, SLOT_EMISSIVE, tex_pixels, tex_table, u0, v0, u1, v1)
    return er * tr, eg * tg, eb * tb


@njit(**KERNEL)
def normal_mapped(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat, tex_pixels, tex_table,
                  nx, ny, nz, u0, v0, u1, v1):
    """Shading normal perturbed by the material's normalTexture (glTF 2.0 §3.9.3), see
    :func:`normal_mapped_slot` (slot 40, scale column 14)."""
    return normal_mapped_slot(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat, tex_pixels,
                              tex_table, nx, ny, nz, u0, v0, u1, v1, SLOT_NORMAL, MAT_NORMAL_SCALE)


@njit(**KERNEL)
def normal_mapped_slot(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat, tex_pixels, tex_table,
                       nx, ny, nz, u0, v0, u1, v1, col, scale_col):
    """Normal N perturbed by the tangent-space normal map in the texture slot at ``col``.

    Tangent space from ``layers_kernels.tangent_frame`` (TANGENT, else dp/du, in the slot's UV
    set); n = normalize(T x + B y + N z) with (x, y, z) = (2 texel - 1) x (scale, scale, 1),
    scale from column ``scale_col`` (normalTexture: glTF 2.0 §3.9.3; clearcoatNormalTexture:
    KHR_materials_clearcoat, the same normalTextureInfo).  Returns the unit normal (N itself when
    the slot is empty).
    """
    if int(mat_table[mat, col]) < 0:
        return nx, ny, nz
    tr, tg, tb, ta = sample_slot(mat_table, mat, col, tex_pixels, tex_table, u0, v0, u1, v1)
    scale = float(mat_table[mat, scale_col])
    mx = (2.0 * tr - 1.0) * scale
    my = (2.0 * tg - 1.0) * scale
    mz = 2.0 * tb - 1.0
    ok, tx, ty, tz, bx, by, bz = tangent_frame(positions, uvs, tangents, triangles, tri, b1, b2,
                                               int(mat_table[mat, col + SLOT_TEX_COORD]), nx, ny, nz)
    if not ok:
        return nx, ny, nz
    rx = tx * mx + bx * my + nx * mz
    ry = ty * mx + by * my + ny * mz
    rz = tz * mx + bz * my + nz * mz
    rl = math.sqrt(rx * rx + ry * ry + rz * rz)
    if rl <= 0.0:
        return nx, ny, nz
    return rx / rl, ry / rl, rz / rl


@njit(**KERNEL)
def shadow_transmittance(nodes_f, nodes_i, tris_f, tri_ids, positions, normals, uvs, colours, triangles,
                         tri_material, mat_table, tex_pixels, tex_table, has_alpha,
                         ox, oy, oz, dx, dy, dz, tmax, eps):
    """Fraction of light passing from o along d up to tmax (0 or 1 without alpha materials)."""
    if has_alpha == 0:
        if any_hit(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, 0.0, tmax):
            return 0.0
        return 1.0
    trans = 1.0
    t_done = 0.0
    for _ in range(256):
        t, tri, b1, b2 = closest_hit(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, 0.0, tmax - t_done)
        if tri < 0:
            return trans
        mat = tri_material[tri]
        mode = int(mat_table[mat, MAT_ALPHA_MODE])
        if mode == ALPHA_OPAQUE:
            return 0.0
        a = surface_attributes(positions, normals, uvs, colours, triangles, tri, b1, b2)
        alpha = surface_alpha(mat_table, mat, tex_pixels, tex_table, a[6], a[7], a[8], a[9], a[13])
        if mode == ALPHA_MASK:
            if alpha >= mat_table[mat, MAT_ALPHA_CUTOFF]:
                return 0.0
        else:
            trans *= max(0.0, 1.0 - alpha)
            if trans <= 0.0:
                return 0.0
        step = float(t) + eps
        ox += dx * step
        oy += dy * step
        oz += dz * step
        t_done += step
        if t_done >= tmax:
            return trans
    return 0.0


@njit(**KERNEL)
def trace_sample(positions, normals, uvs, tangents, colours, triangles, tri_material,
                 nodes_f, nodes_i, tris_f, tri_ids,
                 mat_table, tex_pixels, tex_table,
                 punctual, emit_tris, emit_cdf, tri_emit_prob, sel_cdf,
                 env_pixels, env_cdf_rows, env_cdf_cols, env_params,
                 cam, opts, fopts, px_x, px_y, sample_index, state):
    """One camera sample (number ``sample_index``) through pixel (px_x, px_y).

    Returns (r, g, b, albedo r, g, b, normal x, y, z, coverage, depth, see-through r, g, b)
    where depth is -1 when the camera ray reached no surface and see-through is the throughput
    of a path that reached the ``opts[OPT_SEE_MATERIAL]`` material through transmissions only (0 otherwise).
    """
    max_depth = opts[OPT_MAX_DEPTH]
    baseline = opts[OPT_MODE] == MODE_BASELINE
    has_env = opts[OPT_HAS_ENV] == 1
    has_alpha = opts[OPT_HAS_ALPHA]
    see_mat = opts[OPT_SEE_MATERIAL]
    eps = fopts[FOPT_EPS]
    radius = fopts[FOPT_FILTER_RADIUS]
    cone_spread = fopts[FOPT_CONE_SPREAD]  # ray cone (texture_kernels): width = base + spread x distance
    cone_base = fopts[FOPT_CONE_BASE]
    sel_total = sel_cdf[sel_cdf.shape[0] - 1]
    p_env_sel = (sel_cdf[1] - sel_cdf[0]) / sel_total if sel_total > 0.0 else 0.0
    p_emit_sel = (sel_cdf[2] - sel_cdf[1]) / sel_total if sel_total > 0.0 else 0.0

    # dims 0-3 (filter, lens): Owen-scrambled Sobol' pairs (sampling_kernels)
    pixel = px_y * opts[OPT_WIDTH] + px_x
    uf0, uf1 = sobol_pair(pixel, sample_index, 0, opts[OPT_SEED])
    ul0, ul1 = sobol_pair(pixel, sample_index, 1, opts[OPT_SEED])
    fx = px_x + 0.5 + sample_tent(uf0, radius)
    fy = px_y + 0.5 + sample_tent(uf1, radius)
    ox, oy, oz, dx, dy, dz = generate_ray(cam, fx, fy, ul0, ul1)

    lr = 0.0
    lg = 0.0
    lb = 0.0
    beta_r = 1.0
    beta_g = 1.0
    beta_b = 1.0
    alb_r = 0.0
    alb_g = 0.0
    alb_b = 0.0
    nrm_x = 0.0
    nrm_y = 0.0
    nrm_z = 0.0
    coverage = 0.0
    depth_out = -1.0
    seg_t = 0.0  # distance travelled through alpha-passed surfaces since the last vertex
    path_t = 0.0  # distance travelled from the camera to the last vertex (the ray cone's length)
    prev_pdf = 0.0
    prev_transmit = False  # the last BSDF sample refracted: NEE cannot make it, no MIS
    depth = 0
    passes = 0
    n_transmit = 0  # BSDF transmissions so far
    clear = True  # no reflection yet: only transmissions and alpha pass-throughs
    see_r = 0.0
    see_g = 0.0
    see_b = 0.0
    while True:
        t, tri, b1, b2 = closest_hit(nodes_f, nodes_i, tris_f, tri_ids, ox, oy, oz, dx, dy, dz, 0.0, math.inf)
        if tri < 0:
            if has_env:
                er, eg, eb = env_radiance(env_pixels, env_params, dx, dy, dz)
                w = 1.0
                if depth > 0 and not baseline and not prev_transmit:
                    pl = p_env_sel * env_pdf(env_pixels, env_cdf_rows, env_cdf_cols, env_params, dx, dy, dz)
                    w = power_heuristic(prev_pdf, pl)
                lr += beta_r * er * w
                lg += beta_g * eg * w
                lb += beta_b * eb * w
            break
        t = float(t)
        mat = tri_material[tri]
        (px, py, pz, snx, sny, snz, u0, v0, u1, v1, cr, cg, cb, ca) = surface_attributes(
            positions, normals, uvs, colours, triangles, tri, b1, b2)
        area, ngx, ngy, ngz = triangle_geometry(positions, triangles, tri)
        front = (ngx * dx + ngy * dy + ngz * dz) < 0.0
        if not front:
            ngx = -ngx
            ngy = -ngy
            ngz = -ngz
            # a segment ending on a back face of a volume material ran inside it (Beer-Lambert)
            va_r, va_g, va_b = volume_attenuation(mat_table, mat, seg_t + t)
            beta_r *= va_r
            beta_g *= va_g
            beta_b *= va_b
        alpha_mode = int(mat_table[mat, MAT_ALPHA_MODE])
        if alpha_mode != ALPHA_OPAQUE:
            alpha = surface_alpha(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1, ca)
            passing = False
            if alpha_mode == ALPHA_MASK:
                passing = alpha < mat_table[mat, MAT_ALPHA_CUTOFF]
            else:
                passing = uniform_from_state(state, (1 << 20) + 64 * depth + min(passes, 63)) >= alpha
            if passing and passes < 1024:
                passes += 1
                seg_t += t
                ox = px - ngx * eps
                oy = py - ngy * eps
                oz = pz - ngz * eps
                continue
        if mat == see_mat and clear and n_transmit > 0:
            # the floor seen through the product: left to the compositor (see-through mode)
            see_r = beta_r
            see_g = beta_g
            see_b = beta_b
            lr += beta_r * fopts[FOPT_SEE_RADIANCE]
            lg += beta_g * fopts[FOPT_SEE_RADIANCE]
            lb += beta_b * fopts[FOPT_SEE_RADIANCE]
            break
        double_sided = mat_table[mat, MAT_DOUBLE_SIDED] > 0.5
        # shading normal on the viewer's side of the geometric normal
        sl = math.sqrt(snx * snx + sny * sny + snz * snz)
        if sl > 0.0:
            snx /= sl
            sny /= sl
            snz /= sl
            n0x = snx  # the unperturbed vertex normal (the clearcoat's, KHR_materials_clearcoat)
            n0y = sny
            n0z = snz
            snx, sny, snz = normal_mapped(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat,
                                          tex_pixels, tex_table, snx, sny, snz, u0, v0, u1, v1)
        else:
            snx = ngx
            sny = ngy
            snz = ngz
            n0x = ngx
            n0y = ngy
            n0z = ngz
        if snx * ngx + sny * ngy + snz * ngz < 0.0:
            snx = -snx
            sny = -sny
            snz = -snz
        wox = -dx
        woy = -dy
        woz = -dz
        if snx * wox + sny * woy + snz * woz <= 0.0:
            # interpolated normal faces away from the viewer (silhouette): use the true normal
            snx = ngx
            sny = ngy
            snz = ngz
        fw0 = 0.0
        fw1 = 0.0
        if mat_table[mat, SLOT_BASE_COLOUR] >= 0.0 or mat_table[mat, SLOT_METALLIC_ROUGHNESS] >= 0.0:
            fw0, fw1 = footprint_uv_widths(uvs, triangles, tri, area,
                                           cone_base + cone_spread * (path_t + seg_t + t),
                                           ngx * dx + ngy * dy + ngz * dz)
        bt = sample_slot_lod(mat_table, mat, SLOT_BASE_COLOUR, tex_pixels, tex_table, u0, v0, u1, v1, fw0, fw1)
        base_r = float(mat_table[mat, MAT_BASE_R]) * bt[0] * cr
        base_g = float(mat_table[mat, MAT_BASE_G]) * bt[1] * cg
        base_b = float(mat_table[mat, MAT_BASE_B]) * bt[2] * cb
        if depth == 0:
            alb_r = base_r
            alb_g = base_g
            alb_b = base_b
            nrm_x = snx
            nrm_y = sny
            nrm_z = snz
            coverage = 1.0
            depth_out = seg_t + t
        # emission reached by the path
        if front or double_sided:
            er, eg, eb = emission(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1)
            ce = coat_emission_scale(mat_table, mat, abs(ngx * dx + ngy * dy + ngz * dz))
            er *= ce
            eg *= ce
            eb *= ce
            if er > 0.0 or eg > 0.0 or eb > 0.0:
                w = 1.0
                if depth > 0 and not baseline and not prev_transmit:
                    cos_l = abs(ngx * dx + ngy * dy + ngz * dz)
                    pl = 0.0
                    if cos_l > 0.0 and area > 0.0:
                        d_l = seg_t + t  # from the vertex that sampled the direction
                        pl = p_emit_sel * tri_emit_prob[tri] * d_l * d_l / (area * cos_l)
                    w = power_heuristic(prev_pdf, pl)
                lr += beta_r * er * w
                lg += beta_g * eg * w
                lb += beta_b * eb * w
        if depth + 1 >= max_depth:
            break
        mr = sample_slot_lod(mat_table, mat, SLOT_METALLIC_ROUGHNESS, tex_pixels, tex_table, u0, v0, u1, v1, fw0, fw1)
        metallic = float(mat_table[mat, MAT_METALLIC]) * mr[2]
        roughness = float(mat_table[mat, MAT_ROUGHNESS]) * mr[1]
        (x_tr, x_cc, x_ccr, x_shr, x_shg, x_shb, x_shro, x_sp, x_spr, x_spg, x_spb, x_an, x_dx,
         x_dy) = extension_values(mat_table, mat, tex_pixels, tex_table, u0, v0, u1, v1)
        if x_an > 0.0:
            tx, ty, tz, bx, by, bz = anisotropy_frame(positions, uvs, tangents, triangles, tri, b1, b2,
                                                      mat_table, mat, snx, sny, snz, x_dx, x_dy)
        else:
            tx, ty, tz, bx, by, bz = onb_from_normal(snx, sny, snz)
        # the clearcoat's own normal in the local frame: clearcoatNormalTexture on the vertex
        # normal, else the vertex normal itself (not the base's normalTexture); (0, 0, 1) when
        # it is the shading normal anyway
        cnx = 0.0
        cny = 0.0
        cnz = 1.0
        if x_cc > 0.0 and (mat_table[mat, SLOT_NORMAL] >= 0.0 or mat_table[mat, SLOT_CLEARCOAT_NORMAL] >= 0.0):
            cwx, cwy, cwz = normal_mapped_slot(positions, uvs, tangents, triangles, tri, b1, b2, mat_table, mat,
                                               tex_pixels, tex_table, n0x, n0y, n0z, u0, v0, u1, v1, SLOT_CLEARCOAT_NORMAL,
                                               MAT_CLEARCOAT_NORMAL_SCALE)
            if cwx * ngx + cwy * ngy + cwz * ngz < 0.0:
                cwx = -cwx
                cwy = -cwy
                cwz = -cwz
            if cwx * wox + cwy * woy + cwz * woz <= 0.0:
                cwx = ngx
                cwy = ngy
                cwz = ngz
            cnx = cwx * tx + cwy * ty + cwz * tz
            cny = cwx * bx + cwy * by + cwz * bz
            cnz = cwx * snx + cwy * sny + cwz * snz
        bsdf = material_bsdf_values(mat_table, mat, base_r, base_g, base_b, metallic, roughness, front,
                                    x_tr, x_cc, x_ccr, x_shr, x_shg, x_shb, x_shro, x_sp, x_spr, x_spg, x_spb,
                                    x_an, cnx, cny, cnz)
        wlx = wox * tx + woy * ty + woz * tz
        wly = wox * bx + woy * by + woz * bz
        wlz = wox * snx + woy * sny + woz * snz
        ox_s = px + ngx * eps
        oy_s = py + ngy * eps
        oz_s = pz + ngz * eps
        dim = 4 + 16 * depth
        # the light point and the BSDF direction of the first vertex are stratified too
        # (Sobol' pairs 2 and 3); later vertices use the hashed dimensions
        if depth == 0:
            ulp0, ulp1 = sobol_pair(pixel, sample_index, 2, opts[OPT_SEED])
            ub0, ub1 = sobol_pair(pixel, sample_index, 3, opts[OPT_SEED])
        else:
            ulp0 = uniform_from_state(state, dim + 2)
            ulp1 = uniform_from_state(state, dim + 3)
            ub0 = uniform_from_state(state, dim + 5)
            ub1 = uniform_from_state(state, dim + 6)
        # next-event estimation
        if not baseline and sel_total > 0.0:
            entry = sample_discrete(sel_cdf, uniform_from_state(state, dim))
            p_sel = (sel_cdf[entry + 1] - sel_cdf[entry]) / sel_total
            ok = False
            delta = False
            wix = 0.0
            wiy = 0.0
            wiz = 1.0
            dist = math.inf
            li_r = 0.0
            li_g = 0.0
            li_b = 0.0
            pdf_light = 0.0
            if entry == 0:
                wix, wiy, wiz, pdf_env, li_r, li_g, li_b = env_sample(
                    env_pixels, env_cdf_rows, env_cdf_cols, env_params,
                    ulp0, ulp1)
                pdf_light = p_sel * pdf_env
                ok = pdf_light > 0.0
            elif entry == 1:
                ltri, lb1, lb2, qx, qy, qz, prob_tri, larea = sample_emissive_point(
                    positions, triangles, emit_tris, emit_cdf, uniform_from_state(state, dim + 1),
                    ulp0, ulp1)
                lmat = tri_material[ltri]
                lnx, lny, lnz = triangle_geometry(positions, triangles, ltri)[1:]
                # the shadow ray starts at the offset point, so measure from there
                wx = qx - ox_s
                wy = qy - oy_s
                wz = qz - oz_s
                d2 = wx * wx + wy * wy + wz * wz
                if d2 > 0.0 and larea > 0.0:
                    dist = math.sqrt(d2)
                    wix = wx / dist
                    wiy = wy / dist
                    wiz = wz / dist
                    cos_l = -(lnx * wix + lny * wiy + lnz * wiz)
                    if cos_l > 0.0 or (mat_table[lmat, MAT_DOUBLE_SIDED] > 0.5 and cos_l < 0.0):
                        la = surface_attributes(positions, normals, uvs, colours, triangles, ltri, lb1, lb2)
                        li_r, li_g, li_b = emission(mat_table, lmat, tex_pixels, tex_table, la[6], la[7], la[8], la[9])
                        ce = coat_emission_scale(mat_table, lmat, abs(cos_l))
                        li_r *= ce
                        li_g *= ce
                        li_b *= ce
                        lmode = int(mat_table[lmat, MAT_ALPHA_MODE])
                        if lmode != ALPHA_OPAQUE:
                            # a masked-away point is not there; a blended one emits alpha x Le on average
                            la_alpha = surface_alpha(mat_table, lmat, tex_pixels, tex_table, la[6], la[7], la[8],
                                                     la[9], la[13])
                            if lmode == ALPHA_MASK:
                                if la_alpha < mat_table[lmat, MAT_ALPHA_CUTOFF]:
                                    la_alpha = 0.0
                                else:
                                    la_alpha = 1.0
                            la_alpha = min(max(la_alpha, 0.0), 1.0)
                            li_r *= la_alpha
                            li_g *= la_alpha
                            li_b *= la_alpha
                        pdf_light = p_sel * prob_tri * d2 / (larea * abs(cos_l))
                        ok = pdf_light > 0.0
                        # stop the shadow ray just short of the emitter
                        dist = dist * (1.0 - 1e-6) - eps
            else:
                wix, wiy, wiz, dist, li_r, li_g, li_b = sample_punctual(punctual, entry - 2, ox_s, oy_s, oz_s)
                delta = True
                pdf_light = p_sel
                ok = pdf_light > 0.0 and (li_r > 0.0 or li_g > 0.0 or li_b > 0.0)
                if dist < math.inf:
                    dist = dist - eps
            if ok and (wix * ngx + wiy * ngy + wiz * ngz) > 0.0 and dist > 0.0:
                ilx = wix * tx + wiy * ty + wiz * tz
                ily = wix * bx + wiy * by + wiz * bz
                ilz = wix * snx + wiy * sny + wiz * snz
                # reflection side only (eval_f reads wi.z < 0 as transmission, 0 as nothing)
                fr, fg, fb = eval_f(bsdf, wlx, wly, wlz, ilx, ily, max(ilz, 0.0))
                if fr > 0.0 or fg > 0.0 or fb > 0.0:
                    vis = shadow_transmittance(nodes_f, nodes_i, tris_f, tri_ids, positions, normals, uvs,
                                               colours, triangles, tri_material, mat_table, tex_pixels,
                                               tex_table, has_alpha, ox_s, oy_s, oz_s, wix, wiy, wiz, dist, eps)
                    if vis > 0.0:
                        if delta:
                            k = ilz * vis / pdf_light
                        else:
                            w = power_heuristic(pdf_light, pdf_f(bsdf, wlx, wly, wlz, ilx, ily, ilz))
                            k = ilz * vis * w / pdf_light
                        lr += beta_r * fr * li_r * k
                        lg += beta_g * fg * li_g * k
                        lb += beta_b * fb * li_b * k
        # continue the path by sampling the BSDF
        ilx, ily, ilz, fr, fg, fb, pdf = sample_f(bsdf, wlx, wly, wlz, uniform_from_state(state, dim + 4),
                                                  ub0, ub1)
        if pdf <= 0.0:
            break
        nx_ = ilx * tx + ily * bx + ilz * snx
        ny_ = ilx * ty + ily * by + ilz * sny
        nz_ = ilx * tz + ily * bz + ilz * snz
        transmit = ilz < 0.0
        if (nx_ * ngx + ny_ * ngy + nz_ * ngz <= 0.0) != transmit:
            break
        k = abs(ilz) / pdf
        beta_r *= fr * k
        beta_g *= fg * k
        beta_b *= fb * k
        if beta_r <= 0.0 and beta_g <= 0.0 and beta_b <= 0.0:
            break
        prev_pdf = pdf
        depth += 1
        if depth >= 3:
            q = min(1.0, max(beta_r, max(beta_g, beta_b)))
            if q < 1.0:
                if uniform_from_state(state, dim + 7) >= q:
                    break
                beta_r /= q
                beta_g /= q
                beta_b /= q
        prev_transmit = transmit
        if transmit:
            n_transmit += 1
        else:
            clear = False
        if transmit:
            ox = px - ngx * eps
            oy = py - ngy * eps
            oz = pz - ngz * eps
        else:
            ox = ox_s
            oy = oy_s
            oz = oz_s
        path_t += seg_t + t
        seg_t = 0.0
        dx = nx_
        dy = ny_
        dz = nz_
    if not (math.isfinite(lr) and math.isfinite(lg) and math.isfinite(lb)):
        lr = 0.0
        lg = 0.0
        lb = 0.0
    if not (math.isfinite(see_r) and math.isfinite(see_g) and math.isfinite(see_b)):
        see_r = 0.0
        see_g = 0.0
        see_b = 0.0
    return lr, lg, lb, alb_r, alb_g, alb_b, nrm_x, nrm_y, nrm_z, coverage, depth_out, see_r, see_g, see_b


@njit(**PARALLEL)
def render_rows(positions, normals, uvs, tangents, colours, triangles, tri_material,
                nodes_f, nodes_i, tris_f, tri_ids,
                mat_table, tex_pixels, tex_table,
                punctual, emit_tris, emit_cdf, tri_emit_prob, sel_cdf,
                env_pixels, env_cdf_rows, env_cdf_cols, env_params,
                cam, opts, fopts,
                sum_rgb, sum_sq, sum_albedo, sum_normal, sum_alpha, sum_depth, n_depth, sum_see,
                rows, active):
    """Add samples ``opts[OPT_FIRST_SAMPLE] .. opts[OPT_END_SAMPLE]-1`` of the active pixels to the film sums.

    Sums are (H, W, 3) / (H, W) float64, updated in place.  ``rows`` (R,) int32 lists the
    image rows to render (each at most once, in any order: the caller shuffles them so the
    static prange chunks get similar work); ``active`` (H, W) uint8 is 1 for pixels that still
    take samples (adaptive sampling), 0 for converged ones.  Iteration ``i`` writes only row
    ``rows[i]``, samples in increasing order, so the result does not depend on the thread count.
    """
    width = opts[OPT_WIDTH]
    s0 = opts[OPT_FIRST_SAMPLE]
    s1 = opts[OPT_END_SAMPLE]
    seed = opts[OPT_SEED]
    for i in prange(rows.shape[0]):
        y = rows[i]
        for x in range(width):
            if active[y, x] == 0:
                continue
            pixel = y * width + x
            for s in range(s0, s1):
                state = sample_state(pixel, s, seed)
                r = trace_sample(positions, normals, uvs, tangents, colours, triangles, tri_material,
                                 nodes_f, nodes_i, tris_f, tri_ids,
                                 mat_table, tex_pixels, tex_table,
                                 punctual, emit_tris, emit_cdf, tri_emit_prob, sel_cdf,
                                 env_pixels, env_cdf_rows, env_cdf_cols, env_params,
                                 cam, opts, fopts, x, y, s, state)
                sum_rgb[y, x, 0] += r[0]
                sum_rgb[y, x, 1] += r[1]
                sum_rgb[y, x, 2] += r[2]
                sum_sq[y, x, 0] += r[0] * r[0]
                sum_sq[y, x, 1] += r[1] * r[1]
                sum_sq[y, x, 2] += r[2] * r[2]
                sum_albedo[y, x, 0] += r[3]
                sum_albedo[y, x, 1] += r[4]
                sum_albedo[y, x, 2] += r[5]
                sum_normal[y, x, 0] += r[6]
                sum_normal[y, x, 1] += r[7]
                sum_normal[y, x, 2] += r[8]
                sum_alpha[y, x] += r[9]
                if r[10] >= 0.0:
                    sum_depth[y, x] += r[10]
                    n_depth[y, x] += 1.0
                sum_see[y, x, 0] += r[11]
                sum_see[y, x, 1] += r[12]
                sum_see[y, x, 2] += r[13]
