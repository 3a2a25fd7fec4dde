"""Rendering: ``render(scene, settings)`` packs a scene for the path kernels and runs them.

This module is the only Python caller of ``path_kernels``.  It builds the BVH, the material
table and texture atlas, the light set and the packed camera, then runs the kernel in passes
("waves") of ``settings.wave_spp`` samples per pixel, calling ``progress(done, total)`` after
each, and resolves the film.

Adaptive sampling (``settings.noise_target``): after ``adaptive_min_spp`` samples and after
every wave from then on, every 8 x 8 tile whose relative standard error of the luminance
(from the film's own per-pixel variance) is at or below the target stops; the row kernel
skips its pixels.  Decisions depend only on the film sums, which are bit-identical on any
thread count, so the image is too.  Stopping on the estimate's own variance biases a pixel
slightly (tiles whose variance came out low by chance stop first); pooling 64 pixels keeps
that far below the noise (``tests/unit/transport/test_adaptive.py``).  See ``path_kernels`` for the estimator.
"""

from __future__ import annotations

import logging
import math
import time
from typing import NamedTuple

import numpy as np

from .. import _jit
from ..errors import RenderError
from ..geometry.bvh import build_bvh
from ..geometry.scene import Camera, Scene
from ..imaging.film import Film, FilmSums, resolve_film, tile_relative_error
from ..imaging.film_kernels import mean_sampled_luminance
from ..settings import RenderSettings
from . import layout_kernels as L
from . import path_kernels
from .camera import choose_camera, pack_camera
from .lights import build_lights, has_lights
from .materials import pack_materials

log = logging.getLogger(__name__)

#: Pixel reconstruction filter: a tent of this radius (pixels), importance-sampled (each
#: sample has weight 1 and lands in one pixel, so pixels stay independent).
FILTER_RADIUS_PX = 1.0


class PackedScene(NamedTuple):
    """A scene's arrays as every ray kernel takes them (contiguous, kernel dtypes).

    ``mesh`` order is the kernels' argument order: positions, normals, uvs, tangents, colours
    (float32), triangles, tri_material (int32); then the material table
    (``layout_kernels`` ``MAT_*`` columns) and the texture atlas (pixels, table).
    """

    positions: np.ndarray
    normals: np.ndarray
    uvs: np.ndarray
    tangents: np.ndarray
    colours: np.ndarray
    triangles: np.ndarray
    tri_material: np.ndarray
    mat_table: np.ndarray
    tex_pixels: np.ndarray
    tex_table: np.ndarray
    eps: float

    @property
    def has_alpha(self) -> bool:
        """Some material is not OPAQUE (MASK or BLEND): rays must look at alpha."""
        return bool(np.any(self.mat_table[:, L.MAT_ALPHA_MODE] != L.ALPHA_OPAQUE))

    @property
    def has_transmission(self) -> bool:
        """Some material transmits (KHR_materials_transmission > 0)."""
        return bool(np.any(self.mat_table[:, L.MAT_TRANSMISSION] > 0.0))


def pack_scene(scene: Scene) -> PackedScene:
    """Pack ``scene`` once for the kernels: mesh arrays, material table, atlas and ray offset.

    Raises
    ------
    RenderError
        Bad material values, or a triangle naming a material that does not exist.
    """
    mat_table, atlas = pack_materials(scene)
    n_mat = mat_table.shape[0]
    if scene.n_triangles and (scene.tri_material.min() < 0 or scene.tri_material.max() >= n_mat):
        raise RenderError(f"{scene.source}: a triangle refers to a material that does not exist ({n_mat} materials)")
    c = np.ascontiguousarray
    return PackedScene(
        positions=c(scene.positions, dtype=np.float32),
        normals=c(scene.normals, dtype=np.float32),
        uvs=c(scene.uvs, dtype=np.float32),
        tangents=c(scene.tangents, dtype=np.float32),
        colours=c(scene.colours, dtype=np.float32),
        triangles=c(scene.triangles, dtype=np.int32),
        tri_material=c(scene.tri_material, dtype=np.int32),
        mat_table=mat_table,
        tex_pixels=c(atlas.pixels, dtype=np.float32),
        tex_table=c(atlas.table, dtype=np.int32),
        eps=ray_epsilon(scene),
    )


def _env_arrays(env):
    if env is None:
        return (
            np.zeros((1, 1, 3), np.float32),
            np.array([0.0, 1.0]),
            np.array([[0.0, 1.0]]),
            np.array([0.0, 1.0, 0.0, 0.0]),
            False,
        )
    return (
        np.ascontiguousarray(env.pixels, dtype=np.float32),
        np.ascontiguousarray(env.cdf_rows, dtype=np.float64),
        np.ascontiguousarray(env.cdf_cols, dtype=np.float64),
        np.ascontiguousarray(env.params, dtype=np.float64),
        True,
    )


def needs_default_light(scene: Scene, env=None) -> bool:
    """True when nothing would light the scene: no punctual light, no emitter and no environment."""
    return env is None and not has_lights(scene)


def ray_epsilon(scene: Scene) -> float:
    """Scale-aware offset (metres) for rays leaving a surface.

    2e-6 of the scene's diagonal plus 8e-6 of its largest coordinate: about 70 float32 steps
    (positions and BVH rays are float32, 2**-23 relative) at that coordinate, so a ray never
    re-hits the surface it leaves, while the offset stays far below any feature size (an
    offset also moves the shading point off the surface; 1e-4 of a 40 m floor already biases
    the irradiance of a light 1 m above it by 0.6 %).
    """
    lo, hi = scene.bounds()
    extent = float(np.linalg.norm(hi - lo))
    big = float(max(np.abs(lo).max(initial=0.0), np.abs(hi).max(initial=0.0)))
    return max(2e-6 * extent, 1e-9) + 8e-6 * big


def _row_order(rows: np.ndarray) -> np.ndarray:
    """``rows`` in a fixed scrambled order (golden-ratio sequence), so the contiguous chunks
    numba's static prange schedule gives each thread mix product and backdrop rows."""
    if rows.size < 2:
        return np.ascontiguousarray(rows, dtype=np.int32)
    key = (np.arange(rows.size) * 0.6180339887498949) % 1.0
    return np.ascontiguousarray(rows[np.argsort(key, kind="stable")], dtype=np.int32)


def _still_noisy(sums, active: np.ndarray, settings: RenderSettings) -> np.ndarray:
    """Pixel mask (H, W) uint8 of the tiles that stay above ``settings.noise_target``.

    The test uses only the film sums (thread-invariant), so the stopping pattern, and with it
    the image, is the same on any thread count.  A stopped tile never restarts.
    """
    h, w = active.shape
    tile = settings.noise_tile_px
    floor = max(settings.noise_floor * mean_sampled_luminance(sums.rgb, sums.n_pixel), 1e-12)
    err = tile_relative_error(sums, tile, floor)
    noisy = np.repeat(np.repeat(err > settings.noise_target, tile, axis=0), tile, axis=1)[:h, :w]
    return (active.astype(bool) & noisy).astype(np.uint8)


def ray_cone(cam: np.ndarray, spp: int) -> tuple[float, float]:
    """(spread in radians per unit length, base width) of the camera's per-sample ray cone.

    One pixel subtends 2 tan(yfov / 2) / height radians at the image centre (perspective) or is
    2 ymag / height wide (orthographic); the cone is that footprint times max(1/8, 1/sqrt(spp)),
    since the pixel's samples already spread over it (``texture_kernels``).
    """
    height = float(cam[22])
    shrink = max(0.125, 1.0 / math.sqrt(max(int(spp), 1)))
    if int(cam[0]) == 1:  # orthographic
        return 0.0, 2.0 * float(cam[17]) / height * shrink
    return 2.0 * float(cam[17]) / height * shrink, 0.0


def render(
    scene: Scene,
    settings: RenderSettings,
    *,
    env=None,
    camera: Camera | None = None,
    progress=None,
    bvh=None,
    sample_mask=None,
    see_through_material: int | None = None,
    see_through_radiance: float = 0.0,
) -> Film:
    """Render ``scene`` by path tracing.

    Parameters
    ----------
    scene : Scene
        World-space triangles, materials, textures, cameras and punctual lights.
    settings : RenderSettings
        Size, samples, seed, camera choice, lens, mode, threads.
    env : EnvMap, optional
        Environment light (``transport.environment.make_environment``); None: black.
    camera : Camera, optional
        Overrides ``settings.camera_name`` and the scene's cameras.
    progress : callable, optional
        ``progress(done_spp, total_spp)``, called after each pass (with adaptive sampling
        ``done_spp`` is the count of the pixels still sampling; the last call has
        ``done_spp == total_spp``).
    bvh : BVH, optional
        A prebuilt ``build_bvh(scene.positions, scene.triangles)`` to reuse.
    sample_mask : (H, W) bool ndarray, optional
        Pixels to sample; the others take no samples at all (black radiance, zero albedo and
        alpha, infinite variance and depth, ``spp_map`` 0).  The batch passes the product's
        coverage, dilated, when the background replaces everything else.
    see_through_material : int, optional
        Index (in ``scene.materials``) of the studio floor: camera paths that reach it through
        transmissions only stop there and add their throughput to ``film.see_through`` instead
        of shading it (``path_kernels`` see-through mode; the batch sets it on the white and
        transparent backgrounds, whose compositor puts its own background behind the glass).
    see_through_radiance : float
        Radiance such a path adds to the film (the scene-linear value of paper white,
        2^-exposure, so the pixel renders as the white background seen through the glass).

    Returns
    -------
    Film
        Radiance (linear, scene-referred) with albedo, normal, alpha, depth and variance passes.
        With ``settings.noise_target`` (adaptive sampling) ``film.spp_map`` holds each pixel's
        sample count and ``film.spp`` the largest.

    Raises
    ------
    RenderError
        Unknown camera name, bad material values, bad settings.
    """
    if not isinstance(settings, RenderSettings):
        raise RenderError(f"render: settings must be a RenderSettings, got {type(settings).__name__}")
    _jit.set_threads(settings.threads)
    started = time.perf_counter()
    width, height = settings.width, settings.height
    if camera is None:
        camera = choose_camera(scene, settings.camera_name, width / height)
    lo, hi = scene.bounds()
    cam = pack_camera(
        camera,
        width,
        height,
        aperture_f_number=settings.aperture_f_number,
        focus_distance_m=settings.focus_distance_m,
        focus_point=0.5 * (lo + hi),
    )
    packed = pack_scene(scene)
    lights = build_lights(scene, packed.mat_table, env)
    env_pixels, env_rows, env_cols, env_params, has_env = _env_arrays(env)
    if bvh is None:
        bvh = build_bvh(scene.positions, scene.triangles)
    has_alpha = packed.has_alpha
    sums = FilmSums.zeros(width, height)
    cone_spread, cone_base = ray_cone(cam, settings.spp)
    fopts = np.zeros(L.N_FOPTS, np.float64)
    fopts[L.FOPT_EPS] = packed.eps
    fopts[L.FOPT_FILTER_RADIUS] = FILTER_RADIUS_PX
    fopts[L.FOPT_CONE_SPREAD] = cone_spread
    fopts[L.FOPT_CONE_BASE] = cone_base
    fopts[L.FOPT_SEE_RADIANCE] = float(see_through_radiance)
    total = settings.spp
    adaptive = settings.noise_target is not None and total > settings.adaptive_min_spp
    if sample_mask is None:
        active = np.ones((height, width), np.uint8)
        rows = _row_order(np.arange(height, dtype=np.int32))
    else:
        mask = np.asarray(sample_mask, dtype=bool)
        if mask.shape != (height, width):
            raise RenderError(f"render: sample_mask has shape {mask.shape}, the image is {(height, width)}")
        active = mask.astype(np.uint8)
        rows = _row_order(np.flatnonzero(mask.any(axis=1)).astype(np.int32))
    per_pixel = adaptive or sample_mask is not None
    if per_pixel:
        sums.n_pixel = np.zeros((height, width), np.float64)
    done = 0
    while done < total:
        end = min(total, done + settings.wave_spp)
        if adaptive and done < settings.adaptive_min_spp:
            end = min(end, settings.adaptive_min_spp)
        elif adaptive:
            # waves of about 1/4 of the count so far (2 .. wave_spp): a tile overshoots its
            # target by at most ~25 % of its samples
            end = min(total, done + max(2, min(settings.wave_spp, done // 4)))
        opts = np.zeros(L.N_OPTS, np.int64)
        opts[L.OPT_WIDTH] = width
        opts[L.OPT_HEIGHT] = height
        opts[L.OPT_FIRST_SAMPLE] = done
        opts[L.OPT_END_SAMPLE] = end
        opts[L.OPT_SEED] = settings.seed
        opts[L.OPT_MAX_DEPTH] = settings.max_depth
        opts[L.OPT_MODE] = L.MODE_BASELINE if settings.mode == "baseline" else L.MODE_FULL
        opts[L.OPT_HAS_ENV] = 1 if has_env else 0
        opts[L.OPT_HAS_ALPHA] = 1 if has_alpha else 0
        opts[L.OPT_SEE_MATERIAL] = -1 if see_through_material is None else int(see_through_material)
        path_kernels.render_rows(
            packed.positions, packed.normals, packed.uvs, packed.tangents, packed.colours, packed.triangles,
            packed.tri_material, bvh.nodes_f, bvh.nodes_i, bvh.tris_f, bvh.tri_ids,
            packed.mat_table, packed.tex_pixels, packed.tex_table,
            lights.punctual, lights.emit_tris, lights.emit_cdf, lights.tri_emit_prob, lights.sel_cdf,
            env_pixels, env_rows, env_cols, env_params,
            cam, opts, fopts,
            sums.rgb, sums.rgb_sq, sums.albedo, sums.normal, sums.alpha, sums.depth, sums.depth_n, sums.see,
            rows, active,
        )
        if per_pixel:
            sums.n_pixel += float(end - done) * active
        done = end
        sums.n = done
        if adaptive and done >= settings.adaptive_min_spp and done < total:
            active = _still_noisy(sums, active, settings)
            rows = _row_order(np.flatnonzero(active.any(axis=1)).astype(np.int32))
            if rows.size == 0:
                break
        if progress is not None:
            progress(done, total)
    if done < total and progress is not None:
        progress(total, total)  # every tile reached the noise target early
    film = resolve_film(sums)
    log.debug("rendered %dx%d at %d spp (mean %.1f) in %.2f s", width, height, film.spp, film.mean_spp,
              time.perf_counter() - started)
    return film
