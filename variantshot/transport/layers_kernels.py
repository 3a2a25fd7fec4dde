"""Volume absorption inside transmissive materials (KHR_materials_volume), for the path kernel.

Beer-Lambert (KHR_materials_volume README): the transmittance over a traced distance x inside
a homogeneous medium is T(x) = exp(-sigma_a x) per channel, sigma_a = -ln(attenuationColor) /
attenuationDistance (material table columns 50-52, see ``bsdf_kernels``).  The path kernel
knows a segment ran inside a medium when it ends on a **back** face of a volume material
(closed meshes with outward winding, as the extension requires).
"""

from __future__ import annotations

from .. import _jit  # noqa: F401
from .._jit import KERNEL, njit

import math


@njit(**KERNEL)
def volume_attenuation(mat_table, mat, distance):
    """(T_r, T_g, T_b) = exp(-sigma_a distance) for material ``mat``; (1, 1, 1) without a volume."""
    if mat_table[mat, 49] <= 0.0 or distance <= 0.0:
        return 1.0, 1.0, 1.0
    sr = float(mat_table[mat, 50])
    sg = float(mat_table[mat, 51])
    sb = float(mat_table[mat, 52])
    if sr <= 0.0 and sg <= 0.0 and sb <= 0.0:
        return 1.0, 1.0, 1.0
    return math.exp(-sr * distance), math.exp(-sg * distance), math.exp(-sb * distance)
