"""Backgrounds of a shot: pure white with a kept contact shadow, transparent, or the sweep itself.

Shadow catcher
--------------
A shot on a ``white`` or ``transparent`` background uses two renders of the same camera with the
same seed: the product in the rig (``rgb_with``) and the rig alone (``rgb_without``).  On
background pixels the ratio of the two is the shadow the product casts (what the floor receives
with the product over what it receives without it):

    ratio = blur(Y_with · (1 − α)) / blur(Y_without · (1 − α))

with ``Y`` the luminance, ``α`` the product's coverage, and ``blur`` a box filter whose radius is
``blur_frac`` of the longer image side (it averages the Monte Carlo noise of the two renders;
weighting by ``1 − α`` keeps product pixels out of the floor estimate).  Because both renders use
the same random numbers per pixel, paths that never meet the product give identical values and
the ratio is exactly 1 there, not 1 ± noise.

The shadow is ``s = min(1, ratio / (1 − SHADOW_SNAP))``: every pixel whose ratio is within
``SHADOW_SNAP`` (2 %) of 1 is **outside the shadow region** and becomes exactly 1.0 (paper white,
code 255).  2 % of the background level is below what the eye notices as a shadow on white and
above the residual noise of a blurred draft render; the division keeps the shadow's falloff
continuous at the snap (no visible step).

* ``white``: background pixels are ``s`` (grey only where a shadow falls); product pixels are
  the exposed render; edge pixels (0 < α < 1) take the product's share of the render plus
  ``(1 − α) · s`` (the floor's share of the render is taken out, so edges show no grey fringe).
* ``transparent``: the product over a black shadow matte of opacity ``1 − s``, as straight
  (un-premultiplied) RGBA: alpha = α + (1 − α)(1 − s).
* ``backdrop``: the render as it is, exposed.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "SHADOW_SNAP",
    "BLUR_FRAC",
    "box_blur",
    "shadow_ratio",
    "composite_white",
    "composite_transparent",
    "composite_backdrop",
    "composite",
]

SHADOW_SNAP = 0.02
BLUR_FRAC = 0.008
_Y = np.array([0.2126, 0.7152, 0.0722])  # Rec. 709 / sRGB luminance weights (IEC 61966-2-1)


def box_blur(image: np.ndarray, radius: int) -> np.ndarray:
    """Mean over a (2r+1)² window, edges clamped; ``(H, W)`` float64 in and out."""
    a = np.asarray(image, np.float64)
    if radius <= 0:
        return a.copy()
    h, w = a.shape
    p = np.pad(a, radius, mode="edge")
    c = np.cumsum(np.cumsum(p, axis=0), axis=1)
    c = np.pad(c, ((1, 0), (1, 0)))
    k = 2 * radius + 1
    s = c[k : k + h, k : k + w] - c[0:h, k : k + w] - c[k : k + h, 0:w] + c[0:h, 0:w]
    return s / (k * k)


def _blur_radius(shape, blur_frac: float) -> int:
    return max(1, int(round(blur_frac * max(shape[:2]))))


def shadow_ratio(rgb_with, rgb_without, coverage, *, blur_frac: float = BLUR_FRAC, snap: float = SHADOW_SNAP) -> np.ndarray:
    """The product's shadow on the background, 1 = unshadowed (see the module docstring).

    Parameters
    ----------
    rgb_with, rgb_without : (H, W, 3) float ndarray
        Linear radiance of the shot and of the same view without the product.
    coverage : (H, W) float ndarray
        The product's coverage α in [0, 1].
    blur_frac : float
        Blur radius as a fraction of the longer side (at least 1 px).
    snap : float
        Ratios within ``snap`` of 1 become exactly 1.

    Returns
    -------
    (H, W) float64 ndarray in [0, 1]
    """
    rw = np.asarray(rgb_with, np.float64)
    ro = np.asarray(rgb_without, np.float64)
    a = np.clip(np.asarray(coverage, np.float64), 0.0, 1.0)
    bg = 1.0 - a
    r = _blur_radius(a.shape, blur_frac)
    yw = box_blur(np.nan_to_num(rw @ _Y) * bg, r)
    yo = box_blur(np.nan_to_num(ro @ _Y) * bg, r)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(yo > 1e-12, yw / yo, 1.0)
    return np.clip(ratio / (1.0 - snap), 0.0, 1.0)


def composite_white(rgb_with, rgb_without, coverage, exposure_scale: float, shadow=None):
    """White background with the kept contact shadow.

    Parameters
    ----------
    rgb_with, rgb_without : (H, W, 3) float ndarray
        Linear renders with and without the product.
    coverage : (H, W) float ndarray
        Product coverage α.
    exposure_scale : float
        Linear gain applied to the product (``2 ** exposure_ev``).
    shadow : (H, W) float ndarray, optional
        A precomputed :func:`shadow_ratio`.

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        Display-ready linear values (exposure applied; encode with ``exposure_ev=0``); every
        background pixel outside the shadow region is exactly 1.0.
    shadow : (H, W) float64 ndarray
    """
    rw = np.nan_to_num(np.asarray(rgb_with, np.float64))
    ro = np.nan_to_num(np.asarray(rgb_without, np.float64))
    a = np.clip(np.asarray(coverage, np.float64), 0.0, 1.0)
    s = shadow_ratio(rw, ro, a) if shadow is None else np.asarray(shadow, np.float64)
    bg = (1.0 - a)[..., None]
    s3 = s[..., None]
    edge = np.maximum(exposure_scale * (rw - bg * ro * s3), 0.0) + bg * s3
    out = np.where(a[..., None] <= 0.0, np.repeat(s3, 3, axis=2), edge)
    out = np.where(a[..., None] >= 1.0, exposure_scale * rw, out)
    return out, s


def composite_transparent(rgb_with, rgb_without, coverage, exposure_scale: float, shadow=None):
    """The product over a semi-transparent black shadow matte, straight RGBA.

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        Colour (exposure applied), un-premultiplied; black where only shadow is.
    alpha : (H, W) float64 ndarray
        α + (1 − α)(1 − s): 0 on the unshadowed background.
    shadow : (H, W) float64 ndarray
    """
    rw = np.nan_to_num(np.asarray(rgb_with, np.float64))
    ro = np.nan_to_num(np.asarray(rgb_without, np.float64))
    a = np.clip(np.asarray(coverage, np.float64), 0.0, 1.0)
    s = shadow_ratio(rw, ro, a) if shadow is None else np.asarray(shadow, np.float64)
    bg = (1.0 - a)[..., None]
    product_premult = np.maximum(exposure_scale * (rw - bg * ro * s[..., None]), 0.0)
    product_premult = np.where(a[..., None] >= 1.0, exposure_scale * rw, product_premult)
    product_premult = np.where(a[..., None] <= 0.0, 0.0, product_premult)
    alpha = a + (1.0 - a) * (1.0 - s)
    with np.errstate(divide="ignore", invalid="ignore"):
        rgb = np.where(alpha[..., None] > 0, product_premult / alpha[..., None], 0.0)
    return rgb, alpha, s


def composite_backdrop(rgb_with, exposure_scale: float) -> np.ndarray:
    """The rendered sweep as the background: the render, exposed."""
    return exposure_scale * np.nan_to_num(np.asarray(rgb_with, np.float64))


def composite(background: str, rgb_with, rgb_without, coverage, exposure_scale: float):
    """Dispatch on the background name; returns ``(rgb_linear, alpha or None, shadow or None)``."""
    if background == "white":
        rgb, s = composite_white(rgb_with, rgb_without, coverage, exposure_scale)
        return rgb, None, s
    if background == "transparent":
        return composite_transparent(rgb_with, rgb_without, coverage, exposure_scale)
    if background == "backdrop":
        return composite_backdrop(rgb_with, exposure_scale), None, None
    raise ValueError(f"unknown background {background!r} (white, transparent, backdrop)")
