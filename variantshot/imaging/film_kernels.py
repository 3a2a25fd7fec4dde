"""Film resolve kernel: per-pixel sums (float64) to means and the variance of the mean."""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import PARALLEL, njit, prange

import math


@njit(**PARALLEL)
def resolve(n, sum_rgb, sum_sq, sum_albedo, sum_normal, sum_alpha, sum_depth, n_depth,
            radiance, variance, albedo, normal, alpha, depth):
    """Means of the sums over ``n`` samples per pixel.

    Inputs: ``sum_rgb, sum_sq, sum_albedo, sum_normal`` (H, W, 3) float64, ``sum_alpha,
    sum_depth`` (H, W) float64, ``n_depth`` (H, W) float64 (samples whose primary ray hit).
    Outputs written in place (row r writes only row r): ``radiance, variance, albedo`` (H, W, 3),
    ``normal`` (H, W, 3) unit length (zero where nothing was hit), ``alpha`` (H, W),
    ``depth`` (H, W) (inf where nothing was hit).  ``variance`` is the unbiased sample
    variance divided by n: the variance of the pixel mean.
    """
    height = sum_rgb.shape[0]
    width = sum_rgb.shape[1]
    inv_n = 1.0 / n
    for y in prange(height):
        for x in range(width):
            for c in range(3):
                mean = sum_rgb[y, x, c] * inv_n
                radiance[y, x, c] = mean
                if n > 1:
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
