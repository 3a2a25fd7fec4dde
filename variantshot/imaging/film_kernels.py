"""Film resolve kernel: per-pixel sums (float64) to means and the variance of the mean."""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, PARALLEL, njit, prange

import math


@njit(**PARALLEL)
def resolve(n_pixel, sum_rgb, sum_sq, sum_albedo, sum_normal, sum_alpha, sum_depth, n_depth,
            radiance, variance, albedo, normal, alpha, depth):
    """Means of the sums over ``n_pixel[y, x]`` samples of each pixel.

    Inputs: ``n_pixel`` (H, W) float64 samples taken per pixel (all equal for a fixed-spp
    render, per pixel with adaptive sampling), ``sum_rgb, sum_sq, sum_albedo, sum_normal``
    (H, W, 3) float64, ``sum_alpha, sum_depth`` (H, W) float64, ``n_depth`` (H, W) float64 (samples whose primary ray hit).
    Outputs written in place (row r writes only row r): ``radiance, variance, albedo`` (H, W, 3),
    ``normal`` (H, W, 3) unit length (zero where nothing was hit), ``alpha`` (H, W),
    ``depth`` (H, W) (inf where nothing was hit).  ``variance`` is the unbiased sample
    variance divided by n: the variance of the pixel mean.
    """
    height = sum_rgb.shape[0]
    width = sum_rgb.shape[1]
    for y in prange(height):
        for x in range(width):
            n = max(n_pixel[y, x], 1.0)
            inv_n = 1.0 / n
            for c in range(3):
                mean = sum_rgb[y, x, c] * inv_n
                radiance[y, x, c] = mean
                if n > 1.0:
                    var = (sum_sq[y, x, c] - n * mean * mean) / (n - 1)
                    variance[y, x, c] = max(var, 0.0) * inv_n
                else:
                    variance[y, x, c] = math.inf
                albedo[y, x, c] = sum_albedo[y, x, c] * inv_n
            nx = sum_normal[y, x, 0]
            ny = sum_normal[y, x, 1]
            nz = sum_normal[y, x, 2]
            ln = math.sqrt(nx * nx + ny * ny + nz * nz)
            if ln > 0.0:
                normal[y, x, 0] = nx / ln
                normal[y, x, 1] = ny / ln
                normal[y, x, 2] = nz / ln
            else:
                normal[y, x, 0] = 0.0
                normal[y, x, 1] = 0.0
                normal[y, x, 2] = 0.0
            alpha[y, x] = sum_alpha[y, x] * inv_n
            if n_depth[y, x] > 0.0:
                depth[y, x] = sum_depth[y, x] / n_depth[y, x]
            else:
                depth[y, x] = math.inf


@njit(**PARALLEL)
def tile_relative_error(sum_rgb, sum_sq, n_pixel, tile_px, floor, out):
    """Relative standard error of the luminance of every ``tile_px`` x ``tile_px`` tile.

    For a tile, ``out[ty, tx] = sqrt(mean over its pixels of var_Y) / max(mean Y, floor)``,
    where ``Y = 0.2126 R + 0.7152 G + 0.0722 B`` (the Y row of the sRGB to XYZ matrix,
    IEC 61966-2-1) is the pixel's mean luminance and ``var_Y`` the variance of that mean from
    the pixel's own samples (the three channels' sums combined per sample would need the
    cross terms, so ``var_Y`` uses the sum of ``w_c**2 var_c``, channels taken as independent,
    as the QA noise check does).  Inputs: ``sum_rgb, sum_sq`` (H, W, 3) float64, ``n_pixel``
    (H, W) float64 (pixels with fewer than 2 samples are left out; a tile without any gets
    0), ``floor`` float (linear luminance); output ``out``
    (ceil(H / tile), ceil(W / tile)) float64, tile row ``ty`` written only by iteration ``ty``.
    """
    height = sum_rgb.shape[0]
    width = sum_rgb.shape[1]
    n_ty = out.shape[0]
    n_tx = out.shape[1]
    for ty in prange(n_ty):
        y0 = ty * tile_px
        y1 = min(height, y0 + tile_px)
        for tx in range(n_tx):
            x0 = tx * tile_px
            x1 = min(width, x0 + tile_px)
            sum_y = 0.0
            sum_var = 0.0
            count = 0
            for y in range(y0, y1):
                for x in range(x0, x1):
                    n = n_pixel[y, x]
                    if n < 2.0:
                        continue  # not sampled (outside the render's sample mask)
                    lum = 0.0
                    var = 0.0
                    for c in range(3):
                        w = 0.2126 if c == 0 else (0.7152 if c == 1 else 0.0722)
                        mean = sum_rgb[y, x, c] / n
                        v = (sum_sq[y, x, c] - n * mean * mean) / (n - 1.0)
                        lum += w * mean
                        var += w * w * max(v, 0.0) / n
                    sum_y += lum
                    sum_var += var
                    count += 1
            if count == 0:
                out[ty, tx] = 0.0
                continue
            mean_y = sum_y / count
            out[ty, tx] = math.sqrt(sum_var / count) / max(mean_y, floor)


@njit(**KERNEL)
def mean_sampled_luminance(sum_rgb, n_pixel):
    """Mean over the sampled pixels (``n_pixel > 0``) of the Rec. 709 / sRGB luminance
    0.2126 R + 0.7152 G + 0.0722 B of each pixel's mean; 0 when none is sampled.  Serial, so
    the sum's order, and the result, does not depend on the thread count."""
    total = 0.0
    count = 0
    for y in range(sum_rgb.shape[0]):
        for x in range(sum_rgb.shape[1]):
            n = n_pixel[y, x]
            if n > 0.0:
                total += (0.2126 * sum_rgb[y, x, 0] + 0.7152 * sum_rgb[y, x, 1] + 0.0722 * sum_rgb[y, x, 2]) / n
                count += 1
    return total / count if count > 0 else 0.0
