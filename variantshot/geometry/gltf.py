"""glTF 2.0 loading: ``.gltf`` / ``.glb`` files into a flat world-space :class:`Scene`.

The loader reads the container (JSON with external or ``data:`` buffers, or GLB), checks the
document as it goes, walks the selected scene's node hierarchy and bakes every mesh instance
into world-space arrays: positions, normals, TEXCOORD_0/1, tangents, COLOR_0, triangles and a
per-triangle material index.  It also returns the materials table, the decoded textures, the
cameras and the KHR_lights_punctual lights placed in the world.

Choices (see DEVELOPERS.md):

* Scene selection: ``scene`` (index or name), else the file's ``scene``, else scene 0.  A file
  without ``scenes`` but with nodes uses every parentless node; a file with neither
  (a material library, say) loads as a scene with no triangles but with its materials and
  textures, and a warning is logged.
* Primitives without NORMAL get *flat* normals, as glTF 2.0 §3.7.2.1 requires ("client
  implementations MUST calculate flat normals"): their vertices are un-shared, one copy per
  triangle, and their tangents are ignored.
* Normals go through the inverse transpose of the node's world matrix and are renormalised;
  a world matrix with a negative determinant flips the triangle winding (so front faces stay
  counter-clockwise) and the tangents' handedness ``w``.  Instances with a singular world
  matrix (a zero scale) are skipped.
* Cameras get a rigid ``world_from_camera``: scale and shear are removed from the node's world
  matrix (the camera keeps its position, its −Z view direction and, as closely as possible, its
  +Y up), since glTF's camera model has no scale.
* POINTS and LINES primitives are skipped with a logged warning; a TRIANGLES index count that
  is not a multiple of 3 drops the remainder with a warning.  Degenerate triangles stay.
* Quaternions are normalised before use.  Animation, skins and morph targets are ignored (the
  rest pose is loaded).
* The materials table is the file's ``materials`` in order (unnamed ones are called
  ``material<i>``), plus one ``default`` material at the end when a drawn primitive has none.
  The textures table is the file's ``textures`` in order; a texture without a decodable
  source becomes a 1x1 white texture (with a warning).
* Limits against hostile files: at most :data:`MAX_TRIANGLES` triangles and
  :data:`MAX_VERTICES` vertices in a scene (checked from the declared counts before any
  geometry is decoded), textures of at most :data:`MAX_TEXTURE_PIXELS` pixels, zero-filled
  accessors of at most :data:`~variantshot.geometry.accessors.MAX_UNBACKED_BYTES`; every
  accessor extent is checked against its bufferView and buffer before allocating, and node
  hierarchies must be strict trees (a node reached twice is an error, which also stops
  exponential instancing).

pygltflib provides the spec's constants; the JSON is read with :mod:`json` (so a syntax error
names its line and column), the GLB container with a strict reader of our own, and accessors
are decoded with numpy in :mod:`variantshot.geometry.accessors`.
"""

from __future__ import annotations

import base64
import io
import json
import logging
import math
import re
import struct
import urllib.parse
from pathlib import Path

import numpy as np
import pygltflib

from ..errors import SceneError
from .accessors import GltfData, _is_int, _show
from .scene import (
    CLAMP_TO_EDGE,
    LINEAR,
    MIRRORED_REPEAT,
    NEAREST,
    REPEAT,
    Camera,
    Light,
    Material,
    Scene,
    Texture,
    TextureRef,
    TextureTransform,
)

__all__ = [
    "load_gltf",
    "load_gltf_bytes",
    "SUPPORTED_EXTENSIONS",
    "MAX_TRIANGLES",
    "MAX_VERTICES",
    "MAX_TEXTURE_PIXELS",
]

log = logging.getLogger(__name__)

#: Extensions a file may list in ``extensionsRequired``.  KHR_materials_* objects are kept raw
#: in :attr:`Material.extensions` for the renderer to interpret; the textureInfo objects inside
#: them are parsed and checked into :attr:`Material.extension_textures`.
SUPPORTED_EXTENSIONS = frozenset(
    {
        "KHR_lights_punctual",
        "KHR_materials_emissive_strength",
        "KHR_texture_transform",
        "KHR_materials_clearcoat",
        "KHR_materials_transmission",
        "KHR_materials_ior",
        "KHR_materials_volume",
        "KHR_materials_sheen",
        "KHR_materials_specular",
        "KHR_materials_anisotropy",
        "KHR_materials_variants",
        "KHR_materials_dispersion",
        "KHR_mesh_quantization",
        "EXT_texture_webp",
    }
)
# Compressed data we cannot decode; named in the error so the user knows what to re-export.
_COMPRESSION = {
    "KHR_draco_mesh_compression": "Draco-compressed geometry",
    "EXT_meshopt_compression": "meshopt-compressed buffers",
    "KHR_meshopt_compression": "meshopt-compressed buffers",
    "KHR_texture_basisu": "KTX2 / Basis Universal textures",
}

#: The most triangles one loaded scene may have (instances included): 16.7 million.
MAX_TRIANGLES = 1 << 24
#: The most vertices one loaded scene may have (instances and un-shared flat vertices included).
MAX_VERTICES = 1 << 25
#: The most pixels one texture image may have (8192 x 8192).
MAX_TEXTURE_PIXELS = 1 << 26

_GLB_MAGIC = b"glTF"
_GLB_JSON = 0x4E4F534A  # "JSON", little-endian (glTF 2.0 §4.4.3)
_GLB_BIN = 0x004E4942  # "BIN\0"
_TRIANGLE_MODES = (pygltflib.TRIANGLES, pygltflib.TRIANGLE_STRIP, pygltflib.TRIANGLE_FAN)
_SKIPPED_MODES = {
    pygltflib.POINTS: "POINTS",
    pygltflib.LINES: "LINES",
    pygltflib.LINE_LOOP: "LINE_LOOP",
    pygltflib.LINE_STRIP: "LINE_STRIP",
}
_MAG_FILTERS = (NEAREST, LINEAR)
_MIN_FILTERS = (NEAREST, LINEAR, 9984, 9985, 9986, 9987)
_WRAPS = (REPEAT, CLAMP_TO_EDGE, MIRRORED_REPEAT)
_ALPHA_MODES = ("OPAQUE", "MASK", "BLEND")
_URI_SCHEME = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]+:")  # two letters or more: "C:" is a drive
# attribute -> (allowed types, allowed (componentType, normalized) pairs); glTF 2.0 §3.7.2.1
# plus KHR_mesh_quantization's additions.
_ANY_INT = {(c, n) for c in (5120, 5121, 5122, 5123) for n in (False, True)}
_ATTRIBUTES = {
    "POSITION": (("VEC3",), {(5126, False)} | _ANY_INT),
    "NORMAL": (("VEC3",), {(5126, False), (5120, True), (5122, True)}),
    "TANGENT": (("VEC4",), {(5126, False), (5120, True), (5122, True)}),
    "TEXCOORD": (("VEC2",), {(5126, False)} | _ANY_INT),
    "COLOR_0": (("VEC3", "VEC4"), {(5126, False), (5121, True), (5123, True)}),
}


# ---------------------------------------------------------------------- public API
def load_gltf(path, scene=None) -> Scene:
    """Load a ``.gltf`` or ``.glb`` file into a flat world-space :class:`Scene`.

    Parameters
    ----------
    path : str or os.PathLike
        The file.  External buffers and images are resolved relative to its folder.
    scene : int or str, optional
        The scene to load, by index or by name.  Default: the file's ``scene``, else scene 0.

    Returns
    -------
    Scene
        Every drawn triangle of the scene in world space; see :class:`Scene` for the arrays.
        ``Scene.source`` is ``str(path)``.

    Raises
    ------
    SceneError
        For a file that is missing, unreadable or not valid glTF 2.0.  The message names the
        file and the glTF object, e.g.
        ``bottle.gltf: meshes[2].primitives[0]: accessor 7 reads past the end of buffer 0``.
    """
    name = str(path)
    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise SceneError(name, None, f"cannot read the file ({exc.strerror or exc})") from None
    return load_gltf_bytes(data, name, base_dir=p.parent, scene=scene)


def load_gltf_bytes(data: bytes, name: str, base_dir=None, scene=None) -> Scene:
    """Load glTF 2.0 from bytes (JSON text or GLB) into a flat world-space :class:`Scene`.

    Parameters
    ----------
    data : bytes
        The file contents: UTF-8 glTF JSON, or a GLB container.
    name : str
        The file's name, used in messages and as ``Scene.source``.
    base_dir : str or os.PathLike, optional
        The folder relative URIs resolve against.  Without it, only ``data:`` URIs and the
        GLB binary chunk can be read.
    scene : int or str, optional
        The scene to load (index or name); default the file's ``scene``, else scene 0.

    Returns
    -------
    Scene

    Raises
    ------
    SceneError
        For anything that is not valid, supported glTF 2.0 (see :func:`load_gltf`).
    """
    name = str(name)
    data = bytes(data)
    doc, bin_chunk = _parse_container(data, name)
    base = None if base_dir is None else Path(base_dir)
    loader = _BufferLoader(doc, name, base, bin_chunk)
    g = GltfData(doc, name, loader)
    loader.data = g
    try:
        return _Builder(g, base).build(scene)
    except SceneError:
        raise
    except MemoryError:
        raise SceneError(name, g.where, "ran out of memory while loading") from None
    except (KeyError, TypeError, ValueError, IndexError, AttributeError, OverflowError, RecursionError) as exc:
        # A safety net: every field is checked on the way, but a hostile file must never
        # surface as a traceback.
        raise SceneError(name, g.where, f"malformed glTF ({type(exc).__name__}: {exc})") from None


# ---------------------------------------------------------------------- container
def _parse_container(data: bytes, name: str) -> tuple[dict, bytes | None]:
    """Split GLB or JSON text into (JSON object, BIN chunk or None) and check the asset."""
    bin_chunk = None
    if data[:4] == _GLB_MAGIC:
        if len(data) < 12:
            raise SceneError(name, None, "GLB header is truncated (fewer than 12 bytes)")
        version, length = struct.unpack_from("<II", data, 4)
        if version != 2:
            raise SceneError(name, None, f"GLB container version {version} is not supported (accepted: 2)")
        if length > len(data):
            raise SceneError(name, None, f"GLB header declares {length} bytes but the file has {len(data)}")
        chunks = []
        pos = 12
        while pos + 8 <= length:
            chunk_length, chunk_type = struct.unpack_from("<II", data, pos)
            start = pos + 8
            if start + chunk_length > length:
                raise SceneError(
                    name, None,
                    f"GLB chunk {len(chunks)} declares {chunk_length} bytes, past the end of the file",
                )
            chunks.append((chunk_type, data[start : start + chunk_length]))
            pos = start + chunk_length
        if not chunks or chunks[0][0] != _GLB_JSON:
            raise SceneError(name, None, "GLB has no JSON chunk first (glTF 2.0 §4.4.3)")
        text_bytes = chunks[0][1]
        if len(chunks) > 1 and chunks[1][0] == _GLB_BIN:
            bin_chunk = chunks[1][1]
    else:
        text_bytes = data
    try:
        text = text_bytes.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise SceneError(name, None, f"is neither GLB nor UTF-8 glTF JSON (bad byte at offset {exc.start})") from None

    def reject_constant(token):
        raise ValueError(f"non-standard JSON constant {token}")

    try:
        doc = json.loads(text, parse_constant=reject_constant)
    except json.JSONDecodeError as exc:
        raise SceneError(
            name, None, f"is not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}"
        ) from None
    except RecursionError:
        raise SceneError(name, None, "is not valid glTF: JSON nested too deeply") from None
    except ValueError as exc:
        raise SceneError(name, None, f"is not valid JSON: {exc}") from None
    if not isinstance(doc, dict):
        raise SceneError(name, None, "is not a glTF document (the JSON is not an object)")
    asset = doc.get("asset")
    if not isinstance(asset, dict) or not isinstance(asset.get("version"), str):
        raise SceneError(name, "asset", "version is required (glTF 2.0 files have asset.version \"2.0\")")
    version = asset["version"]
    if not re.fullmatch(r"2\.\d+", version):
        raise SceneError(name, "asset", f"version {version!r} is not supported (accepted: 2.0)")
    minimum = asset.get("minVersion")
    if minimum is not None and minimum != "2.0":
        raise SceneError(name, "asset", f"minVersion {minimum!r} is newer than this loader (2.0)")
    _check_extensions(doc, name)
    return doc, bin_chunk


def _check_extensions(doc: dict, name: str) -> None:
    required = doc.get("extensionsRequired", [])
    if not isinstance(required, list) or not all(isinstance(e, str) for e in required):
        raise SceneError(name, "extensionsRequired", "must be an array of extension names")
    missing = [e for e in required if e not in SUPPORTED_EXTENSIONS]
    if missing:
        what = "; ".join(f"{e} ({_COMPRESSION[e]})" if e in _COMPRESSION else e for e in missing)
        hint = " (re-export the file without compression)" if any(e in _COMPRESSION for e in missing) else ""
        raise SceneError(
            name,
            "extensionsRequired",
            f"unsupported required extension {what}{hint}; supported: {', '.join(sorted(SUPPORTED_EXTENSIONS))}",
        )


class _BufferLoader:
    """Loads ``buffers[i]`` from a data URI, an external file or the GLB BIN chunk."""

    def __init__(self, doc: dict, name: str, base: Path | None, bin_chunk: bytes | None):
        self.doc, self.name, self.base, self.bin_chunk = doc, name, base, bin_chunk
        self.data: GltfData | None = None

    def __call__(self, index: int) -> bytes:
        where = f"buffers[{index}]"
        buf = self.data.obj("buffers", index, where, "buffer")
        uri = buf.get("uri")
        if uri is None:
            if index == 0 and self.bin_chunk is not None:
                return self.bin_chunk
            raise SceneError(self.name, where, "has no uri and there is no GLB binary chunk for it")
        return _read_uri(self.data, uri, self.base, where)


def _read_uri(g: GltfData, uri, base: Path | None, where: str) -> bytes:
    """The bytes behind a ``data:`` URI or a relative file URI (glTF 2.0 §3.6.1)."""
    if not isinstance(uri, str):
        raise g.error(where, f"uri must be a string, got {_show(uri)}")
    if uri.startswith("data:"):
        header, sep, payload = uri.partition(",")
        if not sep:
            raise g.error(where, "data URI has no ',' before its payload")
        if header.endswith(";base64"):
            try:
                return base64.b64decode(payload, validate=True)
            except ValueError as exc:
                raise g.error(where, f"data URI is not valid base64 ({exc})") from None
        return urllib.parse.unquote_to_bytes(payload)
    if _URI_SCHEME.match(uri):
        raise g.error(where, f"uri {_show(uri)} is not supported (accepted: data: URIs and relative file paths)")
    if base is None:
        raise g.error(where, f"external file {_show(uri)} cannot be read: no base folder was given")
    path = base / urllib.parse.unquote(uri)
    try:
        return path.read_bytes()
    except OSError as exc:
        raise g.error(where, f"cannot read {_show(uri, 80)} ({exc.strerror or exc}; looked in {base})") from None


# ---------------------------------------------------------------------- transforms
def _quat_matrix(q) -> np.ndarray:
    x, y, z, w = q
    return np.array(
        [
            [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
            [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
            [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
        ]
    )


def _local_matrix(g: GltfData, node: dict, where: str) -> np.ndarray:
    """``parent_from_node``: the node's ``matrix`` (column-major) or T * R * S (glTF 2.0 §3.5.2)."""
    if "matrix" in node:
        m = g.numbers_field(node, "matrix", 16, where)
        if any(k in node for k in ("translation", "rotation", "scale")):
            log.warning("%s: %s has both matrix and TRS; using matrix", g.file, where)
        return np.array(m, dtype=np.float64).reshape(4, 4).T
    t = g.numbers_field(node, "translation", 3, where, default=(0.0, 0.0, 0.0))
    q = g.numbers_field(node, "rotation", 4, where, default=(0.0, 0.0, 0.0, 1.0))
    s = g.numbers_field(node, "scale", 3, where, default=(1.0, 1.0, 1.0))
    norm = math.sqrt(sum(c * c for c in q))
    if not norm > 0:
        raise g.error(where, "rotation is a zero quaternion (a unit quaternion [x, y, z, w] is needed)")
    m = np.eye(4)
    m[:3, :3] = _quat_matrix([c / norm for c in q]) * np.array(s)[None, :]
    m[:3, 3] = t
    return m


def _prescale(v: np.ndarray) -> np.ndarray:
    """``v`` divided by its largest magnitude, so that squaring it cannot overflow."""
    top = float(np.max(np.abs(v)))
    return v / top if top > 0 else v


def _rigid(world: np.ndarray) -> np.ndarray:
    """A rigid copy of ``world``: same origin and −Z axis, up as close to +Y as possible."""
    out = np.eye(4)
    out[:3, 3] = world[:3, 3]
    back = _prescale(world[:3, 2])
    up = _prescale(world[:3, 1])
    nb = np.linalg.norm(back)
    if not nb > 0:
        return out
    z = back / nb
    y = up - z * np.dot(up, z)
    ny = np.linalg.norm(y)
    if not ny > 1e-12:
        # up is parallel to the view axis: pick any perpendicular
        helper = np.array([0.0, 1.0, 0.0]) if abs(z[1]) < 0.9 else np.array([1.0, 0.0, 0.0])
        y = helper - z * np.dot(helper, z)
        ny = np.linalg.norm(y)
    y = y / ny
    x = np.cross(y, z)
    out[:3, 0], out[:3, 1], out[:3, 2] = x, y, z
    return out


# ---------------------------------------------------------------------- the builder
class _Builder:
    def __init__(self, g: GltfData, base: Path | None):
        self.g = g
        self.base = base
        self.mesh_cache: dict[int, list] = {}
        self.image_cache: dict[int, np.ndarray] = {}
        self.need_default_material = False

    # .................................................................. top level
    def build(self, scene_arg) -> Scene:
        g = self.g
        roots = self._select_scene(scene_arg)
        instances, camera_nodes, light_nodes = self._walk(roots)
        self._check_budget(instances)

        materials = [self._material(i) for i in range(len(g.array("materials")))]
        parts = []
        for node_index, mesh_index, world in instances:
            parts.extend(self._instance(node_index, mesh_index, world, len(materials)))
        if self.need_default_material:
            materials.append(Material(name="default"))
        textures = [self._texture(i) for i in range(len(g.array("textures")))]
        cameras = [self._camera(c, n, w, k) for k, (n, c, w) in enumerate(camera_nodes)]
        lights = [self._light(li, n, w, k) for k, (n, li, w) in enumerate(light_nodes)]
        g.where = None
        return _assemble(parts, materials, textures, cameras, lights, g.file)

    def _select_scene(self, scene_arg) -> list[int]:
        g = self.g
        scenes = g.array("scenes")
        if scene_arg is None:
            if "scene" in g.doc:
                index = g.doc["scene"]
                if not _is_int(index) or not 0 <= int(index) < len(scenes):
                    raise g.error("scene", f"{_show(index)} is out of range (the file has {len(scenes)} scenes)")
                index = int(index)
            elif scenes:
                index = 0
            else:
                return self._implicit_roots()
        elif isinstance(scene_arg, str):
            names = [s.get("name") if isinstance(s, dict) else None for s in scenes]
            if scene_arg not in names and scene_arg.isdigit() and int(scene_arg) < len(scenes):
                names = [None] * len(scenes)
                names[int(scene_arg)] = scene_arg  # "1" from a command line means scene 1
            if scene_arg not in names:
                shown = ", ".join(repr(n) for n in names if n) or "none"
                raise g.error(None, f"has no scene named {scene_arg!r} (scene names: {shown})")
            index = names.index(scene_arg)
        elif _is_int(scene_arg) and 0 <= int(scene_arg) < len(scenes):
            index = int(scene_arg)
        else:
            raise g.error(None, f"has no scene {_show(scene_arg)} (it has {len(scenes)} scenes, 0-based)")
        where = f"scenes[{index}]"
        sc = g.obj("scenes", index, "scene")
        nodes = g.list_field(sc, "nodes", where)
        return [self._node_ref(n, where) for n in nodes]

    def _implicit_roots(self) -> list[int]:
        g = self.g
        nodes = g.array("nodes")
        if not nodes:
            if g.array("meshes"):
                log.warning("%s: has meshes but no scene and no nodes; nothing to draw", g.file)
            return []
        children = set()
        for i, node in enumerate(nodes):
            if isinstance(node, dict):
                for c in g.list_field(node, "children", f"nodes[{i}]"):
                    if _is_int(c):
                        children.add(int(c))
        log.info("%s: has no scenes; using every node without a parent", g.file)
        return [i for i in range(len(nodes)) if i not in children]

    def _node_ref(self, index, where: str) -> int:
        self.g.obj("nodes", index, where, "node")
        return int(index)

    def _walk(self, roots: list[int]):
        """Depth-first over the node trees: (node, mesh, world) instances, cameras, lights."""
        g = self.g
        instances, cameras, lights = [], [], []
        light_defs = self._light_defs()
        seen: set[int] = set()
        stack = [(r, np.eye(4), "scene") for r in reversed(roots)]
        while stack:
            index, parent_world, parent = stack.pop()
            where = f"nodes[{index}]"
            g.where = where
            if index in seen:
                raise g.error(
                    where, f"is reached twice (from {parent}); glTF node hierarchies must be strict trees"
                )
            seen.add(index)
            node = g.obj("nodes", index, parent)
            with np.errstate(over="ignore", invalid="ignore"):
                world = parent_world @ _local_matrix(g, node, where)
            if not np.isfinite(world).all():
                raise g.error(where, "the world transform overflows (its matrix is not finite)")
            if "mesh" in node:
                g.obj("meshes", node["mesh"], where, "mesh")
                instances.append((index, int(node["mesh"]), world))
            if "camera" in node:
                g.obj("cameras", node["camera"], where, "camera")
                cameras.append((index, int(node["camera"]), world))
            ext = g.dict_field(node, "extensions", where)
            if "KHR_lights_punctual" in ext:
                lp = ext["KHR_lights_punctual"]
                lw = where + ".extensions.KHR_lights_punctual"
                if not isinstance(lp, dict):
                    raise g.error(lw, "must be an object")
                li = g.int_field(lp, "light", lw, minimum=0)
                if li >= len(light_defs):
                    raise g.error(lw, f"light {li} is out of range (the file has {len(light_defs)} lights)")
                lights.append((index, li, world))
            for c in reversed(g.list_field(node, "children", where)):
                stack.append((self._node_ref(c, where), world, where))
        return instances, cameras, lights

    def _check_budget(self, instances) -> None:
        """Refuse a scene over MAX_TRIANGLES / MAX_VERTICES before decoding any geometry."""
        g = self.g
        total = total_vertices = 0
        per_mesh: dict[int, tuple[int, int]] = {}
        for _, mesh_index, _ in instances:
            if mesh_index not in per_mesh:
                mesh = g.obj("meshes", mesh_index, "nodes")
                mw = f"meshes[{mesh_index}]"
                count = vertices = 0
                for p, prim in enumerate(g.list_field(mesh, "primitives", mw)):
                    pw = f"{mw}.primitives[{p}]"
                    if not isinstance(prim, dict):
                        raise g.error(pw, "must be an object")
                    mode = g.int_field(prim, "mode", pw, default=pygltflib.TRIANGLES)
                    if mode not in _TRIANGLE_MODES:
                        continue
                    attrs = g.dict_field(prim, "attributes", pw)
                    if "POSITION" not in attrs:
                        continue  # reported when the primitive is decoded
                    n_v = g.accessor_info(attrs["POSITION"], pw, "POSITION")["count"]
                    n = g.accessor_info(prim["indices"], pw, "indices")["count"] if "indices" in prim else n_v
                    t = n // 3 if mode == pygltflib.TRIANGLES else max(n - 2, 0)
                    count += t
                    vertices += n_v if "NORMAL" in attrs else 3 * t  # no NORMAL: flat, un-shared
                per_mesh[mesh_index] = (count, vertices)
            total += per_mesh[mesh_index][0]
            total_vertices += per_mesh[mesh_index][1]
        if total_vertices > MAX_VERTICES:
            raise g.error(
                None,
                f"the scene would have {total_vertices} vertices, more than this loader accepts ({MAX_VERTICES})",
            )
        if total > MAX_TRIANGLES:
            raise g.error(
                None,
                f"the scene would have {total} triangles, more than this loader accepts ({MAX_TRIANGLES})",
            )

    # .................................................................. meshes
    def _mesh(self, mesh_index: int) -> list:
        """Decode a mesh's triangle primitives once (local space), cached for instancing."""
        if mesh_index in self.mesh_cache:
            return self.mesh_cache[mesh_index]
        g = self.g
        mw = f"meshes[{mesh_index}]"
        mesh = g.obj("meshes", mesh_index, mw)
        prims = []
        for p, prim in enumerate(g.list_field(mesh, "primitives", mw)):
            pw = f"{mw}.primitives[{p}]"
            g.where = pw
            decoded = self._primitive(prim, pw)
            if decoded is not None:
                prims.append(decoded)
        self.mesh_cache[mesh_index] = prims
        return prims

    def _attribute(self, attrs: dict, name: str, pw: str, n_vertices: int | None):
        g = self.g
        if name not in attrs:
            return None
        kind = "TEXCOORD" if name.startswith("TEXCOORD_") else name
        types, formats = _ATTRIBUTES[kind]
        info = g.accessor_info(attrs[name], pw, name)
        if info["type"] not in types or (info["component_type"], info["normalized"]) not in formats:
            accepted = ", ".join(
                f"{c}{' normalized' if n else ''}" for c, n in sorted(formats)
            )
            raise g.error(
                pw,
                f"{info['label']} is {info['type']} of componentType {info['component_type']}"
                f"{' normalized' if info['normalized'] else ''} (accepted: {'/'.join(types)} of {accepted})",
            )
        if n_vertices is not None and info["count"] != n_vertices:
            raise g.error(pw, f"{info['label']} has {info['count']} elements but POSITION has {n_vertices}")
        values = g.read_accessor(attrs[name], pw, name, as_float=True)
        if not np.isfinite(values).all():
            bad = int(np.argmax(~np.isfinite(values).all(axis=1)))
            raise g.error(pw, f"{info['label']} has a non-finite value at element {bad}")
        return values

    def _primitive(self, prim, pw: str):
        g = self.g
        if not isinstance(prim, dict):
            raise g.error(pw, "must be an object")
        mode = g.int_field(prim, "mode", pw, default=pygltflib.TRIANGLES)
        if mode in _SKIPPED_MODES:
            log.warning("%s: %s: mode %s is not drawn (only triangles are rendered)", g.file, pw, _SKIPPED_MODES[mode])
            return None
        if mode not in _TRIANGLE_MODES:
            raise g.error(pw, f"mode {mode} is not a glTF 2.0 primitive mode (accepted: 0-6)")
        ext = g.dict_field(prim, "extensions", pw)
        attrs = g.dict_field(prim, "attributes", pw)
        if "POSITION" not in attrs:
            compressed = [e for e in ext if e in _COMPRESSION]
            if compressed:
                raise g.error(
                    pw,
                    f"has no POSITION attribute (its data is {_COMPRESSION[compressed[0]]}, which is not "
                    "supported; re-export the file without compression)",
                )
            # glTF 2.0 §3.7.2.1: without POSITION a client SHOULD skip the primitive
            log.warning("%s: %s has no POSITION attribute; it is not drawn", g.file, pw)
            return None
        positions = self._attribute(attrs, "POSITION", pw, None)
        n_v = positions.shape[0]
        normals = self._attribute(attrs, "NORMAL", pw, n_v)
        tangents = self._attribute(attrs, "TANGENT", pw, n_v) if normals is not None else None
        uv0 = self._attribute(attrs, "TEXCOORD_0", pw, n_v)
        uv1 = self._attribute(attrs, "TEXCOORD_1", pw, n_v)
        colours = self._attribute(attrs, "COLOR_0", pw, n_v)

        if "indices" in prim:
            info = g.accessor_info(prim["indices"], pw, "indices")
            if info["type"] != "SCALAR" or info["component_type"] not in (5121, 5123, 5125) or info["normalized"]:
                raise g.error(
                    pw,
                    f"{info['label']} must be SCALAR UNSIGNED_BYTE/UNSIGNED_SHORT/UNSIGNED_INT, "
                    f"got {info['type']} of componentType {info['component_type']}",
                )
            indices = g.read_accessor(prim["indices"], pw, "indices")
            if indices.size and int(indices.max()) >= n_v:
                bad = int(np.argmax(indices >= n_v))
                raise g.error(
                    pw,
                    f"{info['label']}: index {int(indices[bad])} at element {bad} is out of range "
                    f"(POSITION has {n_v} vertices)",
                )
            indices = indices.astype(np.int32)
        else:
            indices = np.arange(n_v, dtype=np.int32)
        tris = _triangulate(indices, mode, g.file, pw)

        material = None
        if "material" in prim:
            g.obj("materials", prim["material"], pw, "material")
            material = int(prim["material"])

        uvs = np.zeros((n_v, 2, 2), np.float32)
        if uv0 is not None:
            uvs[:, 0] = uv0
        if uv1 is not None:
            uvs[:, 1] = uv1
        rgba = np.ones((n_v, 4), np.float32)
        if colours is not None:
            rgba[:, : colours.shape[1]] = colours
        flat = normals is None
        if flat:  # glTF 2.0 §3.7.2.1: flat normals; un-share the vertices, one copy per triangle
            order = tris.reshape(-1)
            positions, uvs, rgba = positions[order], uvs[order], rgba[order]
            tris = np.arange(order.size, dtype=np.int32).reshape(-1, 3)
        return {
            "positions": positions,
            "normals": normals,
            "tangents": tangents,
            "uvs": uvs,
            "colours": rgba,
            "triangles": tris,
            "material": material,
            "flat": flat,
        }

    def _instance(self, node_index: int, mesh_index: int, world: np.ndarray, n_materials: int) -> list:
        """Transform a mesh's primitives into world space for one node."""
        g = self.g
        where = f"nodes[{node_index}]"
        prims = self._mesh(mesh_index)
        g.where = where
        linear = world[:3, :3]
        normal_matrix = None
        with np.errstate(all="ignore"):
            det = float(np.linalg.det(linear))
            if math.isfinite(det) and abs(det) > 1e-300:
                try:
                    normal_matrix = np.linalg.inv(linear).T  # normals: inverse transpose
                except np.linalg.LinAlgError:
                    normal_matrix = None
        if normal_matrix is None or not np.isfinite(normal_matrix).all():
            log.warning("%s: %s has a singular world matrix (zero scale); mesh %d is not drawn", g.file, where, mesh_index)
            return []
        out = []
        for prim in prims:
            with np.errstate(over="ignore", invalid="ignore"):
                positions = _transform(prim["positions"], linear, world[:3, 3]).astype(np.float32)
            if not np.isfinite(positions).all():
                raise g.error(where, f"the world transform of mesh {mesh_index} makes positions non-finite")
            tris = prim["triangles"]
            if det < 0:  # mirrored: keep front faces counter-clockwise
                tris = tris[:, [0, 2, 1]]
            tangents = np.zeros((positions.shape[0], 4), np.float32)
            if prim["flat"]:
                normals = _flat_normals(positions, tris)
            else:
                normals = _unit(_transform(prim["normals"], normal_matrix))
                if prim["tangents"] is not None:
                    t = prim["tangents"]
                    tangents[:, :3] = _unit(_transform(t[:, :3], linear), fallback=(1.0, 0.0, 0.0))
                    tangents[:, 3] = np.where(t[:, 3] < 0, -1.0, 1.0) * (1.0 if det > 0 else -1.0)
            material = prim["material"]
            if material is None:
                self.need_default_material = True
                material = n_materials  # the default material, appended after the file's
            out.append(
                {
                    "positions": positions,
                    "normals": normals,
                    "tangents": tangents,
                    "uvs": prim["uvs"],
                    "colours": prim["colours"],
                    "triangles": tris,
                    "material": material,
                }
            )
        return out

    # .................................................................. materials
    def _texture_ref(self, info, where: str, scale_key: str | None = None) -> TextureRef | None:
        g = self.g
        if info is None:
            return None
        if not isinstance(info, dict):
            raise g.error(where, f"must be an object, got {_show(info)}")
        index = g.int_field(info, "index", where, minimum=0)
        g.obj("textures", index, where, "texture")
        tex_coord = g.int_field(info, "texCoord", where, default=0, minimum=0)
        scale = 1.0
        if scale_key is not None:
            scale = g.number_field(info, scale_key, where, default=1.0)
        transform = None
        ext = g.dict_field(info, "extensions", where)
        if "KHR_texture_transform" in ext:
            tw = where + ".extensions.KHR_texture_transform"
            tt = ext["KHR_texture_transform"]
            if not isinstance(tt, dict):
                raise g.error(tw, "must be an object")
            transform = TextureTransform(
                offset=g.numbers_field(tt, "offset", 2, tw, default=(0.0, 0.0)),
                rotation_rad=g.number_field(tt, "rotation", tw, default=0.0),
                scale=g.numbers_field(tt, "scale", 2, tw, default=(1.0, 1.0)),
            )
            # KHR_texture_transform: its texCoord, when given, overrides the textureInfo's
            tex_coord = g.int_field(tt, "texCoord", tw, default=tex_coord, minimum=0)
        return TextureRef(index=index, tex_coord=tex_coord, scale=scale, transform=transform)

    def _material(self, index: int) -> Material:
        g = self.g
        mw = f"materials[{index}]"
        g.where = mw
        m = g.obj("materials", index, mw)
        pbr = g.dict_field(m, "pbrMetallicRoughness", mw)
        pw = mw + ".pbrMetallicRoughness"
        ext = g.dict_field(m, "extensions", mw)
        strength = 1.0
        if "KHR_materials_emissive_strength" in ext:
            ew = mw + ".extensions.KHR_materials_emissive_strength"
            es = ext["KHR_materials_emissive_strength"]
            if not isinstance(es, dict):
                raise g.error(ew, "must be an object")
            strength = g.number_field(es, "emissiveStrength", ew, default=1.0, minimum=0.0)
        alpha_mode = g.str_field(m, "alphaMode", mw, default="OPAQUE")
        if alpha_mode not in _ALPHA_MODES:
            raise g.error(mw, f"alphaMode {alpha_mode!r} is not one of {', '.join(_ALPHA_MODES)}")
        ext_textures = self._extension_textures(ext, mw + ".extensions")
        name = g.str_field(m, "name", mw, default="")
        return Material(
            name=name or f"material{index}",
            base_colour_factor=g.numbers_field(pbr, "baseColorFactor", 4, pw, default=(1.0, 1.0, 1.0, 1.0),
                                               minimum=0.0, maximum=1.0),
            base_colour_texture=self._texture_ref(pbr.get("baseColorTexture"), pw + ".baseColorTexture"),
            metallic_factor=g.number_field(pbr, "metallicFactor", pw, default=1.0, minimum=0.0, maximum=1.0),
            roughness_factor=g.number_field(pbr, "roughnessFactor", pw, default=1.0, minimum=0.0, maximum=1.0),
            metallic_roughness_texture=self._texture_ref(
                pbr.get("metallicRoughnessTexture"), pw + ".metallicRoughnessTexture"
            ),
            normal_texture=self._texture_ref(m.get("normalTexture"), mw + ".normalTexture", "scale"),
            occlusion_texture=self._texture_ref(m.get("occlusionTexture"), mw + ".occlusionTexture", "strength"),
            emissive_factor=self._emissive_factor(m, mw),
            emissive_texture=self._texture_ref(m.get("emissiveTexture"), mw + ".emissiveTexture"),
            emissive_strength=strength,
            alpha_mode=alpha_mode,
            alpha_cutoff=g.number_field(m, "alphaCutoff", mw, default=0.5, minimum=0.0),
            double_sided=g.bool_field(m, "doubleSided", mw, False),
            extensions=ext,
            extension_textures=ext_textures,
        )

    def _emissive_factor(self, m: dict, mw: str) -> tuple[float, float, float]:
        g = self.g
        value = g.numbers_field(m, "emissiveFactor", 3, mw, default=(0.0, 0.0, 0.0))
        if min(value) < 0 or max(value) > 1:
            raise g.error(
                mw,
                f"emissiveFactor needs 3 numbers in [0, 1], got {_show(m['emissiveFactor'])} "
                "(brighter emission goes in KHR_materials_emissive_strength)",
            )
        return value

    def _extension_textures(self, ext: dict, where: str) -> dict:
        """The texture references (``*Texture`` keys) inside KHR_materials_* objects, parsed and checked
        like the core ones: ``{(extension, key): TextureRef}``.  ``*NormalTexture`` keys are
        ``normalTextureInfo`` (their ``scale`` is kept)."""
        out = {}
        for ext_name, body in ext.items():
            if not ext_name.startswith("KHR_materials_"):
                continue  # other vendors' extensions are kept raw and not interpreted here
            if not isinstance(body, dict):
                raise self.g.error(f"{where}.{ext_name}", "must be an object")
            for key, value in body.items():
                if key.endswith("Texture"):
                    scale_key = "scale" if key.endswith("NormalTexture") else None
                    ref = self._texture_ref(value, f"{where}.{ext_name}.{key}", scale_key)
                    if ref is not None:
                        out[(ext_name, key)] = ref
        return out

    # .................................................................. textures
    def _texture(self, index: int) -> Texture:
        g = self.g
        tw = f"textures[{index}]"
        g.where = tw
        tex = g.obj("textures", index, tw)
        ext = g.dict_field(tex, "extensions", tw)
        source = None
        webp = ext.get("EXT_texture_webp")
        if isinstance(webp, dict) and "source" in webp:
            source = webp["source"]  # preferred when the client can decode WebP (Pillow can)
        elif "source" in tex:
            source = tex["source"]
        sampler = {}
        if "sampler" in tex:
            sampler = g.obj("samplers", tex["sampler"], tw, "sampler")
        sw = f"samplers[{int(tex['sampler'])}]" if "sampler" in tex else tw
        mag = g.int_field(sampler, "magFilter", sw, default=None)
        minf = g.int_field(sampler, "minFilter", sw, default=None)
        wrap_s = g.int_field(sampler, "wrapS", sw, default=REPEAT)
        wrap_t = g.int_field(sampler, "wrapT", sw, default=REPEAT)
        if mag is not None and mag not in _MAG_FILTERS:
            raise g.error(sw, f"magFilter {mag} is not one of 9728 NEAREST, 9729 LINEAR")
        if minf is not None and minf not in _MIN_FILTERS:
            raise g.error(sw, f"minFilter {minf} is not one of 9728, 9729, 9984-9987")
        for key, value in (("wrapS", wrap_s), ("wrapT", wrap_t)):
            if value not in _WRAPS:
                raise g.error(sw, f"{key} {value} is not one of 10497 REPEAT, 33071 CLAMP_TO_EDGE, 33648 MIRRORED_REPEAT")
        if source is None:
            log.warning("%s: %s has no image source it can decode; using a 1x1 white texture", g.file, tw)
            pixels = np.ones((1, 1, 4), np.float32)
            name = g.str_field(tex, "name", tw, default="")
        else:
            img = g.obj("images", source, tw, "image")
            if int(source) not in self.image_cache:
                self.image_cache[int(source)] = self._image(int(source), img)
            pixels = self.image_cache[int(source)]  # textures sharing an image share its pixels
            name = g.str_field(tex, "name", tw, default="") or g.str_field(img, "name", f"images[{int(source)}]", default="")
        return Texture(pixels=pixels, name=name, mag_filter=mag, min_filter=minf, wrap_s=wrap_s, wrap_t=wrap_t)

    def _image(self, index: int, img: dict) -> np.ndarray:
        """Decode ``images[index]`` to ``(H, W, 4) float32`` stored values in [0, 1]."""
        from PIL import Image

        g = self.g
        iw = f"images[{index}]"
        g.where = iw
        if "bufferView" in img:
            raw = bytes(g.buffer_view_bytes(img["bufferView"], iw))
        elif "uri" in img:
            raw = _read_uri(g, img["uri"], self.base, iw)
        else:
            raise g.error(iw, "has neither a uri nor a bufferView")
        try:
            with Image.open(io.BytesIO(raw)) as im:
                w, h = im.size
                if w * h > MAX_TEXTURE_PIXELS:
                    raise g.error(iw, f"is {w}x{h} pixels, more than this loader accepts ({MAX_TEXTURE_PIXELS})")
                im.load()
                return _pixels_rgba(im)
        except SceneError:
            raise
        except Exception as exc:  # Pillow raises many kinds for a bad image
            raise g.error(iw, f"cannot be decoded as PNG/JPEG/WebP ({type(exc).__name__}: {exc})") from None

    # .................................................................. cameras, lights
    def _camera(self, cam_index: int, node_index: int, world: np.ndarray, k: int) -> Camera:
        g = self.g
        cw = f"cameras[{cam_index}]"
        g.where = cw
        cam = g.obj("cameras", cam_index, cw)
        node = g.obj("nodes", node_index, cw)
        kind = g.str_field(cam, "type", cw)
        name = g.str_field(cam, "name", cw, default="") or g.str_field(node, "name", f"nodes[{node_index}]", default="")
        name = name or f"camera{k}"
        world_from_camera = _rigid(world)
        if kind == "perspective":
            pw = cw + ".perspective"
            p = g.dict_field(cam, "perspective", cw)
            if not p:
                raise g.error(cw, "type is perspective but there is no perspective object")
            znear = g.number_field(p, "znear", pw, minimum=0.0)
            if not znear > 0:
                raise g.error(pw, "znear must be greater than 0")
            zfar = g.number_field(p, "zfar", pw, default=None)
            if zfar is not None and not zfar > znear:
                raise g.error(pw, f"zfar {zfar:g} must be greater than znear {znear:g}")
            yfov = g.number_field(p, "yfov", pw, minimum=0.0, maximum=math.pi)
            if not 0 < yfov < math.pi:
                raise g.error(pw, f"yfov {yfov:g} must be in (0, pi) radians")
            aspect = g.number_field(p, "aspectRatio", pw, default=None, minimum=0.0)
            if aspect is not None and not aspect > 0:
                raise g.error(pw, "aspectRatio must be greater than 0")
            return Camera(name=name, kind=kind, world_from_camera=world_from_camera, yfov_rad=yfov,
                          aspect_ratio=aspect, znear=znear, zfar=zfar)
        if kind == "orthographic":
            ow = cw + ".orthographic"
            o = g.dict_field(cam, "orthographic", cw)
            if not o:
                raise g.error(cw, "type is orthographic but there is no orthographic object")
            xmag = g.number_field(o, "xmag", ow)
            ymag = g.number_field(o, "ymag", ow)
            if xmag == 0 or ymag == 0:
                raise g.error(ow, "xmag and ymag must not be zero")
            znear = g.number_field(o, "znear", ow, minimum=0.0)
            zfar = g.number_field(o, "zfar", ow)
            if not zfar > znear:
                raise g.error(ow, f"zfar {zfar:g} must be greater than znear {znear:g}")
            return Camera(name=name, kind=kind, world_from_camera=world_from_camera, xmag=xmag, ymag=ymag,
                          znear=znear, zfar=zfar)
        raise g.error(cw, f"type {kind!r} is not perspective or orthographic")

    def _light_defs(self) -> list:
        g = self.g
        ext = g.dict_field(g.doc, "extensions", "extensions")
        lp = ext.get("KHR_lights_punctual")
        if lp is None:
            return []
        if not isinstance(lp, dict):
            raise g.error("extensions.KHR_lights_punctual", "must be an object")
        return g.list_field(lp, "lights", "extensions.KHR_lights_punctual")

    def _light(self, light_index: int, node_index: int, world: np.ndarray, k: int) -> Light:
        g = self.g
        lw = f"extensions.KHR_lights_punctual.lights[{light_index}]"
        g.where = lw
        light = self._light_defs()[light_index]
        if not isinstance(light, dict):
            raise g.error(lw, "must be an object")
        node = g.obj("nodes", node_index, lw)
        kind = g.str_field(light, "type", lw)
        if kind not in ("point", "spot", "directional"):
            raise g.error(lw, f"type {kind!r} is not point, spot or directional")
        name = g.str_field(light, "name", lw, default="") or g.str_field(node, "name", f"nodes[{node_index}]", default="")
        colour = g.numbers_field(light, "color", 3, lw, default=(1.0, 1.0, 1.0), minimum=0.0, maximum=1.0)
        intensity = g.number_field(light, "intensity", lw, default=1.0, minimum=0.0)
        rng = g.number_field(light, "range", lw, default=float("inf"))
        if not rng > 0:
            raise g.error(lw, "range must be greater than 0")
        inner, outer = 0.0, math.pi / 4
        if kind == "spot":
            sw = lw + ".spot"
            spot = g.dict_field(light, "spot", lw)
            inner = g.number_field(spot, "innerConeAngle", sw, default=0.0, minimum=0.0)
            outer = g.number_field(spot, "outerConeAngle", sw, default=math.pi / 4, maximum=math.pi / 2)
            if not inner < outer or not outer > 0:
                raise g.error(sw, f"needs 0 <= innerConeAngle < outerConeAngle <= pi/2, got {inner:g}, {outer:g}")
        forward = -_prescale(world[:3, 2])
        length = float(np.linalg.norm(forward))
        direction = tuple(float(v) for v in forward / length) if length > 0 else (0.0, 0.0, -1.0)
        return Light(
            name=name or f"light{k}",
            kind=kind,
            colour_linear=colour,
            intensity=intensity,
            range=rng,
            inner_cone_rad=inner,
            outer_cone_rad=outer,
            position=tuple(float(v) for v in world[:3, 3]),
            direction=direction,
        )


# ---------------------------------------------------------------------- array helpers
def _triangulate(indices: np.ndarray, mode: int, file: str, where: str) -> np.ndarray:
    """``(T, 3) int32`` triangles from an index list, per glTF 2.0 §3.7.2.1's mode formulas."""
    n = indices.shape[0]
    if mode == pygltflib.TRIANGLES:
        if n % 3:
            log.warning("%s: %s: %d indices is not a multiple of 3; the last %d are ignored", file, where, n, n % 3)
        return np.ascontiguousarray(indices[: n - n % 3].reshape(-1, 3), dtype=np.int32)
    t = max(n - 2, 0)
    i = np.arange(t)
    if mode == pygltflib.TRIANGLE_STRIP:
        # p_i = {v_i, v_(i + (1 + i % 2)), v_(i + (2 - i % 2))}
        cols = (i, i + 1 + i % 2, i + 2 - i % 2)
    else:  # TRIANGLE_FAN: p_i = {v_(i+1), v_(i+2), v_0}
        cols = (i + 1, i + 2, np.zeros_like(i))
    return np.ascontiguousarray(np.stack([indices[c] for c in cols], axis=1), dtype=np.int32)


def _transform(v: np.ndarray, m: np.ndarray, t: np.ndarray | None = None) -> np.ndarray:
    """``v @ m.T (+ t)`` in float64 for (N, 3) rows (column sums: much faster than matmul here)."""
    out = v[:, 0:1] * m[:, 0] + v[:, 1:2] * m[:, 1]
    out += v[:, 2:3] * m[:, 2]
    if t is not None:
        out += t
    return out


def _unit(v: np.ndarray, fallback=(0.0, 0.0, 1.0)) -> np.ndarray:
    """Rows of ``v`` normalised to float32; zero (or overflowing) rows become ``fallback``."""
    with np.errstate(all="ignore"):
        length = np.linalg.norm(v, axis=1)
    out = np.empty(v.shape, np.float32)
    ok = (length > 0) & np.isfinite(length)
    out[ok] = v[ok] / length[ok, None]
    out[~ok] = fallback
    return out


def _flat_normals(positions: np.ndarray, tris: np.ndarray) -> np.ndarray:
    """Per-vertex normals for un-shared vertices: each vertex gets its triangle's face normal."""
    p = positions[tris].astype(np.float64)  # (T, 3 corners, 3)
    face = _unit(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]))
    normals = np.empty((positions.shape[0], 3), np.float32)
    normals[:] = (0.0, 0.0, 1.0)
    normals[tris.reshape(-1)] = np.repeat(face, 3, axis=0)
    return normals


def _pixels_rgba(im) -> np.ndarray:
    """A loaded Pillow image as ``(H, W, 4) float32`` stored values scaled to [0, 1]."""
    if im.mode in ("I;16", "I;16L", "I;16B", "I;16N"):
        grey = np.asarray(im, dtype=np.float32) / 65535.0
        out = np.ones(grey.shape + (4,), np.float32)
        out[..., :3] = grey[..., None]
        return out
    if im.mode in ("I", "F"):
        grey = np.asarray(im, dtype=np.float32)
        grey = np.clip(grey / (65535.0 if im.mode == "I" else 1.0), 0.0, 1.0)
        out = np.ones(grey.shape + (4,), np.float32)
        out[..., :3] = grey[..., None]
        return out
    rgba = np.asarray(im.convert("RGBA"), dtype=np.float32) / 255.0
    return np.ascontiguousarray(rgba)


def _assemble(parts: list, materials, textures, cameras, lights, file: str) -> Scene:
    if not parts:
        log.info("%s: the scene has no triangles", file)
        return Scene(
            positions=np.zeros((0, 3), np.float32),
            normals=np.zeros((0, 3), np.float32),
            uvs=np.zeros((0, 2, 2), np.float32),
            tangents=np.zeros((0, 4), np.float32),
            colours=np.zeros((0, 4), np.float32),
            triangles=np.zeros((0, 3), np.int32),
            tri_material=np.zeros(0, np.int32),
            materials=materials,
            textures=textures,
            cameras=cameras,
            lights=lights,
            source=file,
        )
    offsets = np.cumsum([0] + [p["positions"].shape[0] for p in parts])
    triangles = np.concatenate([p["triangles"] + np.int32(o) for p, o in zip(parts, offsets[:-1])], axis=0)
    tri_material = np.concatenate(
        [np.full(p["triangles"].shape[0], p["material"], np.int32) for p in parts]
    )

    def cat(key, dtype=np.float32):
        if len(parts) == 1:  # already a fresh array of this load (instances share, so only then)
            out = np.ascontiguousarray(parts[0][key], dtype=dtype)
            return out if out.flags.writeable else out.copy()
        return np.ascontiguousarray(np.concatenate([p[key] for p in parts], axis=0), dtype=dtype)

    return Scene(
        positions=cat("positions"),
        normals=cat("normals"),
        uvs=cat("uvs"),
        tangents=cat("tangents"),
        colours=cat("colours"),
        triangles=np.ascontiguousarray(triangles, dtype=np.int32),
        tri_material=np.ascontiguousarray(tri_material, dtype=np.int32),
        materials=materials,
        textures=textures,
        cameras=cameras,
        lights=lights,
        source=file,
    )
