"""Lights: packs emissive triangles, KHR_lights_punctual lights and the environment for NEE.

Light choice (documented rule): one light sample per surface vertex.  The candidates are

* entry 0, the environment (if any),
* entry 1, all emissive triangles as one group (a triangle inside it is then chosen by its
  power, area x luminance of emissiveFactor x strength x mean emissive texture, x2 when
  double-sided),
* entries 2.., each punctual light,

each chosen with probability proportional to its estimated power:

* emissive triangle: pi x area x luminance(Le) per emitting side;
* point light: 4 pi I; spot light: 2 pi (1 - cos outer) I; directional: E pi R^2;
* environment: pi^2 R^2 x mean luminance (the flux a uniform environment of that radiance
  sends through the cross-section of the scene's bounding sphere),

with R the radius of the scene's bounding sphere and luminances by Rec.709 weights.  Any
rule with non-zero probability wherever a light contributes is unbiased; this one puts
samples where the light is.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from ..geometry.scene import Scene

LUMINANCE_WEIGHTS = np.array([0.2126, 0.7152, 0.0722])  # IEC 61966-2-1 (Y row of the sRGB matrix)


class LightSet(NamedTuple):
    """Packed lights (layouts in ``light_kernels``).

    Attributes
    ----------
    punctual : (L, 16) float64 ndarray
    emit_tris : (E,) int32 ndarray
        Emissive triangle ids (at least one entry; -1 when there is none).
    emit_cdf : (E+1,) float64 ndarray
        Power CDF over ``emit_tris``.
    tri_emit_prob : (T,) float64 ndarray
        Probability of choosing each triangle inside the emissive group (0 if not emissive).
    sel_cdf : (2+L+1,) float64 ndarray
        CDF over the light entries [environment, emissive group, punctual 0 ..].
    powers : (2+L,) float64 ndarray
        The estimated powers behind ``sel_cdf``.
    """

    punctual: np.ndarray
    emit_tris: np.ndarray
    emit_cdf: np.ndarray
    tri_emit_prob: np.ndarray
    sel_cdf: np.ndarray
    powers: np.ndarray


def _luminance(rgb) -> float:
    return float(np.dot(np.asarray(rgb, np.float64)[:3], LUMINANCE_WEIGHTS))


def pack_punctual(scene: Scene) -> np.ndarray:
    """The ``(L, 16) float64`` punctual light table (at least one zero row)."""
    rows = []
    for light in scene.lights:
        row = np.zeros(16, np.float64)
        kind = {"point": 0, "spot": 1, "directional": 2}.get(light.kind)
        if kind is None:
            from ..errors import RenderError

            raise RenderError(
                f"{scene.source}: light {light.name!r} has kind {light.kind!r} (accepted: point, spot, directional)"
            )
        row[0] = kind
        row[1:4] = light.position
        d = np.asarray(light.direction, np.float64)
        n = np.linalg.norm(d)
        row[4:7] = d / n if n > 0 else (0.0, 0.0, -1.0)
        row[7:10] = np.asarray(light.colour_linear, np.float64) * float(light.intensity)
        row[10] = light.range if math.isfinite(light.range) and light.range > 0 else 0.0
        cos_outer = math.cos(light.outer_cone_rad)
        cos_inner = math.cos(light.inner_cone_rad)
        scale = 1.0 / max(0.001, cos_inner - cos_outer)
        row[11] = cos_outer
        row[12] = scale
        row[13] = -cos_outer * scale
        rows.append(row)
    if not rows:
        return np.zeros((1, 16), np.float64)
    return np.ascontiguousarray(np.stack(rows))


def environment_mean_luminance(env) -> float:
    """Mean luminance over the sphere of an equirectangular environment (sin theta weights)."""
    if env is None:
        return 0.0
    px = np.asarray(env.pixels, np.float64)
    h = px.shape[0]
    lum = px[..., :3] @ LUMINANCE_WEIGHTS
    if h == 1 and px.shape[1] == 1:
        return float(lum[0, 0])
    theta = (np.arange(h) + 0.5) / h * np.pi
    w = np.sin(theta)[:, None] * np.ones_like(lum)
    return float((lum * w).sum() / w.sum())


def triangle_emission(scene: Scene, mat_table: np.ndarray) -> np.ndarray:
    """Per-triangle emitted luminance estimate ``(T,) float64`` (factor x strength x mean texture)."""
    n_mat = mat_table.shape[0]
    lum_mat = np.zeros(n_mat)
    for i in range(n_mat):
        lum = _luminance(mat_table[i, 7:10])
        if lum > 0 and i < len(scene.materials) and scene.materials[i].emissive_texture is not None:
            ref = scene.materials[i].emissive_texture
            if 0 <= ref.index < len(scene.textures):
                from ..imaging.colour import srgb_decode

                tex = np.asarray(scene.textures[ref.index].pixels, np.float64)[..., :3]
                mean_rgb = srgb_decode(tex).reshape(-1, 3).mean(axis=0)
                lum = _luminance(np.asarray(mat_table[i, 7:10], np.float64) * mean_rgb)
        lum_mat[i] = lum
    return lum_mat[scene.tri_material] if scene.n_triangles else np.zeros(0)


def build_lights(scene: Scene, mat_table: np.ndarray, env=None) -> LightSet:
    """Gather every light of ``scene`` (and ``env``) into a :class:`LightSet`."""
    lo, hi = scene.bounds()
    radius = max(0.5 * float(np.linalg.norm(hi - lo)), 1e-3)
    n_tris = scene.n_triangles
    tri_emit_prob = np.zeros(max(n_tris, 1), np.float64)
    emit_power = 0.0
    emit_tris = np.full(1, -1, np.int32)
    emit_cdf = np.zeros(2, np.float64)
    if n_tris:
        lum = triangle_emission(scene, mat_table)
        p = scene.positions.astype(np.float64)
        t = scene.triangles
        area = 0.5 * np.linalg.norm(np.cross(p[t[:, 1]] - p[t[:, 0]], p[t[:, 2]] - p[t[:, 0]]), axis=1)
        sides = np.where(mat_table[scene.tri_material, 12] > 0.5, 2.0, 1.0)
        power = np.pi * area * lum * sides
        ids = np.nonzero(power > 0)[0]
        if ids.size:
            emit_tris = ids.astype(np.int32)
            emit_cdf = np.concatenate([[0.0], np.cumsum(power[ids])])
            emit_power = float(emit_cdf[-1])
            tri_emit_prob[ids] = power[ids] / emit_power
    punctual = pack_punctual(scene)
    powers = [0.0, emit_power]
    env_lum = environment_mean_luminance(env)
    powers[0] = np.pi**2 * radius**2 * env_lum if env is not None else 0.0
    for light in scene.lights:
        i_lum = _luminance(np.asarray(light.colour_linear) * light.intensity)
        if light.kind == "point":
            powers.append(4 * np.pi * i_lum)
        elif light.kind == "spot":
            powers.append(2 * np.pi * (1 - math.cos(light.outer_cone_rad)) * i_lum)
        else:
            powers.append(np.pi * radius**2 * i_lum)
    if not scene.lights:
        powers.append(0.0)  # the zero row of the punctual table is never chosen
    powers = np.asarray(powers, np.float64)
    sel_cdf = np.concatenate([[0.0], np.cumsum(powers)])
    return LightSet(
        punctual=punctual,
        emit_tris=np.ascontiguousarray(emit_tris),
        emit_cdf=np.ascontiguousarray(emit_cdf),
        tri_emit_prob=tri_emit_prob,
        sel_cdf=sel_cdf,
        powers=powers,
    )


def has_lights(scene: Scene, mat_table: np.ndarray | None = None) -> bool:
    """True when the scene has a punctual light or an emissive material on some triangle."""
    if scene.lights:
        return True
    used = set(np.unique(scene.tri_material).tolist()) if scene.n_triangles else set()
    for i, m in enumerate(scene.materials):
        if i in used and max(m.emissive_factor) * m.emissive_strength > 0:
            return True
    return False
