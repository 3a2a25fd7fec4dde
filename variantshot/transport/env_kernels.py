"""Environment light kernels: equirectangular lookup, importance sampling and its density.

Mapping (equirectangular, +Y up, glTF's right-handed frame)
----------------------------------------------------------
A unit direction ``d = (dx, dy, dz)`` in the *environment's* frame has

* polar angle ``theta = acos(dy)`` in [0, pi] measured from +Y, and ``v = theta / pi``;
* azimuth ``phi = atan2(dx, -dz)`` in (-pi, pi], and ``u = 0.5 + phi / (2 pi)``.

The image is ``pixels[row, col]`` with ``row = floor(v * H)`` (row 0, the top row, is +Y; the
bottom row is -Y) and ``col = floor(u * W)``.  The centre column (u = 0.5) looks along -Z, the
direction a default glTF camera looks; u = 0.75 is +X and u = 0.25 is -X, so the panorama reads
unmirrored when seen from inside the sphere.  The seam (u = 0 and 1) is +Z, behind such a camera.
Inverse: ``dx = sin(theta) sin(phi)``, ``dy = cos(theta)``, ``dz = -sin(theta) cos(phi)``.

Rotation
--------
``params[0] = rotation_rad`` turns the environment about +Y, counter-clockwise seen from above
(right-handed): a world direction is looked up at ``R_y(-rotation) d``, and a sampled
environment direction is returned as ``R_y(rotation) d_env`` with
``R_y(a) (x, y, z) = (cos a x + sin a z, y, -sin a x + cos a z)``.  With rotation pi/2, what the
image shows at +X appears at -Z in the world.

Sampling
--------
Importance is the piecewise-constant pixel weight ``w[i, j] = luminance(pixels[i, j]) *
sin(theta_i)`` with theta_i at the row centre (built in ``environment.py``).  ``cdf_rows (H+1,)``
is the marginal CDF over rows and ``cdf_cols (H, W+1)`` the conditional CDF over columns of each
row; both start at 0 and end at exactly 1.  A sample picks the row and column by binary search
and a uniform position inside the pixel, so the density in (u, v) is
``pdf_uv = P[i, j] * H * W`` and, with ``d omega = 2 pi^2 sin(theta) du dv``, the density in solid
angle is ``pdf_uv / (2 pi^2 sin theta)`` (0 at the exact poles).
``params[1] = 1`` marks a uniform environment (``pixels`` is (1, 1, 3)): directions are then
uniform on the sphere with density 1 / (4 pi).

Thread contract: every kernel here is a pure function of its arguments; the batch kernels write
only ``out[k]`` for their own k.

References
----------
M. Pharr, W. Jakob, G. Humphreys, Physically Based Rendering, 3rd ed. (2016), sections 13.6.7
(piecewise-constant 2D distributions) and 14.2.4 (infinite area lights), from memory.
"""

from __future__ import annotations

from .. import _jit  # noqa: F401  (sets the cache folder before numba is imported)
from .._jit import KERNEL as _KERNEL_PRESET
from .._jit import njit

import math

import numpy as np

# numba wants fastmath as a bool, dict or *set*; _jit.FASTMATH is a frozenset, so pass a set copy.
KERNEL = dict(_KERNEL_PRESET, fastmath=set(_KERNEL_PRESET["fastmath"]))

INV_FOUR_PI = 0.07957747154594767  # 1 / (4 pi)
TWO_PI_SQ = 19.739208802178716  # 2 pi^2
PI = 3.141592653589793
TWO_PI = 6.283185307179586


@njit(**KERNEL)
def rotate_y(x, y, z, angle):
    """Rotate (x, y, z) about +Y by ``angle`` radians (right-handed); returns (x, y, z)."""
    c = math.cos(angle)
    s = math.sin(angle)
    return c * x + s * z, y, -s * x + c * z


@njit(**KERNEL)
def uv_from_direction(dx, dy, dz):
    """Equirectangular (u, v) in [0, 1] of a direction in the environment frame (see module)."""
    n = math.sqrt(dx * dx + dy * dy + dz * dz)
    if n == 0.0:
        return 0.5, 0.5
    cy = min(1.0, max(-1.0, dy / n))
    v = math.acos(cy) / PI
    u = 0.5 + math.atan2(dx, -dz) / TWO_PI
    return u, v


@njit(**KERNEL)
def direction_from_uv(u, v):
    """Unit direction in the environment frame of the equirectangular point (u, v)."""
    theta = PI * v
    phi = TWO_PI * (u - 0.5)
    st = math.sin(theta)
    return st * math.sin(phi), math.cos(theta), -st * math.cos(phi)


@njit(**KERNEL)
def _pixel_of(u, v, h, w):
    row = int(v * h)
    col = int(u * w)
    if row >= h:
        row = h - 1
    if row < 0:
        row = 0
    if col >= w:
        col = w - 1
    if col < 0:
        col = 0
    return row, col


@njit(**KERNEL)
def env_radiance(pixels, params, dx, dy, dz):
    """Linear RGB radiance arriving from world direction (dx, dy, dz) (need not be unit).

    Parameters
    ----------
    pixels : (H, W, 3) float32, linear radiance (H = W = 1 for a uniform environment)
    params : (4,) float64, [rotation_rad, is_uniform, total_weight, unused]

    Returns
    -------
    (r, g, b) : float64
    """
    if params[1] != 0.0:
        return np.float64(pixels[0, 0, 0]), np.float64(pixels[0, 0, 1]), np.float64(pixels[0, 0, 2])
    ex, ey, ez = rotate_y(dx, dy, dz, -params[0])
    u, v = uv_from_direction(ex, ey, ez)
    row, col = _pixel_of(u, v, pixels.shape[0], pixels.shape[1])
    return np.float64(pixels[row, col, 0]), np.float64(pixels[row, col, 1]), np.float64(pixels[row, col, 2])


@njit(**KERNEL)
def _search(cdf, lo, hi, u):
    # largest k in [lo, hi) with cdf[k] <= u < cdf[k + 1]; cdf[lo] = 0 <= u < 1 = cdf[hi]
    while hi - lo > 1:
        mid = (lo + hi) >> 1
        if cdf[mid] <= u:
            lo = mid
        else:
            hi = mid
    return lo


@njit(**KERNEL)
def env_sample(pixels, cdf_rows, cdf_cols, params, u0, u1):
    """Sample a world direction proportionally to luminance x sin(theta) (uniform if flagged).

    Parameters
    ----------
    pixels : (H, W, 3) float32
    cdf_rows : (H + 1,) float64, marginal row CDF
    cdf_cols : (H, W + 1) float64, conditional column CDF per row
    params : (4,) float64, [rotation_rad, is_uniform, total_weight, unused]
    u0, u1 : float
        Uniform numbers in [0, 1).

    Returns
    -------
    (dx, dy, dz, pdf_solid_angle, r, g, b) : float64
        A unit world direction, its density per steradian (0 for a degenerate pole sample, which
        the caller must discard) and the radiance from it.
    """
    if params[1] != 0.0:
        y = 1.0 - 2.0 * u0
        r = math.sqrt(max(0.0, 1.0 - y * y))
        phi = TWO_PI * u1
        return (r * math.cos(phi), y, r * math.sin(phi), INV_FOUR_PI,
                np.float64(pixels[0, 0, 0]), np.float64(pixels[0, 0, 1]), np.float64(pixels[0, 0, 2]))
    h = pixels.shape[0]
    w = pixels.shape[1]
    u0 = min(max(u0, 0.0), 0.9999999999999999)
    u1 = min(max(u1, 0.0), 0.9999999999999999)
    row = _search(cdf_rows, 0, h, u0)
    p_row = cdf_rows[row + 1] - cdf_rows[row]
    dv = (u0 - cdf_rows[row]) / p_row
    col = _search(cdf_cols[row], 0, w, u1)
    p_col = cdf_cols[row, col + 1] - cdf_cols[row, col]
    du = (u1 - cdf_cols[row, col]) / p_col
    dv = min(max(dv, 0.0), 0.9999999999999999)
    du = min(max(du, 0.0), 0.9999999999999999)
    v = (row + dv) / h
    u = (col + du) / w
    ex, ey, ez = direction_from_uv(u, v)
    st = math.sin(PI * v)
    pdf = 0.0
    if st > 0.0:
        pdf = p_row * p_col * h * w / (TWO_PI_SQ * st)
    dx, dy, dz = rotate_y(ex, ey, ez, params[0])
    return (dx, dy, dz, pdf,
            np.float64(pixels[row, col, 0]), np.float64(pixels[row, col, 1]), np.float64(pixels[row, col, 2]))


@njit(**KERNEL)
def env_pdf(pixels, cdf_rows, cdf_cols, params, dx, dy, dz):
    """Solid-angle density with which :func:`env_sample` returns world direction (dx, dy, dz).

    Returns
    -------
    pdf_solid_angle : float64
        ``1 / (4 pi)`` for a uniform environment; else ``P[row, col] H W / (2 pi^2 sin theta)``.
    """
    if params[1] != 0.0:
        return INV_FOUR_PI
    h = pixels.shape[0]
    w = pixels.shape[1]
    ex, ey, ez = rotate_y(dx, dy, dz, -params[0])
    u, v = uv_from_direction(ex, ey, ez)
    st = math.sin(PI * v)
    if st <= 0.0:
        return 0.0
    row, col = _pixel_of(u, v, h, w)
    p_row = cdf_rows[row + 1] - cdf_rows[row]
    p_col = cdf_cols[row, col + 1] - cdf_cols[row, col]
    return p_row * p_col * h * w / (TWO_PI_SQ * st)


# --- batch forms (used by environment.py and the tests) -----------------------------------------
@njit(**KERNEL)
def env_radiance_batch(pixels, params, dirs, out):
    """out[k] = env_radiance(dirs[k]); dirs (N, 3) float64, out (N, 3) float64."""
    for k in range(dirs.shape[0]):
        r, g, b = env_radiance(pixels, params, dirs[k, 0], dirs[k, 1], dirs[k, 2])
        out[k, 0] = r
        out[k, 1] = g
        out[k, 2] = b


@njit(**KERNEL)
def env_sample_batch(pixels, cdf_rows, cdf_cols, params, u, out):
    """out[k] = env_sample(u[k]) as (dx, dy, dz, pdf, r, g, b); u (N, 2), out (N, 7) float64."""
    for k in range(u.shape[0]):
        dx, dy, dz, pdf, r, g, b = env_sample(pixels, cdf_rows, cdf_cols, params, u[k, 0], u[k, 1])
        out[k, 0] = dx
        out[k, 1] = dy
        out[k, 2] = dz
        out[k, 3] = pdf
        out[k, 4] = r
        out[k, 5] = g
        out[k, 6] = b


@njit(**KERNEL)
def env_pdf_batch(pixels, cdf_rows, cdf_cols, params, dirs, out):
    """out[k] = env_pdf(dirs[k]); dirs (N, 3) float64, out (N,) float64."""
    for k in range(dirs.shape[0]):
        out[k] = env_pdf(pixels, cdf_rows, cdf_cols, params, dirs[k, 0], dirs[k, 1], dirs[k, 2])


@njit(**KERNEL)
def uv_from_direction_batch(dirs, out):
    """out[k] = uv_from_direction(dirs[k]) in the environment frame; out (N, 2) float64."""
    for k in range(dirs.shape[0]):
        u, v = uv_from_direction(dirs[k, 0], dirs[k, 1], dirs[k, 2])
        out[k, 0] = u
        out[k, 1] = v

