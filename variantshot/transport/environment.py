"""The environment light: an equirectangular radiance map (or a uniform colour) and its sampling tables.

:func:`make_environment` turns a number, an RGB triple, an image path or an ``(H, W, 3)`` array into
an :class:`EnvMap` of plain arrays that the path kernels take directly (``env_kernels``).  The
mapping (+Y up, centre column -Z, top row +Y), the rotation about +Y and the sampling density
are documented in :mod:`variantshot.transport.env_kernels`.

Importance sampling uses the pixel weights ``luminance(pixel) * sin(theta_row_centre)``
(Rec. 709 / sRGB luminance weights), as a piecewise-constant density over pixels built from a
marginal CDF over rows and a conditional CDF over the columns of each row.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import NamedTuple

import numpy as np

from ..errors import InputError
from ..imaging.colour import LUMINANCE_WEIGHTS_SRGB

__all__ = [
    "EnvMap",
    "make_environment",
    "environment_radiance",
    "sample_environment",
    "environment_pdf",
    "environment_mean_luminance",
    "pixel_solid_angles",
]


class EnvMap(NamedTuple):
    """An environment light as arrays.

    Attributes
    ----------
    pixels : (H, W, 3) float32 ndarray
        Linear radiance, sRGB primaries, rows top (+Y) to bottom (-Y); (1, 1, 3) when uniform.
    cdf_rows : (H + 1,) float64 ndarray
        Marginal CDF over rows, from 0 to exactly 1.
    cdf_cols : (H, W + 1) float64 ndarray
        Conditional CDF over the columns of each row, each from 0 to exactly 1.
    params : (4,) float64 ndarray
        ``[rotation_rad, is_uniform (0 or 1), total_weight, 0]``; ``total_weight`` is the
        pixel-sum estimate of the integral of luminance over the sphere (cd/m^2 x sr when the
        map is in cd/m^2), ``4 pi Y`` for a uniform environment.
    """

    pixels: np.ndarray
    cdf_rows: np.ndarray
    cdf_cols: np.ndarray
    params: np.ndarray


def _uniform(rgb: np.ndarray, rotation_rad: float) -> EnvMap:
    pixels = np.asarray(rgb, dtype=np.float32).reshape(1, 1, 3).copy()
    y = float(pixels[0, 0].astype(np.float64) @ LUMINANCE_WEIGHTS_SRGB)
    return EnvMap(
        pixels=pixels,
        cdf_rows=np.array([0.0, 1.0]),
        cdf_cols=np.array([[0.0, 1.0]]),
        params=np.array([float(rotation_rad), 1.0, 4.0 * math.pi * y, 0.0]),
    )


def _cdf(weights: np.ndarray) -> np.ndarray:
    """CDFs along the last axis, from 0 to exactly 1; a row of zero weight becomes uniform."""
    n = weights.shape[-1]
    c = np.concatenate([np.zeros(weights.shape[:-1] + (1,)), np.cumsum(weights, axis=-1)], axis=-1)
    total = c[..., -1:]
    uniform = np.broadcast_to(np.linspace(0.0, 1.0, n + 1), c.shape)
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(total > 0.0, c / np.where(total > 0.0, total, 1.0), uniform)
    c[..., -1] = 1.0
    return np.ascontiguousarray(np.maximum.accumulate(c, axis=-1))


def pixel_solid_angles(height: int, width: int) -> np.ndarray:
    """Exact solid angle of each pixel row of an equirectangular map.

    Parameters
    ----------
    height, width : int

    Returns
    -------
    omega : (H,) float64 ndarray
        ``(2 pi / W) (cos theta_top - cos theta_bottom)`` steradians per pixel of each row;
        ``W * omega.sum() == 4 pi``.
    """
    theta = np.linspace(0.0, math.pi, height + 1)
    return (2.0 * math.pi / width) * (np.cos(theta[:-1]) - np.cos(theta[1:]))


def _from_pixels(pixels: np.ndarray, rotation_rad: float, where: str) -> EnvMap:
    if pixels.ndim != 3 or pixels.shape[2] != 3 or pixels.shape[0] < 1 or pixels.shape[1] < 1:
        raise InputError(f"environment image has shape {pixels.shape}", file=where,
                         accepted="(H, W, 3) linear RGB")
    if not np.all(np.isfinite(pixels)):
        raise InputError("environment image holds NaN or infinite values", file=where,
                         accepted="finite linear radiance")
    pixels = np.maximum(pixels.astype(np.float32), np.float32(0.0))  # negatives carry no light
    first = pixels[0, 0]
    if np.all(pixels == first):  # constant map: exact uniform sampling
        return _uniform(first, rotation_rad)
    h, w, _ = pixels.shape
    theta_c = (np.arange(h) + 0.5) * (math.pi / h)
    lum = pixels.astype(np.float64) @ LUMINANCE_WEIGHTS_SRGB
    weights = lum * np.sin(theta_c)[:, None]
    total = float(weights.sum()) * (2.0 * math.pi * math.pi / (h * w))
    if total <= 0.0:  # no luminance anywhere (e.g. all black): nothing to importance-sample
        return _uniform(np.zeros(3), rotation_rad)
    return EnvMap(
        pixels=np.ascontiguousarray(pixels),
        cdf_rows=_cdf(weights.sum(axis=1)),
        cdf_cols=_cdf(weights),
        params=np.array([float(rotation_rad), 0.0, total, 0.0]),
    )


def make_environment(value=None, rotation_rad: float = 0.0) -> EnvMap:
    """Build the environment light.

    Parameters
    ----------
    value : None, float, (3,) array_like, str or Path, or (H, W, 3) ndarray
        ``None``: no environment light (uniform black).  A number: uniform grey radiance.
        Three numbers: uniform linear sRGB radiance.  A path: an equirectangular image read by
        :func:`variantshot.imaging.files.read_environment_image` (.hdr, .pfm, .npy, .png, .jpg).
        An array: linear radiance in the equirectangular layout.
    rotation_rad : float
        Turn of the environment about +Y (counter-clockwise seen from above).

    Returns
    -------
    env : EnvMap
        A constant or all-black image becomes a uniform environment (``params[1] = 1``).

    Raises
    ------
    InputError
        For negative or non-finite radiance, a bad shape, or an unreadable image (naming it).
    """
    if not math.isfinite(float(rotation_rad)):
        raise InputError(f"environment rotation {rotation_rad!r} is not a finite angle",
                         accepted="radians")
    if value is None:
        return _uniform(np.zeros(3), rotation_rad)
    if isinstance(value, (str, Path)):
        from ..imaging.files import read_environment_image

        return _from_pixels(read_environment_image(value), rotation_rad, str(value))
    arr = np.asarray(value)
    if arr.dtype.kind not in "fiu":
        raise InputError(f"environment value {value!r} is not a number, RGB triple, path or image",
                         accepted="a number, 3 numbers, an image path or an (H, W, 3) array")
    if arr.ndim <= 1:
        rgb = np.broadcast_to(arr.astype(np.float64), (3,)) if arr.size in (1, 3) else None
        if rgb is None or not np.all(np.isfinite(rgb)) or np.any(rgb < 0.0):
            raise InputError(f"environment radiance {value!r} is not 1 or 3 non-negative numbers",
                             accepted="a number or 3 numbers >= 0")
        return _uniform(rgb, rotation_rad)
    return _from_pixels(arr.astype(np.float32), rotation_rad, "environment array")


def _dirs(directions) -> np.ndarray:
    d = np.ascontiguousarray(directions, dtype=np.float64)
    if d.ndim != 2 or d.shape[1] != 3:
        raise ValueError(f"directions: expected shape (N, 3), got {d.shape}")
    return d


def environment_radiance(env: EnvMap, directions) -> np.ndarray:
    """Radiance from each world direction (batch form of ``env_kernels.env_radiance``).

    Parameters
    ----------
    env : EnvMap
    directions : (N, 3) array_like
        World directions; need not be unit length.

    Returns
    -------
    rgb_linear : (N, 3) float64 ndarray
    """
    from . import env_kernels

    d = _dirs(directions)
    out = np.empty((d.shape[0], 3))
    env_kernels.env_radiance_batch(env.pixels, env.params, d, out)
    return out


def sample_environment(env: EnvMap, u) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Importance-sample directions (batch form of ``env_kernels.env_sample``).

    Parameters
    ----------
    env : EnvMap
    u : (N, 2) array_like
        Uniform numbers in [0, 1).

    Returns
    -------
    directions : (N, 3) float64 ndarray, unit world directions
    pdf : (N,) float64 ndarray, density per steradian
    rgb_linear : (N, 3) float64 ndarray, radiance from each direction
    """
    from . import env_kernels

    uu = np.ascontiguousarray(u, dtype=np.float64)
    if uu.ndim != 2 or uu.shape[1] != 2:
        raise ValueError(f"u: expected shape (N, 2), got {uu.shape}")
    out = np.empty((uu.shape[0], 7))
    env_kernels.env_sample_batch(env.pixels, env.cdf_rows, env.cdf_cols, env.params, uu, out)
    return out[:, :3].copy(), out[:, 3].copy(), out[:, 4:].copy()


def environment_pdf(env: EnvMap, directions) -> np.ndarray:
    """Solid-angle density of :func:`sample_environment` at world directions.

    Parameters
    ----------
    env : EnvMap
    directions : (N, 3) array_like

    Returns
    -------
    pdf : (N,) float64 ndarray
    """
    from . import env_kernels

    d = _dirs(directions)
    out = np.empty(d.shape[0])
    env_kernels.env_pdf_batch(env.pixels, env.cdf_rows, env.cdf_cols, env.params, d, out)
    return out


def environment_mean_luminance(env: EnvMap) -> float:
    """Luminance averaged over the sphere (``total_weight / 4 pi``), for light selection.

    Parameters
    ----------
    env : EnvMap

    Returns
    -------
    y : float
        Same unit as the map's radiance.
    """
    return float(env.params[2]) / (4.0 * math.pi)
