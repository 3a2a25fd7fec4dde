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
3. render product + rig (the shot); for ``white`` / ``transparent`` also the product alone at
   one bounce (its coverage α, since in the studio every camera ray hits something) and the
   shadow it casts on the sweep (:func:`shadow_map`, ray cast from the rig's lights);
4. composite the background (:mod:`variantshot.imaging.background`) with the rig's calibrated
   exposure (:func:`calibrate_exposure`), encode every format and size;
5. run QA on the primary image (``review.qa.run_qa``).
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
        materials=[Material(name="grey card 18%", base_colour_factor=(MID_GREY, MID_GREY, MID_GREY, 1.0),
                            metallic_factor=0.0, roughness_factor=1.0)],
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


def shadow_map(rig, camera, width: int, height: int, product_bvh, *, step: int = 2, seed: int = 0) -> np.ndarray:
    """The product's snapped shadow on the sweep as seen by ``camera``, ``(H, W) float64``.

    Camera rays through the centres of ``step`` x ``step`` pixel blocks find the sweep behind
    every pixel (the product left out); :func:`~variantshot.geometry.rig.direct_light_ratio`
    gives the share of the rig's direct light the product lets through there; the ratio is
    upsampled bilinearly to the image, blurred over one block to hide the jitter, and snapped
    with the rig's ``white_boost_ev`` (:func:`~variantshot.imaging.background.snap_shadow`).  Pixels that see a soft box or the
    environment are unshadowed.
    """
    from PIL import Image

    from ..geometry.bvh import build_bvh, intersect
    from ..geometry.rig import direct_light_ratio
    from ..imaging.background import box_blur, snap_shadow
    from ..transport.camera import generate_rays, pack_camera

    w2, h2 = -(-width // step), -(-height // step)
    xs = np.minimum((np.arange(w2) + 0.5) * step, width - 0.5)
    ys = np.minimum((np.arange(h2) + 0.5) * step, height - 0.5)
    gx, gy = np.meshgrid(xs, ys)
    cam = pack_camera(camera, width, height)
    o, d = generate_rays(cam, gx.ravel(), gy.ravel())
    scene = rig.scene
    hits = intersect(build_bvh(scene.positions, scene.triangles), o, d)
    ratio = np.ones(o.shape[0])
    tri = hits.tri
    on_sweep = tri >= 0
    on_sweep[on_sweep] = scene.tri_material[tri[on_sweep]] == rig.floor_material
    if on_sweep.any():
        t = hits.t[on_sweep].astype(np.float64)
        p = o[on_sweep] + t[:, None] * d[on_sweep]
        tv = scene.triangles[tri[on_sweep]]
        b1 = hits.b1[on_sweep].astype(np.float64)[:, None]
        b2 = hits.b2[on_sweep].astype(np.float64)[:, None]
        nv = scene.normals.astype(np.float64)
        nrm = (1 - b1 - b2) * nv[tv[:, 0]] + b1 * nv[tv[:, 1]] + b2 * nv[tv[:, 2]]
        ratio[on_sweep] = direct_light_ratio(rig, p, nrm, product_bvh, seed=seed)
    low = ratio.reshape(h2, w2)
    if step > 1:
        im = Image.fromarray(low.astype(np.float32), mode="F").resize((width, height), Image.BILINEAR)
        full = np.asarray(im, np.float64)
    else:
        full = low
    full = box_blur(full, max(1, step))
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
    film = render(shot_scene, settings, env=env, camera=camera)
    if bg in ("white", "transparent"):
        cov_settings = dataclasses.replace(settings, spp=min(settings.spp, 16), max_depth=1)
        coverage = render(product, cov_settings, env=None, camera=camera, bvh=product_bvh).alpha
        shadow = shadow_map(rig, camera, settings.width, settings.height, product_bvh, seed=task.quality.seed)
    else:
        coverage, shadow = None, None
    t_render = time.perf_counter()
    radiance = film.radiance
    if task.quality.denoise:
        radiance = _maybe_denoise(film)
    gain = 2.0 ** task.exposure_ev
    rgb, alpha = composite(bg, radiance, coverage if coverage is not None else film.alpha, gain, shadow)

    images = []
    for rel, fmt, size in image_paths(task.shot_id, task.output, task.quality.long_side_px):
        src_rgb, src_a = (rgb, alpha) if size is None else _resize_linear(rgb, alpha, size)
        data = encode_image(src_rgb, fmt, alpha=src_a if fmt != "jpg" else None, exposure_ev=0.0, tone="none",
                            quality=task.output.jpeg_quality, seed=task.quality.seed)
        images.append(ImageOut(rel, fmt, src_rgb.shape[1], src_rgb.shape[0], data))
    t_encode = time.perf_counter()

    qa = _run_qa(task, images[0], coverage if coverage is not None else None, film)
    metrics = {
        "load_s": round(t_load - t0, 4),
        "render_s": round(t_render - t_load, 4),
        "encode_s": round(t_encode - t_render, 4),
        "spp": int(settings.spp),
        "width": int(settings.width),
        "height": int(settings.height),
        "exposure_ev": round(float(task.exposure_ev), 4),
        "rig": task.rig.name,
    }
    if shadow is not None:
        metrics["shadow_pixels"] = int(np.count_nonzero(shadow < 1.0))
    return ShotResult(task.shot_id, True, images=images, qa=qa, metrics=metrics)


def _maybe_denoise(film):
    """The denoiser, once ``variantshot.imaging.denoise`` exists; the raw radiance until then."""
    try:
        from ..imaging import denoise  # noqa: F401
    except ImportError:
        return film.radiance
    fn = getattr(denoise, "denoise_film", None) or getattr(denoise, "denoise", None)
    return film.radiance if fn is None else fn(film)


def _run_qa(task: ShotTask, primary: ImageOut, coverage, film) -> dict | None:
    """QA of the primary image through ``review.qa.run_qa``, as the manifest's ``qa`` object."""
    try:
        from ..review.qa import run_qa
    except ImportError:  # the review stage is optional for the batch
        return None
    from PIL import Image

    codes = np.asarray(Image.open(io.BytesIO(primary.data)))
    result = run_qa(
        codes,
        coverage=coverage,
        film=film,
        background=task.output.background,
        colour_lab_d65=task.colour_lab_d65,
        noise_target=task.quality.noise_target,
    )
    if hasattr(result, "to_dict"):
        return result.to_dict()
    return dataclasses.asdict(result)
