"""Materials: glTF metallic-roughness materials packed into the kernels' float32 table.

The column layout is named in ``layout_kernels`` (``MAT_*`` and ``SLOT_*``; one row per material,
``N_COLUMNS`` = 152 columns: 0-63 factors and the core texture slots, 64-143 the KHR extensions'
texture slots, 144-145 their scale and flag) and documented in ``bsdf_kernels``.  Interpreted here:

* pbrMetallicRoughness factors and textures, emissive factor and texture,
  ``KHR_materials_emissive_strength`` (multiplies the emission) and ``KHR_materials_ior``
  (sets the dielectric f0 = ((ior - 1)/(ior + 1))**2; default 1.5 gives 0.04);
* ``KHR_materials_specular`` ``specularFactor`` x ``specularTexture``.a (scales the dielectric
  Fresnel: f0 x s, f90 = s; 0 gives a pure Lambertian surface) and ``specularColorFactor`` x
  ``specularColorTexture``.rgb (sRGB-decoded; tints f0);
* ``KHR_materials_transmission`` ``transmissionFactor`` x ``transmissionTexture``.r,
  ``KHR_materials_volume`` ``thicknessFactor`` (0: thin-walled; > 0: the closed mesh is a volume,
  the thickness value itself is not used -- a path tracer uses the traced length; its
  ``thicknessTexture`` (G) is packed into a slot for completeness but never sampled),
  ``attenuationColor`` and ``attenuationDistance`` (sigma_a = -ln(colour) / distance,
  Beer-Lambert along the path);
* ``KHR_materials_clearcoat`` ``clearcoatFactor`` x ``clearcoatTexture``.r,
  ``clearcoatRoughnessFactor`` x ``clearcoatRoughnessTexture``.g and ``clearcoatNormalTexture``
  (the coat's own normal map with its own ``scale``; without it the coat takes the unperturbed
  vertex normal, even where the base has a normalTexture, as the extension says);
* ``KHR_materials_sheen`` ``sheenColorFactor`` x ``sheenColorTexture``.rgb (sRGB-decoded) and
  ``sheenRoughnessFactor`` x ``sheenRoughnessTexture``.a;
* ``KHR_materials_anisotropy`` ``anisotropyStrength`` x ``anisotropyTexture``.b and the direction
  ``anisotropyTexture``.rg mapped from [0, 1] to [-1, 1] (tangent, bitangent), normalised and
  rotated by ``anisotropyRotation``;
* every extension texture with its ``texCoord`` and ``KHR_texture_transform``, like the core slots;
* ``alphaMode`` / ``alphaCutoff`` and ``doubleSided``.  ``occlusionTexture`` is ignored.

Back faces: glTF leaves single-sided back faces to rasteriser culling.  The path tracer never
lets light leak through a surface; a back face of a single-sided material is shaded like its
front (normals flipped towards the viewer) so that models with a few wrongly wound triangles
do not show black holes, but it does **not emit**: a single-sided emissive triangle is a one-sided
light (front side only), a double-sided one emits from both sides.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import RenderError
from ..geometry.scene import Material, Scene, TextureRef, TextureTransform
from . import layout_kernels as L  # plain integers: no numba import
from .layout_kernels import N_COLUMNS
from .textures import AtlasBuilder, TextureAtlas, transform_matrix

#: glTF extensions the path tracer interprets (the KHR_materials_* ones with their factors and
#: their own textures; KHR_texture_transform on every texture slot).  The catalog checker reads
#: this list.
SUPPORTED_EXTENSIONS = frozenset(
    {"KHR_materials_emissive_strength", "KHR_materials_ior", "KHR_materials_specular", "KHR_texture_transform",
     "KHR_lights_punctual", "KHR_materials_transmission", "KHR_materials_volume", "KHR_materials_clearcoat",
     "KHR_materials_sheen", "KHR_materials_anisotropy"}
)

ALPHA_MODES = {"OPAQUE": L.ALPHA_OPAQUE, "MASK": L.ALPHA_MASK, "BLEND": L.ALPHA_BLEND}

#: (extension, textureInfo key, slot column, sRGB-decoded, sampled by the path kernel)
EXTENSION_SLOTS = (
    ("KHR_materials_transmission", "transmissionTexture", L.SLOT_TRANSMISSION, False, True),
    ("KHR_materials_volume", "thicknessTexture", L.SLOT_THICKNESS, False, False),
    ("KHR_materials_clearcoat", "clearcoatTexture", L.SLOT_CLEARCOAT, False, True),
    ("KHR_materials_clearcoat", "clearcoatRoughnessTexture", L.SLOT_CLEARCOAT_ROUGHNESS, False, True),
    ("KHR_materials_clearcoat", "clearcoatNormalTexture", L.SLOT_CLEARCOAT_NORMAL, False, True),
    ("KHR_materials_sheen", "sheenColorTexture", L.SLOT_SHEEN_COLOUR, True, True),
    ("KHR_materials_sheen", "sheenRoughnessTexture", L.SLOT_SHEEN_ROUGHNESS, False, True),
    ("KHR_materials_specular", "specularTexture", L.SLOT_SPECULAR, False, True),
    ("KHR_materials_specular", "specularColorTexture", L.SLOT_SPECULAR_COLOUR, True, True),
    ("KHR_materials_anisotropy", "anisotropyTexture", L.SLOT_ANISOTROPY, False, True),
)


def _slot(row: np.ndarray, col: int, builder: AtlasBuilder, ref, srgb: bool) -> None:
    row[col] = builder.entry(ref, srgb)
    row[col + L.SLOT_TEX_COORD] = 0 if ref is None else ref.tex_coord
    row[col + L.SLOT_M00 : col + L.SLOT_WIDTH] = transform_matrix(ref)


def material_ior(material: Material) -> float:
    ext = (material.extensions or {}).get("KHR_materials_ior") or {}
    ior = float(ext.get("ior", 1.5))
    return ior


def material_specular(material: Material) -> float:
    ext = (material.extensions or {}).get("KHR_materials_specular") or {}
    return float(ext.get("specularFactor", 1.0))


def _ext(material: Material, name: str) -> dict:
    ext = (material.extensions or {}).get(name)
    return ext if isinstance(ext, dict) else {}


def _number(ext: dict, key: str, default: float, where: str, name: str, lo: float = 0.0, hi: float = math.inf) -> float:
    value = ext.get(key, default)
    try:
        v = float(value)
    except (TypeError, ValueError):
        v = math.nan
    if not (lo <= v <= hi):
        raise RenderError(f"{where}: {name} {key} {value!r} is not accepted (a number in [{lo}, {hi}])")
    return v


def _colour(ext: dict, key: str, default, where: str, name: str) -> np.ndarray:
    value = ext.get(key, default)
    try:
        c = np.asarray(value, np.float64).reshape(3)
    except (TypeError, ValueError):
        c = np.full(3, np.nan)
    if not np.all(np.isfinite(c)) or np.any(c < 0):
        raise RenderError(f"{where}: {name} {key} {value!r} is not accepted (3 numbers >= 0)")
    return c


def _int(info: dict, key: str, default: int, where: str) -> int:
    value = info.get(key, default)
    if (isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value)
            or value != int(value) or value < 0):
        raise RenderError(f"{where}: {key} {value!r} is not accepted (an integer >= 0)")
    return int(value)


def _pair(info: dict, key: str, default, where: str) -> tuple[float, float]:
    value = info.get(key, default)
    try:
        a, b = (float(x) for x in value)
    except (TypeError, ValueError):
        a = b = math.nan
    if not (math.isfinite(a) and math.isfinite(b)):
        raise RenderError(f"{where}: {key} {value!r} is not accepted (2 finite numbers)")
    return a, b


def texture_ref_from_info(info, where: str, scale_key: str | None = None) -> TextureRef:
    """A raw glTF ``textureInfo`` dict (of a hand-built :class:`Material`) as a :class:`TextureRef`.

    The glTF loader parses the extensions' textureInfo objects itself
    (``Material.extension_textures``); this covers materials built in code, with the same checks.
    """
    if not isinstance(info, dict):
        raise RenderError(f"{where}: {info!r} is not accepted (a textureInfo object with an 'index')")
    if "index" not in info:
        raise RenderError(f"{where}: index is missing (a textureInfo object needs a texture index >= 0)")
    index = _int(info, "index", 0, where)
    tex_coord = _int(info, "texCoord", 0, where)
    scale = 1.0
    if scale_key is not None:
        scale = _number(info, scale_key, 1.0, where, "textureInfo", -math.inf)
    transform = None
    exts = info.get("extensions") or {}
    if not isinstance(exts, dict):
        raise RenderError(f"{where}: extensions {exts!r} is not accepted (an object)")
    tt = exts.get("KHR_texture_transform")
    if tt is not None:
        tw = where + ".extensions.KHR_texture_transform"
        if not isinstance(tt, dict):
            raise RenderError(f"{tw}: must be an object")
        transform = TextureTransform(offset=_pair(tt, "offset", (0.0, 0.0), tw),
                                     rotation_rad=_number(tt, "rotation", 0.0, tw, "KHR_texture_transform", -math.inf),
                                     scale=_pair(tt, "scale", (1.0, 1.0), tw))
        tex_coord = _int(tt, "texCoord", tex_coord, tw)  # overrides the textureInfo's (KHR_texture_transform)
    return TextureRef(index=index, tex_coord=tex_coord, scale=scale, transform=transform)


def extension_texture(material: Material, ext_name: str, key: str, where: str) -> TextureRef | None:
    """The parsed ``textureInfo`` ``key`` of extension ``ext_name`` of a material (None when absent)."""
    ref = (material.extension_textures or {}).get((ext_name, key))
    if ref is None:
        info = _ext(material, ext_name).get(key)
        if info is not None:
            ref = texture_ref_from_info(info, f"{where}: {ext_name}.{key}",
                                        "scale" if key.endswith("NormalTexture") else None)
    return ref


def pack_extension_textures(material: Material, row: np.ndarray, builder: AtlasBuilder, where: str) -> None:
    """Columns 64-145 of a material row: the extensions' texture slots (layout in ``bsdf_kernels``)."""
    any_sampled = False
    for ext_name, key, col, srgb, sampled in EXTENSION_SLOTS:
        ref = extension_texture(material, ext_name, key, where)
        if ref is not None and not 0 <= ref.index < builder.n_textures:
            raise RenderError(
                f"{where}: {ext_name}.{key} names texture {ref.index}, which does not exist "
                f"(accepted: a texture index 0..{builder.n_textures - 1}; the scene has {builder.n_textures})"
            )
        _slot(row, col, builder, ref, srgb)
        any_sampled |= ref is not None and sampled
        if key == "clearcoatNormalTexture":
            row[L.MAT_CLEARCOAT_NORMAL_SCALE] = 1.0 if ref is None else ref.scale
    row[L.MAT_EXT_TEXTURES] = 1.0 if any_sampled else 0.0


def pack_extensions(material: Material, row: np.ndarray, where: str) -> None:
    """Columns 48-63 of a material row (layout in ``bsdf_kernels``)."""
    tr = _ext(material, "KHR_materials_transmission")
    row[L.MAT_TRANSMISSION] = _number(tr, "transmissionFactor", 0.0, where, "KHR_materials_transmission", 0.0, 1.0)
    vol = _ext(material, "KHR_materials_volume")
    row[L.MAT_THICKNESS] = _number(vol, "thicknessFactor", 0.0, where, "KHR_materials_volume")
    dist = _number(vol, "attenuationDistance", math.inf, where, "KHR_materials_volume", 0.0)
    if dist <= 0.0:
        raise RenderError(f"{where}: KHR_materials_volume attenuationDistance must be > 0, got {dist!r}")
    att = _colour(vol, "attenuationColor", (1.0, 1.0, 1.0), where, "KHR_materials_volume")
    if row[L.MAT_THICKNESS] > 0 and math.isfinite(dist):
        # KHR_materials_volume: sigma_t = -ln(c) / d; c = 0 absorbs everything (a large sigma)
        row[L.MAT_SIGMA_A_R : L.MAT_SIGMA_A_B + 1] = -np.log(np.clip(att, 1e-30, 1.0)) / dist
    cc = _ext(material, "KHR_materials_clearcoat")
    row[L.MAT_CLEARCOAT] = _number(cc, "clearcoatFactor", 0.0, where, "KHR_materials_clearcoat", 0.0, 1.0)
    row[L.MAT_CLEARCOAT_ROUGHNESS] = _number(cc, "clearcoatRoughnessFactor", 0.0, where, "KHR_materials_clearcoat",
                                             0.0, 1.0)
    sh = _ext(material, "KHR_materials_sheen")
    sheen = _colour(sh, "sheenColorFactor", (0.0, 0.0, 0.0), where, "KHR_materials_sheen")
    row[L.MAT_SHEEN_R : L.MAT_SHEEN_B + 1] = np.clip(sheen, 0, 1)
    row[L.MAT_SHEEN_ROUGHNESS] = _number(sh, "sheenRoughnessFactor", 0.0, where, "KHR_materials_sheen", 0.0, 1.0)
    sp = _ext(material, "KHR_materials_specular")
    row[L.MAT_SPECULAR_R : L.MAT_SPECULAR_B + 1] = _colour(sp, "specularColorFactor", (1.0, 1.0, 1.0), where,
                                                           "KHR_materials_specular")
    an = _ext(material, "KHR_materials_anisotropy")
    row[L.MAT_ANISOTROPY] = _number(an, "anisotropyStrength", 0.0, where, "KHR_materials_anisotropy", 0.0, 1.0)
    row[L.MAT_ANISOTROPY_ROTATION] = _number(an, "anisotropyRotation", 0.0, where, "KHR_materials_anisotropy",
                                             -math.inf)


def pack_material(material: Material, builder: AtlasBuilder, where: str) -> np.ndarray:
    """One ``(N_COLUMNS,) float32`` row of the material table."""
    row = np.zeros(N_COLUMNS, np.float32)
    row[L.MAT_KIND] = L.MATERIAL_METAL_ROUGH
    bc = tuple(material.base_colour_factor)
    if len(bc) != 4:
        raise RenderError(f"{where}: baseColorFactor needs 4 numbers, got {bc!r}")
    row[L.MAT_BASE_R : L.MAT_BASE_A + 1] = bc
    row[L.MAT_METALLIC] = material.metallic_factor
    row[L.MAT_ROUGHNESS] = material.roughness_factor
    em = np.asarray(material.emissive_factor, np.float64) * float(material.emissive_strength)
    if em.shape != (3,) or not np.all(np.isfinite(em)) or np.any(em < 0):
        raise RenderError(f"{where}: emissive factor x strength must be 3 finite numbers >= 0, got {em!r}")
    row[L.MAT_EMISSIVE_R : L.MAT_EMISSIVE_B + 1] = em
    if material.alpha_mode not in ALPHA_MODES:
        raise RenderError(
            f"{where}: alphaMode {material.alpha_mode!r} is not accepted ({', '.join(ALPHA_MODES)})"
        )
    row[L.MAT_ALPHA_MODE] = ALPHA_MODES[material.alpha_mode]
    row[L.MAT_ALPHA_CUTOFF] = material.alpha_cutoff
    row[L.MAT_DOUBLE_SIDED] = 1.0 if material.double_sided else 0.0
    ior = material_ior(material)
    if not ior >= 1.0:
        raise RenderError(f"{where}: KHR_materials_ior ior {ior!r} is not accepted (a number >= 1)")
    row[L.MAT_IOR] = ior
    row[L.MAT_NORMAL_SCALE] = 1.0 if material.normal_texture is None else material.normal_texture.scale
    row[L.MAT_SPECULAR] = material_specular(material)
    _slot(row, L.SLOT_BASE_COLOUR, builder, material.base_colour_texture, True)
    _slot(row, L.SLOT_METALLIC_ROUGHNESS, builder, material.metallic_roughness_texture, False)
    _slot(row, L.SLOT_EMISSIVE, builder, material.emissive_texture, True)
    _slot(row, L.SLOT_NORMAL, builder, material.normal_texture, False)
    pack_extensions(material, row, where)
    pack_extension_textures(material, row, builder, where)
    return row


def pack_materials(scene: Scene) -> tuple[np.ndarray, TextureAtlas]:
    """The ``(M, N_COLUMNS) float32`` material table and the texture atlas of a scene."""
    builder = AtlasBuilder(scene.textures, scene.source)
    materials = scene.materials or [Material(name="default")]
    rows = [
        pack_material(m, builder, f"{scene.source} -> material {i} ({m.name!r})") for i, m in enumerate(materials)
    ]
    table = np.ascontiguousarray(np.stack(rows, axis=0), dtype=np.float32)
    return table, builder.build()


def resolve_textured(table: np.ndarray, atlas: TextureAtlas, mat: int, uv0, uv1=None,
                     entering: bool = True) -> np.ndarray:
    """The resolved BSDF records ``(N, N_BSDF + 2) float64`` of material ``mat`` of a packed table with
    its extension textures read at UV points ``uv0`` (and ``uv1``, default the same) ``(N, 2)``;
    the last two columns are the anisotropy direction (tests; base values are the factors)."""
    from . import layers_kernels  # numba loads only when a kernel is used (the catalog imports this module)

    uv0 = np.ascontiguousarray(uv0, dtype=np.float64).reshape(-1, 2)
    uv1 = uv0 if uv1 is None else np.ascontiguousarray(uv1, dtype=np.float64).reshape(-1, 2)
    out = np.zeros((uv0.shape[0], L.N_BSDF + 2), np.float64)
    layers_kernels.resolve_textured_batch(np.ascontiguousarray(table, dtype=np.float32), int(mat), atlas.pixels,
                                          atlas.table, uv0, uv1, bool(entering), out)
    return out


def resolve_params(material_row, base_colour=None, metallic=None, roughness=None, entering=True) -> np.ndarray:
    """The resolved ``(N_BSDF,) float64`` BSDF record of ``bsdf_kernels`` for a packed material row."""
    row = np.asarray(material_row, np.float64)
    bc = row[L.MAT_BASE_R : L.MAT_BASE_B + 1] if base_colour is None else np.asarray(base_colour, np.float64)
    m = row[L.MAT_METALLIC] if metallic is None else float(metallic)
    r = row[L.MAT_ROUGHNESS] if roughness is None else float(roughness)
    from . import bsdf_kernels  # numba loads only when a kernel is used (the catalog imports this module)

    table = np.ascontiguousarray(row.reshape(1, -1), dtype=np.float32)
    return np.array(bsdf_kernels.material_bsdf(table, 0, float(bc[0]), float(bc[1]), float(bc[2]), float(m), float(r),
                                  bool(entering)), np.float64)
