"""Colour swatches: a flat matte card of a variant's colour, rendered and encoded like its shots.

The swatch tests the whole colour chain of a batch, colour spec -> linear -> render -> (denoise)
-> exposure / tone -> sRGB -> 8 bit, on the one object whose right answer is known: a flat,
diffuse card of the catalog colour seen face on.  Its centre pixels, read back from the encoded
file, are compared with the catalog colour in ΔE2000 (:func:`variantshot.review.qa.swatch_delta_e`).

The card is a glTF metallic-roughness dielectric with ``metallicFactor`` 0, ``roughnessFactor`` 1
and ``KHR_materials_ior`` 1.0, so its normal-incidence Fresnel reflectance f0 is 0 (glTF 2.0
Appendix B; KHR_materials_ior): what remains of the specular lobe is Schlick's grazing term,
which the flat card viewed face on sees little of.  The card is viewed by an orthographic camera
along its normal, so every pixel sees the card.

Exposure: :func:`calibrate_exposure_ev` renders a card of known reflectance (18 % grey,
REFERENCES §4) in the rig and returns the exposure that maps its radiance back to 0.18, i.e.
the exposure under which a diffuse reflectance comes out as itself.  Under a uniform
environment of radiance L the card's radiance is ``albedo * L`` (REFERENCES §6a, white-furnace
reasoning for a convex Lambertian surface), so exposure is ``-log2(L)`` there.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = [
    "SwatchResult",
    "swatch_scene",
    "render_swatch",
    "render_swatches",
    "calibrate_exposure_ev",
    "rig_swatch",
    "calibrate_rig_exposure_ev",
    "swatch_srgb8_for_lab",
    "CALIBRATION_GREY",
]

#: Reflectance of the calibration card: the photographic 18 % grey (REFERENCES §4).
CALIBRATION_GREY = 0.18


@dataclass(frozen=True)
class SwatchResult:
    """One rendered swatch.

    Attributes
    ----------
    srgb8 : (3,) float64 ndarray
        Mean 8-bit code of the encoded swatch (every pixel sees the card; mean taken in linear
        light).
    lab_d65 : (3,) float64 ndarray
        CIELAB (D65) of ``srgb8``.
    rgb_linear : (3,) float64 ndarray
        Mean rendered radiance of the same pixels before exposure and tone.
    image_srgb8 : (h, w, 3) uint8 ndarray
        The encoded swatch as read back from its PNG bytes.
    """

    srgb8: np.ndarray
    lab_d65: np.ndarray
    rgb_linear: np.ndarray
    image_srgb8: np.ndarray


def _frame(normal) -> np.ndarray:
    """Orthonormal basis (3, 3) with rows (right, up, normal) for a card facing ``normal``."""
    n = np.asarray(normal, dtype=np.float64)
    n = n / np.linalg.norm(n)
    helper = np.array([0.0, 1.0, 0.0]) if abs(n[1]) < 0.9 else np.array([0.0, 0.0, 1.0])
    right = np.cross(helper, n)
    right /= np.linalg.norm(right)
    up = np.cross(n, right)
    return np.stack([right, up, n])


def swatch_scene(colour_rgb_linear, *, centre=(0.0, 0.0, 0.0), normal=(0.0, 0.0, 1.0),
                 size_m: float = 1.0, view_frac: float = 0.6):
    """A flat matte card and an orthographic camera looking at it face on.

    Parameters
    ----------
    colour_rgb_linear : (3,) float
        The card's base colour, linear sRGB in [0, 1] (glTF ``baseColorFactor``).
    centre : (3,) float
        World position of the card's centre (metres).
    normal : (3,) float
        Direction the card faces; the camera sits on this side.
    size_m : float
        Side of the square card.
    view_frac : float
        Share of the card's side the camera frames (the image never sees the card's edge).

    Returns
    -------
    scene : Scene
        Two triangles, one material.
    camera : Camera
        Orthographic, square, at ``centre + 2 * size_m * normal``.
    """
    from ..geometry.scene import Camera, Material, make_scene

    rgb = np.asarray(colour_rgb_linear, dtype=np.float64).reshape(3)
    if not np.all(np.isfinite(rgb)) or rgb.min() < 0.0 or rgb.max() > 1.0:
        raise ValueError(f"swatch colour {rgb.tolist()} must be linear sRGB in [0, 1]")
    right, up, n = _frame(normal)
    c = np.asarray(centre, dtype=np.float64)
    h = 0.5 * size_m
    corners = np.stack([c - h * right - h * up, c + h * right - h * up,
                        c + h * right + h * up, c - h * right + h * up])
    material = Material(
        name="swatch",
        base_colour_factor=(float(rgb[0]), float(rgb[1]), float(rgb[2]), 1.0),
        metallic_factor=0.0,
        roughness_factor=1.0,
        extensions={"KHR_materials_ior": {"ior": 1.0}},
    )
    scene = make_scene(corners, [[0, 1, 2], [0, 2, 3]],
                       normals=np.repeat(n[None, :], 4, axis=0), materials=[material],
                       source="<swatch>")
    world_from_camera = np.eye(4)
    world_from_camera[:3, 0] = right
    world_from_camera[:3, 1] = up
    world_from_camera[:3, 2] = n  # the camera looks down its -Z, i.e. at the card
    world_from_camera[:3, 3] = c + 2.0 * size_m * n
    half = 0.5 * view_frac * size_m
    camera = Camera(name="swatch", kind="orthographic", world_from_camera=world_from_camera,
                    xmag=half, ymag=half, aspect_ratio=1.0, znear=0.01, zfar=4.0 * size_m)
    return scene, camera


def render_swatch(
    colour_rgb_linear,
    *,
    rig=None,
    env=None,
    exposure_ev: float = 0.0,
    tone: str = "none",
    centre=(0.0, 0.0, 0.0),
    normal=(0.0, 0.0, 1.0),
    size_m: float = 1.0,
    size_px: int = 8,
    spp: int = 64,
    seed: int = 0,
    dither: bool = True,
    denoise: Callable | None = None,
    threads: int | None = None,
) -> SwatchResult:
    """Render one swatch card through the shot chain and read its colour back.

    Parameters
    ----------
    colour_rgb_linear : (3,) float
        Linear sRGB base colour in [0, 1].
    rig : Scene, optional
        The studio rig (soft boxes, backdrop) to merge with the card, as the shots use it.
    env : EnvMap, optional
        The environment light (``transport.environment.make_environment``), as the shots use it.
    exposure_ev, tone : float, str
        The shots' exposure and tone (:mod:`variantshot.imaging.tone`).
    centre, normal, size_m :
        Card placement (see :func:`swatch_scene`); put it where the product stands.
    size_px, spp, seed, threads :
        Render settings: a small image converges fast (a flat diffuse card).
    dither : bool
        The 8-bit dither of the shots' encoder.
    denoise : callable, optional
        ``denoise(film) -> (H, W, 3) float rgb_linear``, the shots' denoiser if they use one.

    Returns
    -------
    SwatchResult
    """
    from PIL import Image

    from ..geometry.scene import merge_scenes
    from ..imaging.colour import lab_from_srgb8
    from ..imaging.files import encode_image
    from ..settings import RenderSettings
    from ..transport.integrator import render
    from . import metrics

    card, camera = swatch_scene(colour_rgb_linear, centre=centre, normal=normal, size_m=size_m)
    scene = card if rig is None else merge_scenes(card, rig, source="<swatch in rig>")
    settings = RenderSettings(width=int(size_px), height=int(size_px), spp=int(spp), seed=int(seed),
                              threads=threads)
    film = render(scene, settings, env=env, camera=camera)
    rgb_linear = np.asarray(film.radiance if denoise is None else denoise(film), dtype=np.float64)
    data = encode_image(rgb_linear, "png", exposure_ev=exposure_ev, tone=tone, bit_depth=8,
                        dither=dither, seed=seed)
    with Image.open(io.BytesIO(data)) as im:
        image = np.asarray(im.convert("RGB"))
    # the camera frames the middle 60 % of the card, so every pixel is card: average them all
    srgb8 = metrics.mean_srgb8(image, np.ones(image.shape[:2], bool))
    return SwatchResult(
        srgb8=srgb8,
        lab_d65=lab_from_srgb8(srgb8),
        rgb_linear=rgb_linear.reshape(-1, 3).mean(axis=0),
        image_srgb8=image,
    )


def render_swatches(colours_rgb_linear, **options) -> list[SwatchResult]:
    """:func:`render_swatch` for each colour of an ``(N, 3)`` array (one card per render)."""
    colours = np.asarray(colours_rgb_linear, dtype=np.float64).reshape(-1, 3)
    return [render_swatch(c, **options) for c in colours]


def calibrate_exposure_ev(*, rig=None, env=None, grey: float = CALIBRATION_GREY, spp: int = 256,
                          **options) -> float:
    """Exposure (stops) under which a diffuse card of reflectance ``grey`` renders as ``grey``.

    Renders a grey card with :func:`render_swatch` (same placement options) and returns
    ``log2(grey / Y)``, ``Y`` the card's mean rendered luminance (sRGB Y weights).

    Raises
    ------
    ValueError
        When the card receives no light.
    """
    from ..imaging.colour import luminance

    options = {k: v for k, v in options.items() if k not in ("exposure_ev", "tone")}
    res = render_swatch((grey, grey, grey), rig=rig, env=env, spp=spp, **options)
    y = float(luminance(res.rgb_linear))
    if not (y > 0.0 and math.isfinite(y)):
        raise ValueError("calibrate_exposure_ev: the calibration card receives no light in this rig")
    return math.log2(grey / y)


def _rig_swatch_uncached(colour_rgb_linear, rig, exposure_ev, spp, size_px, seed, threads, tone,
                         denoise):
    from ..geometry.rig import build_rig
    from ..geometry.scene import Camera
    from ..transport.environment import make_environment

    # The product's stand-in is a unit cube standing on the floor (y from 0 to 1); the card is
    # its camera-facing mid-plane, the same place the batch's exposure calibration measures.
    lo, hi = np.array([-0.5, 0.0, -0.5]), np.array([0.5, 1.0, 0.5])
    m = np.eye(4)
    m[:3, 3] = (0.0, 0.5, 6.0)
    front = Camera(name="swatch-front", kind="perspective", world_from_camera=m, yfov_rad=0.05)
    built = build_rig(rig, (lo, hi), camera=front)
    env = make_environment(tuple(built.environment_linear), rotation_rad=built.yaw_rad)
    return render_swatch(colour_rgb_linear, rig=built.scene, env=env, exposure_ev=exposure_ev,
                         tone=tone, centre=(0.0, 0.5, 0.0), normal=(0.0, 0.0, 1.0), size_m=1.0,
                         size_px=size_px, spp=spp, seed=seed, threads=threads,
                         denoise=_denoiser() if denoise else None)


def _denoiser():
    """The batch's denoiser (``imaging.denoise.denoise_film``), or None when it cannot run here."""
    try:
        from ..imaging import denoise as _dn
    except ImportError:
        return None
    available = getattr(_dn, "is_available", lambda: True)
    return _dn.denoise_film if available() else None


_RIG_SWATCH_CACHE: dict = {}


def rig_swatch(colour_rgb_linear, rig, exposure_ev: float, *, spp: int = 64, size_px: int = 16,
               seed: int = 0, threads: int | None = None, tone: str = "none",
               denoise: bool = False) -> SwatchResult:
    """The swatch of a colour in a studio rig, at the rig's calibrated exposure (cached).

    The card stands where a product's centre would, facing the front camera, in the rig built
    for a unit-cube product (rig lengths scale with the product, so one swatch holds for every
    product of the variant's colour).  Give ``exposure_ev`` from the batch's rig calibration and
    pass ``result.srgb8`` to :func:`variantshot.review.qa.run_qa` as ``swatch_srgb8``.

    Parameters
    ----------
    colour_rgb_linear : (3,) float
        The variant's colour, linear sRGB in [0, 1].
    rig : RigSpec or str
        A studio rig (``geometry.rig.load_rig`` accepts a bundled name or a .toml path).
    exposure_ev : float
        The shots' exposure for this rig.
    spp, size_px, seed, threads, tone :
        As :func:`render_swatch`.
    denoise : bool
        Run the batch's denoiser (``imaging.denoise.denoise_film``) as the shots do when their
        quality preset denoises; ignored when the denoiser cannot run here.

    Returns
    -------
    SwatchResult
    """
    from ..geometry.rig import load_rig

    spec = load_rig(rig)
    rgb = tuple(round(float(v), 6) for v in np.asarray(colour_rgb_linear, dtype=np.float64).reshape(3))
    key = (spec.digest(), rgb, round(float(exposure_ev), 6), spp, size_px, seed, tone, bool(denoise))
    if key not in _RIG_SWATCH_CACHE:
        if len(_RIG_SWATCH_CACHE) > 512:
            _RIG_SWATCH_CACHE.clear()
        _RIG_SWATCH_CACHE[key] = _rig_swatch_uncached(rgb, spec, exposure_ev, spp, size_px, seed,
                                                      threads, tone, denoise)
    return _RIG_SWATCH_CACHE[key]


def calibrate_rig_exposure_ev(rig, *, spp: int = 256, size_px: int = 16, seed: int = 0,
                              threads: int | None = None, grey: float = CALIBRATION_GREY) -> float:
    """Exposure (stops) under which the swatch card of reflectance ``grey`` renders as ``grey`` in a rig.

    The same card, placement and material as :func:`rig_swatch`, so that swatches rendered at
    this exposure reproduce diffuse reflectances.  A calibration card with a specular lobe
    (glTF's default ior 1.5, f0 = 0.04) would pick up reflections of the soft boxes and make
    the exposure a few per cent darker than the diffuse chain needs.
    """
    from ..imaging.colour import luminance

    res = rig_swatch((grey, grey, grey), rig, 0.0, spp=spp, size_px=size_px, seed=seed,
                     threads=threads)
    y = float(luminance(res.rgb_linear))
    if not (y > 0.0 and math.isfinite(y)):
        raise ValueError("calibrate_rig_exposure_ev: the calibration card receives no light in this rig")
    return math.log2(grey / y)


def swatch_srgb8_for_lab(colour_lab_d65, rig, exposure_ev: float, *, denoise: bool = False,
                         seed: int = 0, threads: int | None = None) -> np.ndarray:
    """The rendered swatch colour (8-bit code, ``(3,) float64``) of a catalog colour in a rig.

    What the batch passes to :func:`variantshot.review.qa.run_qa` as ``swatch_srgb8``: the
    catalog colour (CIELAB, D65) is converted to linear sRGB (clipped to the gamut, as the
    template's ``baseColorFactor`` must be) and rendered with :func:`rig_swatch`.  With the
    denoiser the swatch is 64 x 64 px at 16 spp, so the denoiser sees a neighbourhood and a
    noise level like a draft shot's (an earlier denoiser shifted colours by up to 3 ΔE2000 on
    16 px swatches); without it 16 x 16 px at 64 spp.
    """
    from ..imaging.colour import linear_srgb_from_lab

    rgb = np.clip(linear_srgb_from_lab(np.asarray(colour_lab_d65, dtype=np.float64).reshape(3)), 0.0, 1.0)
    size = dict(size_px=64, spp=16) if denoise else dict(size_px=16, spp=64)
    return rig_swatch(rgb, rig, exposure_ev, denoise=denoise, seed=seed, threads=threads,
                      **size).srgb8
