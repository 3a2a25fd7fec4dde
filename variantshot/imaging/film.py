"""The film: per-pixel float64 sums of a render and the resolved image with its passes.

The path kernels add every sample's value to :class:`FilmSums` (each image row written only
by the thread that renders it, in sample order, so sums are bit-identical on any thread
count); :func:`resolve_film` turns the sums into a :class:`Film`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class FilmSums:
    """Running per-pixel sums (all float64).

    Attributes
    ----------
    rgb, rgb_sq : (H, W, 3)
        Sum and sum of squares of the sample radiance (linear Rec.709/sRGB primaries).
    albedo, normal : (H, W, 3)
        Sums of the first-hit base colour and world shading normal.
    alpha : (H, W)
        Sum of coverage (1 when the primary ray reached an opaque surface).
    depth, depth_n : (H, W)
        Sum of first-hit distances and the number of samples that hit.
    n : int
        Samples per pixel added so far.
    """

    rgb: np.ndarray
    rgb_sq: np.ndarray
    albedo: np.ndarray
    normal: np.ndarray
    alpha: np.ndarray
    depth: np.ndarray
    depth_n: np.ndarray
    n: int = 0

    @classmethod
    def zeros(cls, width: int, height: int) -> "FilmSums":
        z3 = lambda: np.zeros((height, width, 3), np.float64)  # noqa: E731
        z1 = lambda: np.zeros((height, width), np.float64)  # noqa: E731
        return cls(z3(), z3(), z3(), z3(), z1(), z1(), z1(), 0)


@dataclass
class Film:
    """A resolved render.

    Attributes
    ----------
    radiance : (H, W, 3) float64 ndarray
        Mean radiance, linear Rec.709/sRGB primaries, scene-referred.
    albedo : (H, W, 3) float64 ndarray
        Mean base colour (linear) at the first surface hit; 0 on background.
    normal : (H, W, 3) float64 ndarray
        Unit world-space shading normal at the first hit (average over samples); 0 on background.
    alpha : (H, W) float64 ndarray
        Coverage in [0, 1]: the fraction of samples whose camera ray reached a surface.
    depth : (H, W) float64 ndarray
        Mean distance (metres, along the camera ray) to the first surface; inf on background.
    variance : (H, W, 3) float64 ndarray
        Per-pixel variance of the mean radiance (sample variance / spp); inf when spp = 1.
    spp : int
        Samples per pixel.
    """

    radiance: np.ndarray
    albedo: np.ndarray
    normal: np.ndarray
    alpha: np.ndarray
    depth: np.ndarray
    variance: np.ndarray
    spp: int

    @property
    def width(self) -> int:
        return int(self.radiance.shape[1])

    @property
    def height(self) -> int:
        return int(self.radiance.shape[0])


def resolve_film(sums: FilmSums) -> Film:
    """Means and variance of the mean from running sums (see ``film_kernels.resolve``)."""
    from . import film_kernels

    h, w = sums.alpha.shape
    radiance = np.zeros((h, w, 3))
    variance = np.zeros((h, w, 3))
    albedo = np.zeros((h, w, 3))
    normal = np.zeros((h, w, 3))
    alpha = np.zeros((h, w))
    depth = np.zeros((h, w))
    n = max(int(sums.n), 1)
    film_kernels.resolve(
        n, sums.rgb, sums.rgb_sq, sums.albedo, sums.normal, sums.alpha, sums.depth, sums.depth_n,
        radiance, variance, albedo, normal, alpha, depth,
    )
    return Film(radiance=radiance, albedo=albedo, normal=normal, alpha=alpha, depth=depth, variance=variance,
                spp=int(sums.n))
