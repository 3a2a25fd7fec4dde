"""Image measurements for QA: pure functions from arrays to numbers (no files, no thresholds).

Every function takes plain numpy arrays and returns a float (or a small tuple of floats); the
pass / warn / fail decisions live in :mod:`variantshot.review.qa`.

Conventions
-----------
* ``rgb_srgb8`` is an ``(H, W, 3)`` uint8 display image (sRGB-encoded, as written to PNG).
* ``coverage`` is an ``(H, W)`` float array in [0, 1]: the share of each pixel covered by the
  product (the film's alpha pass, or the alpha channel of a transparent PNG).
* ``mask`` is an ``(H, W)`` bool array: True where the product is.
* Rows are ``y`` (top = 0), columns are ``x`` (left = 0); fractions are of the frame's size.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "WHITE_SRGB8",
    "mask_from_coverage",
    "mask_from_non_white",
    "bounding_box",
    "fill_ratio",
    "centring_offset",
    "edge_clipping",
    "shadow_zone",
    "white_purity",
    "clipped_highlights",
    "relative_standard_error",
    "mean_srgb8",
]

WHITE_SRGB8 = 255


def _check_hw(array: np.ndarray, name: str) -> np.ndarray:
    a = np.asarray(array)
    if a.ndim != 2:
        raise ValueError(f"{name} must be an (H, W) array, got shape {a.shape}")
    return a


def _check_rgb8(rgb_srgb8) -> np.ndarray:
    a = np.asarray(rgb_srgb8)
    if a.ndim != 3 or a.shape[2] < 3:
        raise ValueError(f"rgb_srgb8 must be an (H, W, 3) array, got shape {a.shape}")
    if a.dtype != np.uint8:
        raise TypeError(f"rgb_srgb8 must be uint8 (8-bit codes), got {a.dtype}")
    return a[:, :, :3]


def mask_from_coverage(coverage, threshold: float = 0.5) -> np.ndarray:
    """Product mask from a coverage (alpha) image.

    Parameters
    ----------
    coverage : (H, W) float ndarray
        Share of each pixel covered by the product, in [0, 1] (uint8 alpha is accepted and
        scaled by 1/255).
    threshold : float
        A pixel belongs to the product when its coverage is at least this.

    Returns
    -------
    mask : (H, W) bool ndarray
    """
    a = _check_hw(coverage, "coverage")
    if a.dtype == np.uint8:
        a = a.astype(np.float64) / 255.0
    return np.asarray(a, dtype=np.float64) >= threshold


def mask_from_non_white(rgb_srgb8, tolerance: int = 0) -> np.ndarray:
    """Mask of pixels that are not background white (used when no coverage pass exists).

    Parameters
    ----------
    rgb_srgb8 : (H, W, 3) uint8 ndarray
    tolerance : int
        A pixel counts as white when every channel is at least ``255 - tolerance``.

    Returns
    -------
    mask : (H, W) bool ndarray
        True where some channel is darker than white (the product *and* its shadow).
    """
    rgb = _check_rgb8(rgb_srgb8)
    return np.any(rgb < WHITE_SRGB8 - int(tolerance), axis=2)


def bounding_box(mask) -> tuple[int, int, int, int] | None:
    """Tight bounding box ``(y0, x0, y1, x1)`` of a mask (end-exclusive), or None if empty."""
    m = _check_hw(mask, "mask").astype(bool)
    rows = np.flatnonzero(m.any(axis=1))
    if rows.size == 0:
        return None
    cols = np.flatnonzero(m.any(axis=0))
    return int(rows[0]), int(cols[0]), int(rows[-1]) + 1, int(cols[-1]) + 1


def fill_ratio(mask) -> float:
    """Longest side of the product's bounding box over the frame's matching side.

    ``max(bbox_height / H, bbox_width / W)``: 1.0 when the product spans the frame in either
    direction, 0.0 for an empty mask.  This is the usual marketplace reading of "the product
    fills 85 % of the frame" (common practice, no source).
    """
    m = _check_hw(mask, "mask")
    box = bounding_box(m)
    if box is None:
        return 0.0
    h, w = m.shape
    y0, x0, y1, x1 = box
    return float(max((y1 - y0) / h, (x1 - x0) / w))


def centring_offset(mask) -> tuple[float, float]:
    """Offset of the bounding-box centre from the frame centre, as fractions of the frame.

    Returns
    -------
    dx_frac, dy_frac : float
        Positive to the right and downwards; ``(0, 0)`` is perfectly centred.  An empty mask
        gives ``(nan, nan)``.
    """
    m = _check_hw(mask, "mask")
    box = bounding_box(m)
    if box is None:
        return float("nan"), float("nan")
    h, w = m.shape
    y0, x0, y1, x1 = box
    return float((x0 + x1) / 2.0 / w - 0.5), float((y0 + y1) / 2.0 / h - 0.5)


def edge_clipping(mask) -> float:
    """Share of the frame's border pixels (outermost rows and columns) that the product covers.

    0.0 means the product stays inside the frame; anything above 0 means it touches (and is
    probably cut by) an edge.
    """
    m = _check_hw(mask, "mask").astype(bool)
    h, w = m.shape
    if h == 0 or w == 0:
        return 0.0
    border = np.zeros_like(m)
    border[0, :] = border[-1, :] = True
    border[:, 0] = border[:, -1] = True
    return float(np.count_nonzero(m & border) / np.count_nonzero(border))


def shadow_zone(mask, margin_frac: float = 0.08) -> np.ndarray:
    """Where a product's contact shadow may fall: its bounding box grown sideways and downwards.

    The box is grown by ``margin_frac`` of the frame's width on the left and right, by
    ``margin_frac`` of the frame's height below, and by a quarter of that above (a soft box
    above the product throws its shadow down and out, not up).

    Returns
    -------
    zone : (H, W) bool ndarray
        True inside the grown box (this includes the product itself).
    """
    m = _check_hw(mask, "mask").astype(bool)
    h, w = m.shape
    zone = np.zeros_like(m)
    box = bounding_box(m)
    if box is None:
        return zone
    y0, x0, y1, x1 = box
    mx = int(np.ceil(margin_frac * w))
    my = int(np.ceil(margin_frac * h))
    zone[max(0, y0 - my // 4) : min(h, y1 + my), max(0, x0 - mx) : min(w, x1 + mx)] = True
    return zone


def white_purity(rgb_srgb8, exclude) -> float:
    """Share of exactly-white pixels (255, 255, 255) outside the excluded region.

    Parameters
    ----------
    rgb_srgb8 : (H, W, 3) uint8 ndarray
    exclude : (H, W) bool ndarray
        Pixels not judged (the product and its shadow zone).

    Returns
    -------
    purity : float
        In [0, 1]; 1.0 also when nothing is left to judge.
    """
    rgb = _check_rgb8(rgb_srgb8)
    ex = _check_hw(exclude, "exclude").astype(bool)
    judged = ~ex
    n = np.count_nonzero(judged)
    if n == 0:
        return 1.0
    white = np.all(rgb == WHITE_SRGB8, axis=2)
    return float(np.count_nonzero(white & judged) / n)


def clipped_highlights(rgb_srgb8, mask) -> float:
    """Share of product pixels blown out to white (all three channels at 255).

    A saturated colour reaching 255 in one channel is not counted: only pixels where the
    detail is lost in every channel.  Returns 0.0 for an empty mask.
    """
    rgb = _check_rgb8(rgb_srgb8)
    m = _check_hw(mask, "mask").astype(bool)
    n = np.count_nonzero(m)
    if n == 0:
        return 0.0
    blown = np.all(rgb == WHITE_SRGB8, axis=2)
    return float(np.count_nonzero(blown & m) / n)


def relative_standard_error(rgb_linear, variance, mask, weights=(0.2126, 0.7152, 0.0722),
                            statistic: str = "median") -> float:
    """Residual Monte Carlo noise of the product: standard error of the luminance over its value.

    Per pixel the luminance estimate is ``Y = w . rgb`` and its variance (channels taken as
    independent) ``var_Y = sum(w**2 * variance)``.  With ``statistic="median"`` (default) the
    result is the median over the product pixels of the per-pixel relative standard error
    ``sqrt(var_Y) / Y``: the typical graininess, robust to a few fireflies.  With ``"rms"`` it
    is ``sqrt(mean(var_Y)) / mean(Y)``: the RMS standard error relative to the mean luminance.

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray
        The film's mean radiance, linear sRGB primaries.
    variance : (H, W, 3) float ndarray
        Per-pixel variance *of the mean* (the film's ``variance`` pass).
    mask : (H, W) bool ndarray
        Product pixels.
    weights : (3,) floats
        Luminance weights (default: the Y row of the sRGB to XYZ matrix, IEC 61966-2-1).
    statistic : {"median", "rms"}

    Returns
    -------
    rse : float
        Dimensionless; ``nan`` for an empty mask or a black product.
    """
    rgb = np.asarray(rgb_linear, dtype=np.float64)
    var = np.asarray(variance, dtype=np.float64)
    m = _check_hw(mask, "mask").astype(bool)
    if rgb.shape[:2] != m.shape or var.shape[:2] != m.shape:
        raise ValueError(
            f"rgb_linear {rgb.shape}, variance {var.shape} and mask {m.shape} must share (H, W)"
        )
    if statistic not in ("median", "rms"):
        raise ValueError(f"statistic {statistic!r} is not accepted (median, rms)")
    if not m.any():
        return float("nan")
    w = np.asarray(weights, dtype=np.float64)
    y = rgb[m] @ w
    var_y = np.maximum(var[m] @ (w * w), 0.0)
    if statistic == "rms":
        mean_y = float(np.mean(y))
        if mean_y <= 0.0:
            return float("nan")
        return float(np.sqrt(float(np.mean(var_y))) / mean_y)
    lit = y > 0.0
    if not lit.any():
        return float("nan")
    return float(np.median(np.sqrt(var_y[lit]) / y[lit]))


def mean_srgb8(rgb_srgb8, mask) -> np.ndarray | None:
    """Mean 8-bit code of the masked pixels, ``(3,) float64``, or None for an empty mask.

    The mean is taken in linear light (decode, average, encode), which is what the eye
    integrates over an area; the result is returned in 8-bit code units.
    """
    from ..imaging.colour import srgb_decode, srgb_encode

    rgb = _check_rgb8(rgb_srgb8)
    m = _check_hw(mask, "mask").astype(bool)
    if not m.any():
        return None
    linear = srgb_decode(rgb[m].astype(np.float64) / 255.0)
    return srgb_encode(linear.mean(axis=0)) * 255.0
