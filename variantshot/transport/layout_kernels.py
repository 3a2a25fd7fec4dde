"""Column layouts shared by the path kernels and the Python code that packs their arrays.

Every column of the material table, the resolved BSDF record and the integer / float option
arrays has a name here.  The kernels read these module-level integers (numba freezes them as
compile-time constants, so a named index compiles to the same code as the literal), and the
builders (``materials.py``, ``integrator.py``, ``lights.py``) import the same names, so a packer
and a kernel cannot disagree on a column.  This module is a ``*_kernels.py`` file so that the
JIT cache key (``variantshot._jit``) changes with it.

Material table ``mat_table``: ``(M, N_COLUMNS) float32``, one row per material
(meaning of each value in ``bsdf_kernels``; packing in ``materials.py``).  A texture slot is
``SLOT_WIDTH`` = 8 columns from its ``SLOT_*`` column: atlas entry (-1: none), texCoord set
(``+ SLOT_TEX_COORD``), then the 2x3 KHR_texture_transform matrix (``+ SLOT_M00`` ..
``+ SLOT_M12``, see ``texture_kernels.sample_slot``).

Resolved BSDF record ``bsdf``: an ``N_BSDF``-tuple of floats (``bsdf_kernels``).

Options of ``path_kernels.render_rows``: ``opts`` (``N_OPTS``,) int64 and ``fopts``
(``N_FOPTS``,) float64 (meaning in ``path_kernels``).
"""

from __future__ import annotations

# ------------------------------------------------------------------ material table columns
MAT_KIND = 0  # 0 = metallic-roughness
MAT_BASE_R = 1  # baseColorFactor RGBA (linear): 1-4
MAT_BASE_G = 2
MAT_BASE_B = 3
MAT_BASE_A = 4
MAT_METALLIC = 5
MAT_ROUGHNESS = 6
MAT_EMISSIVE_R = 7  # emissiveFactor x KHR_materials_emissive_strength: 7-9
MAT_EMISSIVE_G = 8
MAT_EMISSIVE_B = 9
MAT_ALPHA_MODE = 10  # ALPHA_OPAQUE / ALPHA_MASK / ALPHA_BLEND
MAT_ALPHA_CUTOFF = 11
MAT_DOUBLE_SIDED = 12  # 1.0 / 0.0
MAT_IOR = 13
MAT_NORMAL_SCALE = 14
MAT_SPECULAR = 15  # KHR_materials_specular specularFactor
SLOT_BASE_COLOUR = 16
SLOT_METALLIC_ROUGHNESS = 24
SLOT_EMISSIVE = 32
SLOT_NORMAL = 40
MAT_TRANSMISSION = 48
MAT_THICKNESS = 49  # KHR_materials_volume thicknessFactor (0 = thin-walled)
MAT_SIGMA_A_R = 50  # absorption coefficient RGB: 50-52
MAT_SIGMA_A_G = 51
MAT_SIGMA_A_B = 52
MAT_CLEARCOAT = 53
MAT_CLEARCOAT_ROUGHNESS = 54
MAT_SHEEN_R = 55  # sheenColorFactor RGB: 55-57
MAT_SHEEN_G = 56
MAT_SHEEN_B = 57
MAT_SHEEN_ROUGHNESS = 58
MAT_SPECULAR_R = 59  # specularColorFactor RGB: 59-61
MAT_SPECULAR_G = 60
MAT_SPECULAR_B = 61
MAT_ANISOTROPY = 62  # anisotropyStrength
MAT_ANISOTROPY_ROTATION = 63
SLOT_TRANSMISSION = 64
SLOT_THICKNESS = 72  # packed, never sampled
SLOT_CLEARCOAT = 80
SLOT_CLEARCOAT_ROUGHNESS = 88
SLOT_CLEARCOAT_NORMAL = 96
SLOT_SHEEN_COLOUR = 104
SLOT_SHEEN_ROUGHNESS = 112
SLOT_SPECULAR = 120
SLOT_SPECULAR_COLOUR = 128
SLOT_ANISOTROPY = 136
MAT_CLEARCOAT_NORMAL_SCALE = 144
MAT_EXT_TEXTURES = 145  # 1.0 when any sampled extension slot is present
N_COLUMNS = 152  # 146-151 spare

SLOT_WIDTH = 8
SLOT_TEX_COORD = 1  # offset of the texCoord set within a slot
SLOT_M00 = 2  # offsets of the 2x3 KHR_texture_transform matrix (m00 m01 m02 m10 m11 m12)
SLOT_M01 = 3
SLOT_M02 = 4
SLOT_M10 = 5
SLOT_M11 = 6
SLOT_M12 = 7

ALPHA_OPAQUE = 0
ALPHA_MASK = 1
ALPHA_BLEND = 2
MATERIAL_METAL_ROUGH = 0

# ------------------------------------------------------------------ resolved BSDF record
B_KIND = 0
B_BASE_R = 1
B_BASE_G = 2
B_BASE_B = 3
B_METALLIC = 4
B_ALPHA = 5  # roughness**2, isotropic
B_F0 = 6  # dielectric f0, max over RGB
B_F90 = 7
B_F0_R = 8
B_F0_G = 9
B_F0_B = 10
B_TRANSMISSION = 11
B_ETA = 12  # ior ratio across this crossing
B_THIN = 13  # thin-walled 1/0
B_CLEARCOAT = 14
B_CLEARCOAT_ALPHA = 15
B_SHEEN_R = 16
B_SHEEN_G = 17
B_SHEEN_B = 18
B_SHEEN_ROUGHNESS = 19
B_ALPHA_X = 20  # along the tangent
B_ALPHA_Y = 21
B_COAT_NX = 22  # clearcoat normal in the local frame: 22-24
B_COAT_NY = 23
B_COAT_NZ = 24
N_BSDF = 25

# ------------------------------------------------------------------ integer options (opts)
OPT_WIDTH = 0
OPT_HEIGHT = 1
OPT_FIRST_SAMPLE = 2
OPT_END_SAMPLE = 3
OPT_SEED = 4
OPT_MAX_DEPTH = 5
OPT_MODE = 6  # MODE_FULL / MODE_BASELINE
OPT_HAS_ENV = 7
OPT_HAS_ALPHA = 8  # any non-opaque material
OPT_SEE_MATERIAL = 9  # see-through material (-1: off)
N_OPTS = 10

MODE_FULL = 0
MODE_BASELINE = 1

# ------------------------------------------------------------------ float options (fopts)
FOPT_EPS = 0  # ray offset
FOPT_FILTER_RADIUS = 1  # pixels
FOPT_CONE_SPREAD = 2  # radians per unit length travelled
FOPT_CONE_BASE = 3  # world units (orthographic cameras)
FOPT_SEE_RADIANCE = 4  # see-through background radiance
N_FOPTS = 5
