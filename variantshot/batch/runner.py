"""Rendering one shot, and the batch loop that renders a catalog's out-of-date shots.

:func:`render_shot` is what a worker runs: glTF bytes + rig + quality + output spec in,
encoded image bytes + QA + metrics out.  It writes nothing, so it runs the same in this
process, in a worker process or on a cluster node.

:func:`render_batch` is the client: it takes the output folder's lock, plans the shots, skips
those whose key matches an intact manifest entry, hands the rest to an executor, and for each
result writes the images atomically and *then* the manifest (atomically), so a run killed at
any moment loses at most the shots in flight and never leaves half a file.

One shot, step by step
----------------------
1. load the variant's glTF scene; the camera is the scene's camera node named after the angle;
2. build the studio rig around the product's bounds, turned to face that camera;
3. render product + rig (the shot), the product alone at one bounce (its coverage α, since in
   the studio every camera ray hits something), and for ``white`` / ``transparent`` the shadow
   it casts on the sweep (:func:`shadow_map`, ray cast from the rig's lights);
4. composite the background (:mod:`variantshot.imaging.background`) with the rig's calibrated
   exposure (:func:`calibrate_exposure`), encode every format and size;
5. run QA on the primary image (``review.qa.run_qa``), with the variant colour's swatch rendered
   in the same rig at the same exposure (``review.swatch``) for the colour check.
"""

from __future__ import annotations

import dataclasses
import functools
import io
import logging
import math
import time
import traceback
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import InputError, RenderError, VariantshotError
from ..geometry.rig import RigSpec, build_rig, load_rig
from .quality import OutputSpec, Quality

__all__ = [
    "ShotTask",
    "ImageOut",
    "ShotResult",
    "render_shot",
    "calibrate_exposure",
    "warmup",
    "image_paths",
]

log = logging.getLogger(__name__)

#: Linear value a mid-grey card (albedo 0.18) renders to after exposure: 0.18, which sRGB
#: encodes to 117.65 -> code 118 (IEC 61966-2-1; REFERENCES §4 middle grey).
MID_GREY = 0.18


@dataclass(frozen=True)
class ShotTask:
    """Everything a worker needs to render one shot (picklable, no file-system access needed
    when the scene embeds its buffers).

    Parameters
    ----------
    shot_id : str
    scene_bytes : bytes
        The variant's glTF (JSON or GLB).
    scene_name : str
        Its file name, for messages.
    base_dir : str or None
        Folder relative buffer/image URIs resolve against (local runs).
    angle : str
        The camera node's name.
    rig : RigSpec
    quality : Quality
    output : OutputSpec
    exposure_ev : float
        From :func:`calibrate_exposure` for this rig.
    colour_lab_d65 : (3,) tuple or None
        The catalog colour, for the QA colour report.
    threads : int or None
    """

    shot_id: str
    scene_bytes: bytes
    scene_name: str
    base_dir: str | None
    angle: str
    rig: RigSpec
    quality: Quality
    output: OutputSpec
    exposure_ev: float
    colour_lab_d65: tuple | None = None
    threads: int | None = None


@dataclass(frozen=True)
class ImageOut:
    """One encoded file of a shot: ``path`` is relative to the output folder."""

    path: str
    format: str
    width: int
    height: int
    data: bytes


@dataclass
class ShotResult:
    """What a worker sends back: bytes and numbers, never a file."""

    shot_id: str
    ok: bool
    images: list = field(default_factory=list)
    error: str | None = None
    qa: dict | None = None
    seconds: float = 0.0
    metrics: dict = field(default_factory=dict)


def image_paths(shot_id: str, output: OutputSpec, long_side_px: int) -> list[tuple[str, str, int | None]]:
    """``(relative path, format, size or None)`` of every file a shot becomes; primary first."""
    out = [(f"shots/{shot_id}.{fmt}", fmt, None) for fmt in output.formats]
    for size in output.sizes:
        if size >= long_side_px:
            continue
        out += [(f"shots/{shot_id}@{size}.{fmt}", fmt, size) for fmt in output.formats]
    return out


def _render_settings(quality: Quality, threads=None, **changes):
    from ..settings import RenderSettings

    kw = dict(width=quality.width, height=quality.height, spp=quality.spp, seed=quality.seed,
              max_depth=quality.max_depth, threads=threads)
    if quality.adaptive:  # the preset's noise target stops converged tiles; spp is the cap
        from .quality import ADAPTIVE_TARGET_FRACTION

        kw.update(noise_target=ADAPTIVE_TARGET_FRACTION * quality.noise_target, adaptive_min_spp=quality.min_spp)
    kw.update(changes)
    return RenderSettings(**kw)


def _environment(rig):
    from ..transport.environment import make_environment

    return make_environment(tuple(rig.environment_linear), rotation_rad=rig.yaw_rad)


# --------------------------------------------------------------------------- exposure

_CARD_SPP = 256
_CARD_PX = 24


@functools.lru_cache(maxsize=64)
def _calibrate_cached(digest: str, spec: RigSpec) -> float:
    from ..geometry.scene import Camera, Material, make_scene, merge_scenes
    from ..transport.integrator import render

    # A product whose bounding box is a unit cube; the card is its camera-facing mid-plane.
    lo, hi = np.array([-0.5, 0.0, -0.5]), np.array([0.5, 1.0, 0.5])
    card = make_scene(
        [[-0.5, 0.0, 0.0], [0.5, 0.0, 0.0], [0.5, 1.0, 0.0], [-0.5, 1.0, 0.0]],
        [[0, 1, 2], [0, 2, 3]],
        normals=[[0.0, 0.0, 1.0]] * 4,
        # ior 1.0: f0 = 0, no specular lobe picking up the soft boxes (glTF Appendix B,
        # KHR_materials_ior); the same card as review.swatch, so swatches and shots agree
        materials=[Material(name="grey card 18%", base_colour_factor=(MID_GREY, MID_GREY, MID_GREY, 1.0),
                            metallic_factor=0.0, roughness_factor=1.0,
                            extensions={"KHR_materials_ior": {"ior": 1.0}})],
        source="calibration card",
    )
    m = np.eye(4)
    m[:3, 3] = (0.0, 0.5, 6.0)
    cam = Camera(name="calibration", kind="perspective", world_from_camera=m, yfov_rad=0.05)
    rig = build_rig(spec, (lo, hi), camera=cam)
    scene = merge_scenes(card, rig.scene, source="calibration")
    settings = _render_settings(Quality("calibration", _CARD_PX, _CARD_SPP, 1.0, max_depth=8))
    film = render(scene, settings, env=_environment(rig), camera=cam)
    y = film.radiance @ np.array([0.2126, 0.7152, 0.0722])
    measured = float(np.mean(y))
    if not measured > 0:
        raise RenderError(f"rig {spec.name!r}: the calibration card receives no light")
    return math.log2(MID_GREY / measured)


def calibrate_exposure(rig: RigSpec | str) -> float:
    """Exposure (stops) that renders an 18 % grey card facing the camera as linear 0.18 (sRGB 118).

    The card stands at the product's centre in the rig built for a unit-cube product, camera in
    front; a small render (24 x 24 px, 256 spp, narrow field of view so only the card is seen)
    measures its luminance ``Y`` with every light path of the rig, sweep bounce light included
    (a Lambertian card of albedo 0.18 under irradiance E has Y = 0.18 E / π), and the exposure
    is ``log2(0.18 / Y)``.  Rig
    lengths scale with the product, so the result holds for every product; it is cached per rig
    content (and deterministic: fixed seed).

    Parameters
    ----------
    rig : RigSpec or str

    Returns
    -------
    exposure_ev : float
    """
    spec = load_rig(rig)
    return _calibrate_cached(spec.digest() + __version__, spec)


def warmup() -> None:
    """Render a 4 x 4 image once so numba's compile / cache load stays out of shot timings."""
    from ..geometry.scene import Material, make_scene
    from ..transport.environment import make_environment
    from ..transport.integrator import render

    scene = make_scene([[-1, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]],
                       materials=[Material(metallic_factor=0.0)])
    render(scene, _render_settings(Quality("warmup", 4, 1, 1.0, max_depth=2)), env=make_environment(1.0))


# --------------------------------------------------------------------------- one shot


def _find_camera(scene, angle: str):
    for cam in scene.cameras:
        if cam.name == angle:
            return cam
    from ..catalog.angles import ANGLE_PRESETS, DEFAULT_YFOV_RAD, frame_angle
    from ..geometry.scene import Camera

    if angle in ANGLE_PRESETS and scene.n_triangles:
        m = frame_angle(scene.positions[np.unique(scene.triangles)], angle)
        return Camera(name=angle, kind="perspective", world_from_camera=m, yfov_rad=DEFAULT_YFOV_RAD, aspect_ratio=1.0)
    known = ", ".join(repr(c.name) for c in scene.cameras) or "none"
    raise RenderError(f"{scene.source}: no camera named {angle!r} (cameras in the scene: {known})")


def _resize_linear(rgb: np.ndarray, alpha, long_side: int):
    """Area-filter downsample of linear values (no ringing, so exact white stays exactly 1)."""
    from PIL import Image

    h, w = rgb.shape[:2]
    scale = long_side / max(h, w)
    nw, nh = max(1, round(w * scale)), max(1, round(h * scale))
    chans = [rgb[..., k] for k in range(3)] + ([alpha] if alpha is not None else [])
    out = []
    for c in chans:
        im = Image.fromarray(np.ascontiguousarray(c, dtype=np.float32), mode="F")
        out.append(np.asarray(im.resize((nw, nh), Image.BOX), dtype=np.float64))
    res = np.stack(out[:3], axis=-1)
    res = np.where(np.abs(res - 1.0) < 1e-6, 1.0, res)  # float32 round-off on exact white
    a = out[3] if alpha is not None else None
    if a is not None:
        a = np.where(a < 1e-6, 0.0, np.where(a > 1 - 1e-6, 1.0, a))
    return res, a


def shadow_blur_radius(width: int, height: int) -> int:
    """Radius (pixels) of the box blur over the shadow map: 1 % of the longer side, at least 1."""
    return max(1, int(round(0.01 * max(width, height))))


def shadow_step(width: int, height: int) -> int:
    """Grid step (pixels) the shadow map is sampled on: half the blur radius.

    The map is box-blurred over ``2 r + 1`` pixels; bilinear samples ``r / 2`` apart carry every
    detail that blur lets through (``tests/unit/batch/test_shadow_map.py`` compares it with a
    step of 2 after the blur).
    """
    return max(1, shadow_blur_radius(width, height) // 2)


def _linear_weights(n_out: int, centres: np.ndarray) -> np.ndarray:
    """(n_out, len(centres)) matrix interpolating samples at pixel positions ``centres``
    (increasing) linearly to every pixel centre ``x + 0.5``, clamped at both ends."""
    x = np.arange(n_out) + 0.5
    m = len(centres)
    w = np.zeros((n_out, m))
    if m == 1:
        w[:, 0] = 1.0
        return w
    j = np.clip(np.searchsorted(centres, x, side="right") - 1, 0, m - 2)
    f = np.clip((x - centres[j]) / (centres[j + 1] - centres[j]), 0.0, 1.0)
    w[np.arange(n_out), j] = 1.0 - f
    w[np.arange(n_out), j + 1] += f
    return w


def shadow_map(rig, camera, width: int, height: int, product_bvh, *, step: int | None = None, seed: int = 0,
               strata: int | None = None, product=None, ratio_out: dict | None = None) -> np.ndarray:
    """The product's snapped shadow on the sweep as seen by ``camera``, ``(H, W) float64``.

    Camera rays through the centres of ``step`` x ``step`` pixel blocks (default
    :func:`shadow_step`, half the blur radius) find the sweep behind every pixel (the product
    left out); :func:`~variantshot.geometry.rig.direct_light_ratio` gives the share of the rig's
    direct light the product lets through there; the ratio is interpolated bilinearly to every
    pixel, box-blurred over 1 % of the longer side (:func:`shadow_blur_radius`) to hide the
    jitter, and snapped with the rig's ``white_boost_ev``
    (:func:`~variantshot.imaging.background.snap_shadow`).  Pixels that see a soft box or the
    environment are unshadowed.  ``product`` (the product's Scene, the one ``product_bvh``
    was built from) lets glass and other transmissive or alpha surfaces pass the light they
    transmit (see ``direct_light_ratio``'s ``occluder``); without it the product is opaque.
    ``ratio_out``, when given, receives the blurred ratio before
    snapping under ``"ratio"``.
    """
    from ..geometry.bvh import build_bvh, intersect
    from ..geometry.rig import direct_light_ratio
    from ..imaging.background import box_blur, snap_shadow
    from ..transport.camera import generate_rays, pack_camera

    if step is None:
        step = shadow_step(width, height)
    step = max(1, int(step))
    w2, h2 = -(-width // step), -(-height // step)
    xs = np.minimum((np.arange(w2) + 0.5) * step, width - 0.5)
    ys = np.minimum((np.arange(h2) + 0.5) * step, height - 0.5)
    gx, gy = np.meshgrid(xs, ys)
    cam = pack_camera(camera, width, height)
    o, d = generate_rays(cam, gx.ravel(), gy.ravel())
    scene = rig.scene
    hits = intersect(build_bvh(scene.positions, scene.triangles), o, d)
    tri = hits.tri
    on_sweep = tri >= 0
    on_sweep[on_sweep] = scene.tri_material[tri[on_sweep]] == rig.floor_material
    if on_sweep.any():
        pts = np.zeros((o.shape[0], 3))
        nrm = np.zeros((o.shape[0], 3))
        nrm[:, 1] = 1.0
        t = hits.t[on_sweep].astype(np.float64)
        pts[on_sweep] = o[on_sweep] + t[:, None] * d[on_sweep]
        tv = scene.triangles[tri[on_sweep]]
        b1 = hits.b1[on_sweep].astype(np.float64)[:, None]
        b2 = hits.b2[on_sweep].astype(np.float64)[:, None]
        nv = scene.normals.astype(np.float64)
        nrm[on_sweep] = (1 - b1 - b2) * nv[tv[:, 0]] + b1 * nv[tv[:, 1]] + b2 * nv[tv[:, 2]]
        k = strata if strata is not None else (4 if step <= 2 else 8)
        # each node's samples spread over its step x step cell: no aliasing of hard edges
        low = direct_light_ratio(rig, pts.reshape(h2, w2, 3), nrm.reshape(h2, w2, 3), product_bvh,
                                 box_samples=k, env_samples=k, seed=seed, valid=on_sweep.reshape(h2, w2),
                                 spread=step > 1, occluder=product)
    else:
        low = np.ones((h2, w2))
    if step > 1:
        # separable linear interpolation from the sample positions (the last ones clamped to
        # the image) to every pixel centre
        full = _linear_weights(height, ys) @ low @ _linear_weights(width, xs).T
    else:
        full = low
    full = box_blur(full, shadow_blur_radius(width, height))
    if ratio_out is not None:
        ratio_out["ratio"] = full
    return snap_shadow(full, rig.spec.white_boost_ev)


def render_shot(task: ShotTask) -> ShotResult:
    """Render one shot into encoded image bytes, QA and metrics; never raises for a bad shot.

    Returns
    -------
    ShotResult
        ``ok=False`` with ``error`` ("where: what") when the scene cannot be loaded, has no such
        camera, or the render fails; the batch records it and goes on.
    """
    started = time.perf_counter()
    try:
        result = _render_shot(task)
    except VariantshotError as exc:
        text = exc.format() if isinstance(exc, InputError) else str(exc)
        return ShotResult(task.shot_id, False, error=text, seconds=time.perf_counter() - started)
    except Exception as exc:  # noqa: BLE001 - a crash in one shot must not end the batch
        log.debug("shot %s crashed:\n%s", task.shot_id, traceback.format_exc())
        return ShotResult(task.shot_id, False, error=f"{type(exc).__name__}: {exc}", seconds=time.perf_counter() - started)
    result.seconds = time.perf_counter() - started
    return result


def _render_shot(task: ShotTask) -> ShotResult:
    from ..geometry.bvh import build_bvh
    from ..geometry.gltf import load_gltf_bytes
    from ..geometry.scene import merge_scenes
    from ..imaging.background import composite
    from ..imaging.files import encode_image
    from ..transport.integrator import render

    t0 = time.perf_counter()
    product = load_gltf_bytes(task.scene_bytes, task.scene_name, base_dir=task.base_dir)
    if product.n_triangles == 0:
        raise RenderError(f"{task.scene_name}: the scene has no triangles to render")
    camera = _find_camera(product, task.angle)
    lo, hi = product.bounds()
    rig = build_rig(task.rig, (lo, hi), camera=camera)
    env = _environment(rig)
    product = dataclasses.replace(product, cameras=[], lights=list(product.lights))
    shot_scene = merge_scenes(product, rig.scene, source=task.scene_name)
    settings = _render_settings(task.quality, task.threads)
    bg = task.output.background
    t_load = time.perf_counter()
    product_bvh = build_bvh(product.positions, product.triangles)
    # the product's coverage: compositing needs it, and QA frames the product by it on any background
    cov_settings = dataclasses.replace(settings, spp=max(8, min(settings.spp // 4, 32)), max_depth=1,
                                       noise_target=None)  # coverage: fixed spp
    coverage = _coverage(product, cov_settings, camera, product_bvh)
    # on white / transparent the composite uses the render only where coverage > 0: sample
    # just those pixels (and a margin for the denoiser's neighbourhood)
    sample_mask = _sample_mask(coverage) if bg in ("white", "transparent") else None
    # white / transparent put their own background behind glass: paths that reach the sweep
    # through transmissive surfaces only go to the film's see-through channel (background.py)
    see_mat = len(product.materials) + rig.floor_material if bg in ("white", "transparent") else None
    film = render(shot_scene, settings, env=env, camera=camera, sample_mask=sample_mask,
                  see_through_material=see_mat, see_through_radiance=2.0 ** -task.exposure_ev)
    if bg in ("white", "transparent"):
        shadow = shadow_map(rig, camera, settings.width, settings.height, product_bvh, seed=task.quality.seed,
                            product=product)
    else:
        shadow = None
    t_render = time.perf_counter()
    radiance = film.radiance
    if task.quality.denoise:
        radiance = _maybe_denoise(film, task.threads, sample_mask)
    see = film.see_through
    if see is not None and task.quality.denoise:
        see = _denoise_see_through(film, task.threads)
    gain = 2.0 ** task.exposure_ev
    rgb, alpha = composite(bg, radiance, coverage, gain, shadow, see)

    images = []
    for rel, fmt, size in image_paths(task.shot_id, task.output, task.quality.long_side_px):
        src_rgb, src_a = (rgb, alpha) if size is None else _resize_linear(rgb, alpha, size)
        data = encode_image(src_rgb, fmt, alpha=src_a if fmt != "jpg" else None, exposure_ev=0.0, tone="none",
                            quality=task.output.jpeg_quality, seed=task.quality.seed)
        images.append(ImageOut(rel, fmt, src_rgb.shape[1], src_rgb.shape[0], data))
    t_encode = time.perf_counter()

    qa = _run_qa(task, images[0], coverage, film, shadow)
    metrics = {
        "load_s": round(t_load - t0, 4),
        "render_s": round(t_render - t_load, 4),
        "encode_s": round(t_encode - t_render, 4),
        "spp": int(settings.spp),
        "mean_spp": round(film.mean_spp, 2),
        "width": int(settings.width),
        "height": int(settings.height),
        "exposure_ev": round(float(task.exposure_ev), 4),
        "rig": task.rig.name,
    }
    if shadow is not None:
        metrics["shadow_pixels"] = int(np.count_nonzero(shadow < 1.0))
    return ShotResult(task.shot_id, True, images=images, qa=qa, metrics=metrics)


def _coverage(product, settings, camera, bvh) -> np.ndarray:
    """The product's coverage (H, W) at ``settings.spp``, sampling fully only where it varies.

    A first pass of 4 samples finds the 8 x 8 tiles that are not all 0 or all 1 (edges, and
    their neighbours); only those take the full count.  A pixel's samples do not depend on the
    other pixels, so an edge pixel gets exactly the value a full-frame render would give it;
    a tile that is uniform after 4 samples keeps its 4-sample value (0 or 1).
    """
    from ..transport.integrator import render

    first = dataclasses.replace(settings, spp=min(4, settings.spp))
    alpha = render(product, first, env=None, camera=camera, bvh=bvh).alpha
    if settings.spp <= first.spp:
        return alpha
    # tiles near both covered and uncovered pixels (the silhouette, one tile either side)
    mask = _sample_mask(alpha > 0.0, margin_px=8) & _sample_mask(alpha < 1.0, margin_px=8)
    if not mask.any():
        return alpha
    full = render(product, settings, env=None, camera=camera, bvh=bvh, sample_mask=mask).alpha
    return np.where(mask, full, alpha)


def _sample_mask(coverage: np.ndarray, margin_px: int = 16) -> np.ndarray:
    """Pixels the shot render must sample: 8 x 8 tiles within ``margin_px`` of any covered pixel.

    The composite on white or transparent multiplies the render by the coverage, so other
    pixels are never seen; the margin keeps the denoiser's neighbourhood of edge pixels real.
    """
    h, w = coverage.shape
    tile = 8
    th, tw = -(-h // tile), -(-w // tile)
    padded = np.zeros((th * tile, tw * tile), bool)
    padded[:h, :w] = coverage > 0
    tiles = padded.reshape(th, tile, tw, tile).any(axis=(1, 3))
    r = -(-margin_px // tile)
    grown = np.zeros((th + 2 * r, tw + 2 * r), bool)
    for dy in range(2 * r + 1):
        for dx in range(2 * r + 1):
            grown[dy:dy + th, dx:dx + tw] |= tiles
    tiles = grown[r:r + th, r:r + tw]
    return np.repeat(np.repeat(tiles, tile, axis=0), tile, axis=1)[:h, :w]


def _mask_box(mask, margin_px: int = 16):
    """(y0, y1, x0, x1) around the True pixels of ``mask`` plus ``margin_px`` (None: no mask,
    or nothing in it)."""
    if mask is None:
        return None
    rows = np.flatnonzero(np.any(mask, axis=1))
    cols = np.flatnonzero(np.any(mask, axis=0))
    if rows.size == 0:
        return None
    return rows[0] - margin_px, rows[-1] + 1 + margin_px, cols[0] - margin_px, cols[-1] + 1 + margin_px


def _maybe_denoise(film, threads=None, sample_mask=None):
    """The film denoised with its albedo and normal passes (raw radiance where no denoiser runs).

    With a ``sample_mask`` (white and transparent backgrounds) only the box around the sampled
    pixels, plus a margin for the denoiser's neighbourhood, is denoised: nothing outside the
    mask is ever shown.
    """
    from ..imaging.denoise import denoise_film_if_available

    return denoise_film_if_available(film, threads=threads, region=_mask_box(sample_mask))


def _denoise_see_through(film, threads=None, margin_px: int = 16):
    """The film's see-through channel denoised like the beauty (same albedo and normal passes),
    on the bounding box of the pixels that have any (plus a margin), so that the background shown
    through glass is as smooth as the glass itself; raw where no denoiser runs."""
    from ..imaging.denoise import denoise, is_available

    see = film.see_through
    if see is None or not is_available():
        return see
    box = _mask_box(np.any(see > 0.0, axis=2), margin_px)
    if box is None:
        return see
    y0, y1, x0, x1 = box
    y0, y1, x0, x1 = max(0, y0), min(see.shape[0], y1), max(0, x0), min(see.shape[1], x1)
    out = np.array(see, np.float64)
    out[y0:y1, x0:x1] = denoise(see[y0:y1, x0:x1], albedo=film.albedo[y0:y1, x0:x1],
                                normal=film.normal[y0:y1, x0:x1], threads=threads)
    return out


def _run_qa(task: ShotTask, primary: ImageOut, coverage, film, shadow=None) -> dict | None:
    """QA of the primary image through ``review.qa.run_qa``, as the manifest's ``qa`` object."""
    try:
        from ..review.qa import run_qa
    except ImportError:  # the review stage is optional for the batch
        return None
    from PIL import Image

    codes = np.asarray(Image.open(io.BytesIO(primary.data)))
    swatch = None
    if task.colour_lab_d65 is not None:
        try:
            from ..review.swatch import swatch_srgb8_for_lab
        except ImportError:
            swatch = None
        else:
            swatch = swatch_srgb8_for_lab(task.colour_lab_d65, task.rig, task.exposure_ev,
                                          denoise=task.quality.denoise, seed=task.quality.seed, threads=task.threads)
    result = run_qa(
        codes,
        coverage=coverage,
        film=film,
        background=task.output.background,
        # purity is judged outside the shadow the compositor applied, not a guessed zone
        shadow=shadow if shadow is not None and shadow.shape == codes.shape[:2] else None,
        colour_lab_d65=task.colour_lab_d65,
        swatch_srgb8=swatch,
        noise_target=task.quality.noise_target,
    )
    if hasattr(result, "to_dict"):
        return result.to_dict()
    return dataclasses.asdict(result)


# --------------------------------------------------------------------------- the batch


@dataclass
class BatchReport:
    """What a batch did.

    Attributes
    ----------
    out_dir : Path
    planned : int
        Shots in the plan (after ``only``).
    rendered : list of str
        Shot ids rendered in this run.
    skipped : list of str
        Shot ids already up to date.
    failed : list of (str, str)
        ``(shot id, error)`` of shots that could not be rendered.
    qa_failed : list of str
        Rendered shots whose QA verdict is ``fail``.
    seconds : float
    sheets : list of Path
    """

    out_dir: Path
    planned: int = 0
    rendered: list = field(default_factory=list)
    skipped: list = field(default_factory=list)
    failed: list = field(default_factory=list)
    qa_failed: list = field(default_factory=list)
    seconds: float = 0.0
    sheets: list = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.failed and not self.qa_failed


_MIME = {".png": "image/png", ".jpg": "image/jpeg", ".jpeg": "image/jpeg", ".webp": "image/webp", ".ktx2": "image/ktx2"}


def self_contained_gltf(expanded) -> bytes:
    """An expanded scene as glTF JSON bytes with every external buffer and image embedded as a
    ``data:`` URI, so a worker needs no file system (local runs and cluster runs alike)."""
    import base64
    import copy
    import json

    doc = copy.deepcopy(expanded.gltf)
    for (kind, i), src in sorted(expanded.resources.items()):
        data = Path(src).read_bytes()
        mime = "application/octet-stream" if kind == "buffers" else _MIME.get(Path(src).suffix.lower(), "application/octet-stream")
        doc[kind][i]["uri"] = f"data:{mime};base64," + base64.b64encode(data).decode("ascii")
    return json.dumps(doc, separators=(",", ":")).encode("utf-8")


def _failed_key(variant, template_path, settings, angle) -> str:
    from .cache import shot_key

    files = [template_path] if template_path is not None and Path(template_path).is_file() else []
    return shot_key(renderer_version=f"variantshot {__version__}", template_files=files, row=variant.row,
                    model_files=[], rig_name=variant.rig or "", rig_definition="", settings=settings,
                    angle=angle)


def _entry(shot, *, background, key, status, error=None, images=(), qa=None, seconds=0.0) -> dict:
    from .manifest import now_iso, sha256_hex

    recs = [{"path": im.path, "format": im.format, "width": im.width, "height": im.height,
             "bytes": len(im.data), "sha256": sha256_hex(im.data)} for im in images]
    primary = recs[0]["path"] if recs else f"shots/{shot['id']}.png"
    return {
        "id": shot["id"], "sku": shot["sku"], "product": shot["product"], "colourway": shot["colourway"],
        "finish": shot["finish"], "angle": shot["angle"], "background": background, "image": primary,
        "images": recs, "key": key, "status": status, "error": error,
        "qa": qa if qa is not None else {"status": "fail" if status == "failed" else "warn", "checks": []},
        "content_hash": recs[0]["sha256"] if recs else None, "rendered_at": now_iso(), "seconds": round(float(seconds), 3),
    }


def render_batch(
    catalog,
    out_dir,
    *,
    quality="draft",
    output: OutputSpec | None = None,
    background: str | None = None,
    rig: str | None = None,
    key_to_fill: float | None = None,
    rotation_deg: float | None = None,
    only=None,
    force: bool = False,
    executor=None,
    workers: int = 1,
    threads: int | None = None,
    templates_dir=None,
    sheet_formats=("png",),
    progress=None,
    on_shot=None,
) -> BatchReport:
    """Render every out-of-date shot of a catalog into ``out_dir``.

    Parameters
    ----------
    catalog : path
        The catalog CSV.
    out_dir : path
        Output folder: ``shots/``, ``scenes/``, ``manifest.json``, ``sheets/``.
    quality : str or Quality
        ``draft``, ``proof``, ``final`` or a :class:`~variantshot.batch.quality.Quality`.
    output : OutputSpec, optional
        Formats and sizes (and the batch's background); default one PNG on white.  A catalog
        column ``formats`` (``png;jpg`` or ``png,jpg``) overrides the formats for its row, and a
        ``background`` column the background.
    background : str, optional
        Overrides ``output.background`` for rows whose ``background`` cell is empty.
    rig : str, optional
        Rig for rows whose ``rig`` cell is empty (default: ``soft-even``).
    key_to_fill, rotation_deg : float, optional
        Override every rig's ratio and rotation (they then enter the shot keys).
    only : list of str, optional
        Glob patterns on shot ids; other shots are neither rendered nor touched.
    force : bool
        Render the selected shots even when up to date.
    executor : object with ``map(fn, tasks)``, optional
        Default :class:`~variantshot.batch.executors.LocalExecutor` with ``workers``.
    sheet_formats : tuple of str
        Contact sheets built at the end (``()``: none).
    progress : callable, optional
        ``progress(done, total, label)``: shots finished, shots to render, the shot being rendered
        (the next in line; the last one finished once all are done).
    on_shot : callable, optional
        ``on_shot(entry)`` with each finished shot's manifest entry (rendered or failed).

    Returns
    -------
    BatchReport

    Raises
    ------
    InputErrors
        The catalog itself is invalid (nothing rendered, nothing overwritten).
    LockedError
        Another live run holds ``out_dir``'s lock.
    """
    from .._atomic import remove_stale_temporaries
    from ..catalog.expand import CheckReport, _BufferCache, expand_variant, write_scenes
    from ..catalog.validate import read_catalog
    from .executors import LocalExecutor
    from .._lock import acquire_lock
    from .manifest import load_manifest, save_manifest
    from .plan import batch_settings, default_rig_name, plan_shots, shot_id
    from .quality import match_only, parse_formats, quality_preset

    started = time.perf_counter()
    out = Path(out_dir)
    q = quality_preset(quality)
    output = output or OutputSpec()
    if background is not None:
        output = output.replace(background=background)
    settings = batch_settings(q, output)
    if key_to_fill is not None or rotation_deg is not None:
        settings = (*settings, {"key_to_fill": key_to_fill, "rotation_deg": rotation_deg})
    report = BatchReport(out_dir=out)

    # Read the catalog before taking the lock: a bad catalog changes nothing in ``out``.
    cat = read_catalog(catalog, templates_dir=templates_dir)
    with acquire_lock(out):
        removed = remove_stale_temporaries(out)
        if removed:
            log.info("removed %d temporary file(s) left by an interrupted run", removed)
        library = cat.library
        cache = _BufferCache()
        scenes, broken = [], []
        for v in cat.variants:
            try:
                scenes.extend(expand_variant(v, library, cache=cache))
            except InputError as exc:
                broken.append((v, exc))
        shots = plan_shots(CheckReport(catalog=cat, scenes=scenes, warnings=[]), out, settings, rig=rig)
        if scenes:
            write_scenes(scenes, out)
        by_sku = {s.safe_name: s for s in scenes}
        manifest = load_manifest(out)

        failed_shots = []
        for v, exc in broken:
            msg = exc.format() if isinstance(exc, InputError) else str(exc)
            template = library.products[v.product].template if v.product in library.products else None
            for angle in v.angles:
                sid = shot_id(v.safe_sku, angle)
                failed_shots.append(({"id": sid, "sku": v.sku, "product": v.product, "colourway": v.colourway,
                                      "finish": v.finish, "angle": angle}, v, msg, _failed_key(v, template, settings, angle)))
        planned_ids = {s.id for s in shots} | {f[0]["id"] for f in failed_shots}
        if not only:
            for stale in set(manifest["shots"]) - planned_ids:
                del manifest["shots"][stale]  # shots no longer in the catalog
        if only:
            shots = [s for s in shots if match_only(s.id, only)]
            failed_shots = [f for f in failed_shots if match_only(f[0]["id"], only)]
        todo = [s for s in shots if force or s.status != "up-to-date"]
        report.skipped = [s.id for s in shots if s not in todo]
        report.planned = len(shots) + len(failed_shots)
        total = len(todo) + len(failed_shots)
        done = 0
        pending = [s.id for s in todo]  # in the order a local executor renders them

        def finish(entry):
            nonlocal done
            manifest["shots"][entry["id"]] = entry
            save_manifest(out, manifest)
            done += 1
            if entry["id"] in pending:
                pending.remove(entry["id"])
            if on_shot is not None:
                on_shot(entry)
            if progress is not None:
                progress(done, total, pending[0] if pending else entry["id"])

        for info, v, msg, key in failed_shots:
            bgv = (v.row.get("background") or output.background)
            report.failed.append((info["id"], msg))
            finish(_entry(info, background=bgv, key=key, status="failed", error=msg))
        if progress is not None and total:
            progress(done, total, pending[0] if pending else None)

        rig_specs: dict[str, RigSpec] = {}

        def rig_for(name):
            if name not in rig_specs:
                source = library.rigs.get(name, name) if getattr(library, "rigs", None) else name
                rig_specs[name] = load_rig(source).with_settings(key_to_fill=key_to_fill, rotation_deg=rotation_deg)
            return rig_specs[name]

        tasks, meta = [], {}
        scene_bytes: dict[str, bytes] = {}
        for s in todo:
            bgv = s.background if (by_sku[s.safe_sku].variant.row.get("background") or "") else output.background
            info = {"id": s.id, "sku": s.sku, "product": s.product, "colourway": s.colourway, "finish": s.finish,
                    "angle": s.angle}
            try:
                row = by_sku[s.safe_sku].variant.row
                shot_output = output.replace(background=bgv)
                if row.get("formats"):  # a catalog column may pick the formats per row
                    try:
                        shot_output = shot_output.replace(formats=parse_formats(row["formats"]))
                    except InputError as exc:
                        v = by_sku[s.safe_sku].variant
                        raise InputError(exc.message, file=v.file, row=v.line, column="formats",
                                         accepted=exc.accepted) from None
                spec = rig_for(s.rig or default_rig_name())
                if s.safe_sku not in scene_bytes:
                    scene_bytes[s.safe_sku] = self_contained_gltf(by_sku[s.safe_sku])
                tasks.append(ShotTask(
                    shot_id=s.id, scene_bytes=scene_bytes[s.safe_sku], scene_name=by_sku[s.safe_sku].scene_file,
                    base_dir=None, angle=s.angle, rig=spec, quality=q, output=shot_output,
                    exposure_ev=calibrate_exposure(spec), colour_lab_d65=tuple(s.colour_lab_d65), threads=threads,
                ))
                meta[s.id] = (info, s.key, bgv)
            except VariantshotError as exc:
                msg = exc.format() if isinstance(exc, InputError) else str(exc)
                report.failed.append((s.id, msg))
                finish(_entry(info, background=bgv, key=s.key, status="failed", error=msg))

        executor = executor or LocalExecutor(workers, threads=threads)
        if tasks and isinstance(executor, LocalExecutor) and executor.workers == 1:
            warmup()  # compile / cache-load the kernels once, outside the shot timings
        from .._atomic import atomic_write

        for result in executor.map(render_shot, tasks):
            info, key, bgv = meta[result.shot_id]
            if result.ok:
                for im in result.images:
                    atomic_write(out / im.path, im.data)
                entry = _entry(info, background=bgv, key=key, status="rendered", images=result.images,
                               qa=result.qa, seconds=result.seconds)
                report.rendered.append(result.shot_id)
                if (result.qa or {}).get("status") == "fail":
                    report.qa_failed.append(result.shot_id)
            else:
                entry = _entry(info, background=bgv, key=key, status="failed", error=result.error, seconds=result.seconds)
                report.failed.append((result.shot_id, result.error))
            finish(entry)

        if sheet_formats:
            report.sheets = _build_sheets(out, sheet_formats)
    report.seconds = time.perf_counter() - started
    return report


def _build_sheets(out: Path, formats) -> list:
    """The review stage's contact sheets of the batch (``review.sheets.build_sheets``)."""
    try:
        from ..review.sheets import build_sheets
    except ImportError:
        return []
    try:
        return build_sheets(out, formats=tuple(formats))
    except VariantshotError as exc:
        log.warning("contact sheets not built: %s", exc)
        return []
