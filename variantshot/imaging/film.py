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
        Samples per pixel added so far (the largest count when pixels differ).
    n_pixel : (H, W) float64 or None
        Samples added to each pixel, when they differ (adaptive sampling); None: ``n`` everywhere.
    see : (H, W, 3)
        Sum of the see-through throughput (``path_kernels`` see-through mode; 0 otherwise).
    """

    rgb: np.ndarray
    rgb_sq: np.ndarray
    albedo: np.ndarray
    normal: np.ndarray
    alpha: np.ndarray
    depth: np.ndarray
    depth_n: np.ndarray
    n: int = 0
    n_pixel: np.ndarray | None = None
    see: np.ndarray | None = None

    @classmethod
    def zeros(cls, width: int, height: int) -> "FilmSums":
        z3 = lambda: np.zeros((height, width, 3), np.float64)  # noqa: E731
        z1 = lambda: np.zeros((height, width), np.float64)  # noqa: E731
        return cls(z3(), z3(), z3(), z3(), z1(), z1(), z1(), 0, see=z3())


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
        Samples per pixel: the largest count over the pixels (with adaptive sampling converged
        pixels stop earlier; see ``spp_map``).
    spp_map : (H, W) int32 ndarray or None
        Samples taken by each pixel when the render was adaptive (``RenderSettings.noise_target``);
        None for a fixed-spp render (every pixel has ``spp``).
    see_through : (H, W, 3) float64 ndarray or None
        Mean throughput of the camera paths that reached the studio floor through transmissive
        surfaces only (``render(..., see_through_material=)``): how much of the background
        behind the pixel shows through the product.  None when nothing was seen through (or the
        render did not ask for it).
    """

    radiance: np.ndarray
    albedo: np.ndarray
    normal: np.ndarray
    alpha: np.ndarray
    depth: np.ndarray
    variance: np.ndarray
    spp: int
    spp_map: np.ndarray | None = None
    see_through: np.ndarray | None = None

    @property
    def mean_spp(self) -> float:
        """Average samples per pixel (``spp`` for a fixed-spp render)."""
        return float(self.spp) if self.spp_map is None else float(np.mean(self.spp_map))

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
    if sums.n_pixel is not None:
        n_pixel = np.ascontiguousarray(sums.n_pixel, dtype=np.float64)
    else:
        n_pixel = np.full((h, w), float(sums.n))
    film_kernels.resolve(
        n_pixel, sums.rgb, sums.rgb_sq, sums.albedo, sums.normal, sums.alpha, sums.depth, sums.depth_n,
        radiance, variance, albedo, normal, alpha, depth,
    )
    see_through = None
    if sums.see is not None and np.any(sums.see != 0.0):
        see_through = sums.see / np.maximum(n_pixel, 1.0)[..., None]
    return Film(radiance=radiance, albedo=albedo, normal=normal, alpha=alpha, depth=depth, variance=variance,
                spp=int(sums.n), spp_map=None if sums.n_pixel is None else sums.n_pixel.astype(np.int32),
                see_through=see_through)


def tile_relative_error(sums: FilmSums, tile_px: int, floor: float) -> np.ndarray:
    """Relative standard error of the luminance of each ``tile_px`` square tile of the film.

    ``sqrt(mean var_Y) / max(mean Y, floor)`` over the tile's pixels, with ``var_Y`` the
    variance of a pixel's mean luminance (see ``film_kernels.tile_relative_error``).  Needs at
    least 2 samples in every pixel.

    Returns
    -------
    (ceil(H / tile_px), ceil(W / tile_px)) float64 ndarray
    """
    from . import film_kernels

    h, w = sums.alpha.shape
    n_pixel = sums.n_pixel if sums.n_pixel is not None else np.full((h, w), float(sums.n))
    out = np.zeros((-(-h // tile_px), -(-w // tile_px)))
    film_kernels.tile_relative_error(sums.rgb, sums.rgb_sq, np.ascontiguousarray(n_pixel, dtype=np.float64),
                                     int(tile_px), float(floor), out)
    return out
