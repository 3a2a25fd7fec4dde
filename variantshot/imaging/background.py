"""Backgrounds of a shot: pure white with a kept contact shadow, transparent, or the sweep itself.

Shadow catcher
--------------
A shot on a ``white`` or ``transparent`` background keeps the product's shadow but not the
studio floor.  The shadow is the ratio of what the floor receives with the product over what it
receives without it, ``ratio`` in [0, 1] per pixel (computed by the batch from the rig's lights:
:func:`variantshot.geometry.rig.direct_light_ratio`).  As on a real white sweep, the background
is lit ``boost_ev`` stops above paper white (0.75 stop by default, the rig's ``white_boost_ev``;
photographers over-light a white sweep by 1-2 stops so that it burns out to pure white and only
the contact shadow stays, common practice, no source):

    s = min(1, ratio · 2 ** boost_ev)

Every pixel with ``ratio >= 2 ** -boost_ev`` is **outside the shadow region** and becomes
exactly 1.0 (paper white, code 255); inside it the shadow deepens continuously to the contact
line.

* ``white``: background pixels (coverage α = 0) are ``s``; product pixels (α = 1) are the exposed
  render; edge pixels take the product's share of the render, ``L − (1 − α) F`` with ``F`` the
  floor radiance next to them (a masked blur of the neighbouring background pixels), plus
  ``(1 − α) s``, so edges show no grey fringe from the studio floor.
* ``transparent``: the product over a black shadow matte of opacity ``1 − s``, as straight
  (un-premultiplied) RGBA: alpha = α + (1 − α)(1 − s).
* ``backdrop``: the render as it is, exposed.

Glass (see-through)
-------------------
Through clear glass the camera would see the studio sweep at its rendered, unboosted level,
while the sweep around the product is replaced by the snapped background: clear glass would
read as a grey object.  So on ``white`` and ``transparent`` the batch renders in the path
kernel's see-through mode: a camera path that reaches the sweep after transmissions only
stops there; its throughput goes to the film's see-through channel ``τ`` (RGB, the mean over
the pixel's samples, so 0 ≤ τ ≤ α), and the render adds ``τ`` × paper white in place of the
sweep (so adaptive sampling, the denoiser and QA see the glass as it is composited; the rest
of the render is the light the glass reflects and refracts from the rig).  With ``P`` the
exposed product share above (which then holds ``τ`` × 1):

* ``white``: ``out = P + (1 − α) s + τ (s − 1)``: the snapped background ``s`` through the glass
  as around it (``τ s`` in all), exactly ``P + (1 − α) s`` where the background is unshadowed;
* ``transparent`` (straight alpha; a viewer shows ``C A + (1 − A) B`` over a background ``B``):
  ``A = 1 − s ((1 − α) + Y(τ))``, ``C = (P − τ) / A``; the pixel then shows
  ``P − τ + s ((1 − α) + Y(τ)) B``: the shadow-matted background through the glass as well as
  around it (Y the luminance; a tinted glass's colour cast on ``B`` cannot be expressed with
  one alpha and is left out).

``τ`` is refraction-accurate (it follows the bent paths) but the ``s`` it is multiplied by is
the shadow value straight behind the pixel.  ``backdrop`` renders everything physically.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "DEFAULT_BOOST_EV",
    "box_blur",
    "snap_shadow",
    "floor_behind",
    "composite_white",
    "composite_transparent",
    "composite_backdrop",
    "composite",
]

DEFAULT_BOOST_EV = 0.75


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


def snap_shadow(ratio, boost_ev: float = DEFAULT_BOOST_EV) -> np.ndarray:
    """``min(1, ratio · 2 ** boost_ev)``: the shadow on a sweep lit ``boost_ev`` stops over white;
    ratios at or above ``2 ** -boost_ev`` become exactly 1."""
    r = np.nan_to_num(np.asarray(ratio, np.float64), nan=1.0)
    return np.clip(r * 2.0 ** float(boost_ev), 0.0, 1.0)


def floor_behind(rgb_linear, coverage, radius: int = 3) -> np.ndarray:
    """Estimate of the floor's radiance behind each pixel from nearby pure-background pixels
    (α = 0): a box blur of the render weighted by the background mask; 0 where none is near."""
    rgb = np.nan_to_num(np.asarray(rgb_linear, np.float64))
    bgmask = (np.asarray(coverage, np.float64) <= 0.0).astype(np.float64)
    wsum = box_blur(bgmask, radius)
    out = np.zeros_like(rgb)
    for k in range(3):
        num = box_blur(rgb[..., k] * bgmask, radius)
        with np.errstate(invalid="ignore", divide="ignore"):
            out[..., k] = np.where(wsum > 0, num / np.maximum(wsum, 1e-300), 0.0)
    return out


def _product_premultiplied(rgb, a, exposure_scale):
    """Exposed product colour × α: the render minus the floor's share on edge pixels."""
    bg = (1.0 - a)[..., None]
    edge = np.maximum(rgb - bg * floor_behind(rgb, a), 0.0)
    prod = np.where(a[..., None] >= 1.0, rgb, edge)
    prod = np.where(a[..., None] <= 0.0, 0.0, prod)
    return exposure_scale * prod


def _see_through(see_through, a):
    """τ clipped to [0, α] per channel (a denoised τ may stray past the product's edge); 0 when None."""
    if see_through is None:
        return None
    t = np.nan_to_num(np.asarray(see_through, np.float64))
    return np.clip(t, 0.0, a[..., None])


def composite_white(rgb_with, coverage, exposure_scale: float, shadow, see_through=None) -> np.ndarray:
    """White background with the kept contact shadow.

    Parameters
    ----------
    rgb_with : (H, W, 3) float ndarray
        Linear render of the shot (product in the rig).
    coverage : (H, W) float ndarray
        Product coverage α in [0, 1].
    exposure_scale : float
        Linear gain applied to the product (``2 ** exposure_ev``).
    shadow : (H, W) float ndarray
        Snapped shadow ``s`` (:func:`snap_shadow`), 1 = unshadowed.
    see_through : (H, W, 3) float ndarray, optional
        The film's see-through channel τ of a render whose radiance holds τ × paper white
        (module docstring): ``τ (s − 1)`` is added.

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        Display-ready linear values (encode with ``exposure_ev=0``); every background pixel with
        ``s == 1`` is exactly 1.0.
    """
    rgb = np.nan_to_num(np.asarray(rgb_with, np.float64))
    a = np.clip(np.asarray(coverage, np.float64), 0.0, 1.0)
    s = np.asarray(shadow, np.float64)
    out = _product_premultiplied(rgb, a, exposure_scale) + ((1.0 - a) * s)[..., None]
    out = np.where(a[..., None] >= 1.0, exposure_scale * rgb, out)
    tau = _see_through(see_through, a)
    if tau is not None:
        out = out + tau * (s[..., None] - 1.0)
    return out


def composite_transparent(rgb_with, coverage, exposure_scale: float, shadow, see_through=None):
    """The product over a semi-transparent black shadow matte, straight RGBA.

    ``see_through`` is the film's τ (module docstring), for a render whose radiance holds τ ×
    paper white.

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        Colour (exposure applied), un-premultiplied; black where only shadow is.
    alpha : (H, W) float64 ndarray
        1 − s ((1 − α) + Y(τ)) (τ the see-through channel, 0 without it): α + (1 − α)(1 − s)
        for opaque products, 0 on the unshadowed background, lower through clear glass.
    """
    rgb = np.nan_to_num(np.asarray(rgb_with, np.float64))
    a = np.clip(np.asarray(coverage, np.float64), 0.0, 1.0)
    s = np.asarray(shadow, np.float64)
    premult = _product_premultiplied(rgb, a, exposure_scale)
    alpha = a + (1.0 - a) * (1.0 - s)
    tau = _see_through(see_through, a)
    if tau is not None:
        premult = np.maximum(premult - tau, 0.0)  # the render's paper white behind the glass
        y = np.clip(tau @ np.array([0.2126, 0.7152, 0.0722]), 0.0, a)  # IEC 61966-2-1 luminance row
        alpha = np.clip(alpha - s * y, 0.0, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        colour = np.where(alpha[..., None] > 0, premult / np.maximum(alpha, 1e-300)[..., None], 0.0)
    return colour, alpha


def composite_backdrop(rgb_with, exposure_scale: float) -> np.ndarray:
    """The rendered sweep as the background: the render, exposed."""
    return exposure_scale * np.nan_to_num(np.asarray(rgb_with, np.float64))


def composite(background: str, rgb_with, coverage, exposure_scale: float, shadow=None, see_through=None):
    """Dispatch on the background name; returns ``(rgb_linear, alpha or None)``.

    ``see_through`` (the film's τ, white and transparent only) puts the background behind glass."""
    if background == "white":
        return composite_white(rgb_with, coverage, exposure_scale, shadow, see_through), None
    if background == "transparent":
        return composite_transparent(rgb_with, coverage, exposure_scale, shadow, see_through)
    if background == "backdrop":
        return composite_backdrop(rgb_with, exposure_scale), None
    raise ValueError(f"unknown background {background!r} (white, transparent, backdrop)")
