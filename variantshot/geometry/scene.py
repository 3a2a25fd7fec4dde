"""The flattened scene: every mesh instance baked into world-space structure-of-arrays.

A :class:`Scene` is what the loader produces and what the renderer consumes.  It is plain
data (dataclasses of numpy arrays and small records), so it pickles for Dask and can be built
by hand in tests.  glTF conventions apply: right-handed, +Y up, metres, radians, linear colour
factors; UV origin at the top-left of the image.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class TextureTransform:
    """KHR_texture_transform on a texture reference: uv' = T(offset) R(rotation) S(scale) uv."""

    offset: tuple[float, float] = (0.0, 0.0)
    rotation_rad: float = 0.0
    scale: tuple[float, float] = (1.0, 1.0)


@dataclass(frozen=True)
class TextureRef:
    """A material's reference to a texture (glTF ``textureInfo``).

    ``scale`` carries ``normalTextureInfo.scale`` or ``occlusionTextureInfo.strength``.
    """

    index: int
    tex_coord: int = 0
    scale: float = 1.0
    transform: TextureTransform | None = None


@dataclass(frozen=True)
class Material:
    """A glTF 2.0 metallic-roughness material with its KHR extensions kept as raw dicts.

    Factors are as in the file (colour factors are linear).  ``extensions`` holds the material's
    ``extensions`` object untouched (e.g. ``{"KHR_materials_clearcoat": {...}}``) so that each
    renderer feature interprets its own extension.  ``extension_textures`` holds the parsed
    ``textureInfo`` objects inside those extensions, keyed ``(extension name, property)``, e.g.
    ``("KHR_materials_clearcoat", "clearcoatNormalTexture")`` (its ``scale`` in
    :attr:`TextureRef.scale`); the glTF loader fills it, hand-built materials may leave it empty
    (the renderer then parses the raw dicts itself).
    """

    name: str = ""
    base_colour_factor: tuple[float, float, float, float] = (1.0, 1.0, 1.0, 1.0)
    base_colour_texture: TextureRef | None = None
    metallic_factor: float = 1.0
    roughness_factor: float = 1.0
    metallic_roughness_texture: TextureRef | None = None
    normal_texture: TextureRef | None = None
    occlusion_texture: TextureRef | None = None
    emissive_factor: tuple[float, float, float] = (0.0, 0.0, 0.0)
    emissive_texture: TextureRef | None = None
    emissive_strength: float = 1.0  # KHR_materials_emissive_strength
    alpha_mode: str = "OPAQUE"  # OPAQUE | MASK | BLEND
    alpha_cutoff: float = 0.5
    double_sided: bool = False
    extensions: dict = field(default_factory=dict)
    extension_textures: dict = field(default_factory=dict)


# glTF sampler constants (glTF 2.0 §5.26, sampler.magFilter/minFilter/wrapS/wrapT)
NEAREST, LINEAR = 9728, 9729
REPEAT, CLAMP_TO_EDGE, MIRRORED_REPEAT = 10497, 33071, 33648


@dataclass(frozen=True)
class Texture:
    """A decoded texture image with its sampler.

    ``pixels`` is ``(H, W, 4) float32`` holding the *stored* values scaled to [0, 1] (no colour
    decoding: whether a texture is sRGB depends on which material slot uses it).
    """

    pixels: np.ndarray
    name: str = ""
    mag_filter: int | None = None
    min_filter: int | None = None
    wrap_s: int = REPEAT
    wrap_t: int = REPEAT


@dataclass(frozen=True)
class Camera:
    """A glTF camera placed in the world.

    ``world_from_camera`` is ``(4, 4) float64``; the camera looks down its local −Z with +Y up.
    """

    name: str
    kind: str  # "perspective" | "orthographic"
    world_from_camera: np.ndarray
    yfov_rad: float = 0.8
    aspect_ratio: float | None = None
    xmag: float = 1.0
    ymag: float = 1.0
    znear: float = 0.01
    zfar: float | None = None


@dataclass(frozen=True)
class Light:
    """A KHR_lights_punctual light placed in the world.

    ``intensity`` is in candela for point and spot lights and in lux for directional lights.
    ``direction`` is the unit world-space direction the light points to (the node's −Z).
    """

    name: str
    kind: str  # "point" | "spot" | "directional"
    colour_linear: tuple[float, float, float] = (1.0, 1.0, 1.0)
    intensity: float = 1.0
    range: float = float("inf")
    inner_cone_rad: float = 0.0
    outer_cone_rad: float = float(np.pi / 4)
    position: tuple[float, float, float] = (0.0, 0.0, 0.0)
    direction: tuple[float, float, float] = (0.0, 0.0, -1.0)


@dataclass
class Scene:
    """Every drawn triangle of a glTF scene, in world space, as flat arrays.

    Attributes
    ----------
    positions : (V, 3) float32 ndarray
        World-space vertex positions.
    normals : (V, 3) float32 ndarray
        World-space unit vertex normals (the loader makes flat normals when the file has none, as glTF §3.7.2.1 requires; make_scene generates area-weighted ones).
    uvs : (V, 2, 2) float32 ndarray
        TEXCOORD_0 and TEXCOORD_1 (zeros where absent).
    tangents : (V, 4) float32 ndarray
        World-space xyz tangent and handedness w; all zeros when the file has none.
    colours : (V, 4) float32 ndarray
        COLOR_0 as linear RGBA (ones where absent).
    triangles : (T, 3) int32 ndarray
        Vertex indices, counter-clockwise front faces.
    tri_material : (T,) int32 ndarray
        Index into ``materials`` per triangle.
    materials : list of Material
        Never empty when there are triangles (the glTF default material is added if needed).
    textures : list of Texture
    cameras : list of Camera
    lights : list of Light
    source : str
        The file name, for messages.
    """

    positions: np.ndarray
    normals: np.ndarray
    uvs: np.ndarray
    tangents: np.ndarray
    colours: np.ndarray
    triangles: np.ndarray
    tri_material: np.ndarray
    materials: list[Material] = field(default_factory=list)
    textures: list[Texture] = field(default_factory=list)
    cameras: list[Camera] = field(default_factory=list)
    lights: list[Light] = field(default_factory=list)
    source: str = "<memory>"

    @property
    def n_triangles(self) -> int:
        return int(self.triangles.shape[0])

    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """World-space axis-aligned bounds ``(lo, hi)`` of the vertices triangles use."""
        if self.n_triangles == 0:
            return np.zeros(3), np.zeros(3)
        used = self.positions[np.unique(self.triangles)]
        return used.min(axis=0).astype(np.float64), used.max(axis=0).astype(np.float64)


def make_scene(
    positions,
    triangles,
    *,
    normals=None,
    uvs=None,
    tangents=None,
    colours=None,
    tri_material=None,
    materials=None,
    textures=None,
    cameras=None,
    lights=None,
    source: str = "<memory>",
) -> Scene:
    """Build a :class:`Scene` from arrays, filling defaults (tests and procedural geometry use this).

    Missing normals are generated per vertex as area-weighted face normals.
    """
    positions = np.ascontiguousarray(positions, dtype=np.float32).reshape(-1, 3)
    triangles = np.ascontiguousarray(triangles, dtype=np.int32).reshape(-1, 3)
    n_v = positions.shape[0]
    if normals is None:
        normals = vertex_normals(positions, triangles)
    normals = np.ascontiguousarray(normals, dtype=np.float32).reshape(n_v, 3)
    if uvs is None:
        uvs = np.zeros((n_v, 2, 2), np.float32)
    uvs = np.asarray(uvs, dtype=np.float32)
    if uvs.ndim == 2:  # only TEXCOORD_0 given
        uvs = np.stack([uvs, np.zeros_like(uvs)], axis=1)
    if tangents is None:
        tangents = np.zeros((n_v, 4), np.float32)
    if colours is None:
        colours = np.ones((n_v, 4), np.float32)
    colours = np.asarray(colours, dtype=np.float32)
    if colours.shape[1] == 3:
        colours = np.concatenate([colours, np.ones((n_v, 1), np.float32)], axis=1)
    if tri_material is None:
        tri_material = np.zeros(triangles.shape[0], np.int32)
    if not materials:
        materials = [Material(name="default")]
    return Scene(
        positions=positions,
        normals=normals,
        uvs=np.ascontiguousarray(uvs),
        tangents=np.ascontiguousarray(tangents, dtype=np.float32),
        colours=np.ascontiguousarray(colours),
        triangles=triangles,
        tri_material=np.ascontiguousarray(tri_material, dtype=np.int32),
        materials=list(materials),
        textures=list(textures or []),
        cameras=list(cameras or []),
        lights=list(lights or []),
        source=source,
    )


def vertex_normals(positions: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """Area-weighted vertex normals ``(V, 3) float32``; vertices no triangle uses get +Z."""
    p = positions.astype(np.float64)
    face = np.cross(p[triangles[:, 1]] - p[triangles[:, 0]], p[triangles[:, 2]] - p[triangles[:, 0]])
    acc = np.zeros_like(p)
    for k in range(3):
        np.add.at(acc, triangles[:, k], face)
    length = np.linalg.norm(acc, axis=1)
    out = np.zeros_like(p)
    ok = length > 0
    out[ok] = acc[ok] / length[ok, None]
    out[~ok] = (0.0, 0.0, 1.0)
    return out.astype(np.float32)


def merge_scenes(*scenes: Scene, source: str | None = None) -> Scene:
    """Concatenate scenes (a product and a studio rig, say) into one; materials are re-indexed."""
    v_off = 0
    m_off = 0
    t_off = 0
    parts = {k: [] for k in ("positions", "normals", "uvs", "tangents", "colours", "triangles", "tri_material")}
    materials, textures, cameras, lights = [], [], [], []
    import dataclasses

    def shift(ref):
        return None if ref is None else dataclasses.replace(ref, index=ref.index + t_off)

    for s in scenes:
        parts["positions"].append(s.positions)
        parts["normals"].append(s.normals)
        parts["uvs"].append(s.uvs)
        parts["tangents"].append(s.tangents)
        parts["colours"].append(s.colours)
        parts["triangles"].append(s.triangles + v_off)
        parts["tri_material"].append(s.tri_material + m_off)
        for m in s.materials:
            materials.append(
                dataclasses.replace(
                    m,
                    base_colour_texture=shift(m.base_colour_texture),
                    metallic_roughness_texture=shift(m.metallic_roughness_texture),
                    normal_texture=shift(m.normal_texture),
                    occlusion_texture=shift(m.occlusion_texture),
                    emissive_texture=shift(m.emissive_texture),
                )
            )
        textures.extend(s.textures)
        cameras.extend(s.cameras)
        lights.extend(s.lights)
        v_off += s.positions.shape[0]
        m_off += len(s.materials)
        t_off += len(s.textures)
    arrays = {k: np.ascontiguousarray(np.concatenate(v, axis=0)) for k, v in parts.items()}
    return Scene(
        **arrays,
        materials=materials,
        textures=textures,
        cameras=cameras,
        lights=lights,
        source=source or "+".join(s.source for s in scenes),
    )
