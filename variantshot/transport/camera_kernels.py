"""Camera ray generation from a packed camera record (perspective, orthographic, thin lens).

Packed camera ``cam``: ``(32,) float64``.

====  ==========================================================================
col   meaning
====  ==========================================================================
0     kind: 0 perspective, 1 orthographic
1-16  world_from_camera, row-major 4x4 (camera looks down its local -Z, +Y up)
17    perspective: tan(yfov / 2); orthographic: ymag (half height, metres)
18    image aspect ratio width / height (the horizontal extent follows from it)
19    lens radius, metres (0: pinhole)
20    focus distance, metres along the view axis
21    image width in pixels
22    image height in pixels
23-31 spare
====  ==========================================================================
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math

from .sampling_kernels import sample_uniform_disk_concentric


CAMERA_PERSPECTIVE = 0
CAMERA_ORTHOGRAPHIC = 1


@njit(**KERNEL)
def generate_ray(cam, x_raster, y_raster, u_lens0, u_lens1):
    """World-space ray through raster point (x_raster, y_raster) (pixels, y down).

    Returns ``(ox, oy, oz, dx, dy, dz)`` with a unit direction.
    """
    width = cam[21]
    height = cam[22]
    ndc_x = 2.0 * x_raster / width - 1.0
    ndc_y = 1.0 - 2.0 * y_raster / height
    aspect = cam[18]
    if int(cam[0]) == 1:
        px = ndc_x * cam[17] * aspect
        py = ndc_y * cam[17]
        pz = 0.0
        dxc = 0.0
        dyc = 0.0
        dzc = -1.0
    else:
        px = 0.0
        py = 0.0
        pz = 0.0
        dxc = ndc_x * cam[17] * aspect
        dyc = ndc_y * cam[17]
        dzc = -1.0
        lens_radius = cam[19]
        if lens_radius > 0.0:
            lx, ly = sample_uniform_disk_concentric(u_lens0, u_lens1)
            lx *= lens_radius
            ly *= lens_radius
            focus = cam[20]
            # the point on the plane of focus (z = -focus) the pinhole ray would reach
            fx = dxc * focus
            fy = dyc * focus
            fz = -focus
            px = lx
            py = ly
            dxc = fx - lx
            dyc = fy - ly
            dzc = fz
    ox = cam[1] * px + cam[2] * py + cam[3] * pz + cam[4]
    oy = cam[5] * px + cam[6] * py + cam[7] * pz + cam[8]
    oz = cam[9] * px + cam[10] * py + cam[11] * pz + cam[12]
    dx = cam[1] * dxc + cam[2] * dyc + cam[3] * dzc
    dy = cam[5] * dxc + cam[6] * dyc + cam[7] * dzc
    dz = cam[9] * dxc + cam[10] * dyc + cam[11] * dzc
    inv = 1.0 / math.sqrt(dx * dx + dy * dy + dz * dz)
    return ox, oy, oz, dx * inv, dy * inv, dz * inv


@njit(**KERNEL)
def generate_rays(cam, xs, ys, u_lens, out):
    """Batch of :func:`generate_ray` for tests: xs, ys (N,) float64, u_lens (N, 2); out (N, 6)."""
    for i in range(xs.shape[0]):
        ox, oy, oz, dx, dy, dz = generate_ray(cam, xs[i], ys[i], u_lens[i, 0], u_lens[i, 1])
        out[i, 0] = ox
        out[i, 1] = oy
        out[i, 2] = oz
        out[i, 3] = dx
        out[i, 4] = dy
        out[i, 5] = dz
