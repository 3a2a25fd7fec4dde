"""Structural check of glTF 2.0 JSON produced by templates, and reading of its buffers.

:func:`check_gltf` looks for what makes a scene unloadable or wrong, each reported with a JSON
pointer into the document (``/accessors/3``): required properties (glTF 2.0 §5 schema), every
index in range, accessors inside their buffer views and buffer views inside their buffers,
index values below the vertex count, buffers and images whose files exist and are long enough,
and ``extensionsUsed`` listing every extension the document uses.  It is not the Khronos
validator (the tests run that one); it is fast, in-process, and names the template.

:func:`load_buffers` resolves buffer URIs (data URIs or relative files), and
:func:`world_positions` gives the world-space vertex positions of a scene (used for framing).
"""

from __future__ import annotations

import base64
import math
import urllib.parse
from dataclasses import dataclass
from pathlib import Path

import numpy as np

# glTF 2.0 §3.6.2.2 accessor component types and element sizes
COMPONENT_SIZES = {5120: 1, 5121: 1, 5122: 2, 5123: 2, 5125: 4, 5126: 4}
COMPONENT_DTYPES = {5120: np.int8, 5121: np.uint8, 5122: np.int16, 5123: np.uint16, 5125: np.uint32,
                    5126: np.float32}
TYPE_COUNTS = {"SCALAR": 1, "VEC2": 2, "VEC3": 3, "VEC4": 4, "MAT2": 4, "MAT3": 9, "MAT4": 16}
_TEXTURE_SLOTS = ("normalTexture", "occlusionTexture", "emissiveTexture")
_PBR_TEXTURE_SLOTS = ("baseColorTexture", "metallicRoughnessTexture")


@dataclass(frozen=True)
class GltfIssue:
    """One problem: ``pointer`` is a JSON pointer into the document (``""`` = the root)."""

    pointer: str
    message: str

    def __str__(self) -> str:
        return f"{self.pointer or '/'}: {self.message}"


def _is_index(v, n: int) -> bool:
    return isinstance(v, int) and not isinstance(v, bool) and 0 <= v < n


def _data_uri_bytes(uri: str) -> bytes | None:
    if not uri.startswith("data:"):
        return None
    head, _, payload = uri.partition(",")
    if head.endswith(";base64"):
        return base64.b64decode(payload)
    return urllib.parse.unquote_to_bytes(payload)


def resolve_uri(uri: str, base_dir) -> Path:
    """The file a relative glTF URI names (percent-decoded, relative to ``base_dir``)."""
    return Path(base_dir) / urllib.parse.unquote(uri)


def load_buffers(gltf: dict, base_dir, *, glb_bin: bytes | None = None) -> list[bytes | None]:
    """The bytes of every buffer (``None`` where it cannot be read; :func:`check_gltf` says why)."""
    out: list[bytes | None] = []
    for i, buf in enumerate(gltf.get("buffers", []) or []):
        uri = buf.get("uri") if isinstance(buf, dict) else None
        data = None
        if uri is None:
            data = glb_bin if i == 0 else None
        elif uri.startswith("data:"):
            try:
                data = _data_uri_bytes(uri)
            except ValueError:
                data = None
        elif base_dir is not None:
            path = resolve_uri(uri, base_dir)
            try:
                data = path.read_bytes()
            except OSError:
                data = None
        out.append(data)
    return out


def _extensions_in(obj, found: set[str]) -> None:
    if isinstance(obj, dict):
        for key, value in obj.items():
            if key == "extensions" and isinstance(value, dict):
                found.update(value.keys())
            _extensions_in(value, found)
    elif isinstance(obj, list) and obj and isinstance(obj[0], (dict, list)):  # skip lists of numbers
        for v in obj:
            _extensions_in(v, found)


def used_extensions(gltf: dict) -> list[str]:
    """Every extension name that appears in an ``extensions`` object anywhere, sorted."""
    found: set[str] = set()
    _extensions_in({k: v for k, v in gltf.items() if k not in ("extensionsUsed", "extensionsRequired")}, found)
    return sorted(found)


def accessor_array(gltf: dict, buffers: list, index: int) -> np.ndarray:
    """Read accessor ``index`` into a fresh ``(count, n)`` array (sparse accessors included)."""
    acc = gltf["accessors"][index]
    n = TYPE_COUNTS[acc["type"]]
    dtype = np.dtype(COMPONENT_DTYPES[acc["componentType"]]).newbyteorder("<")
    count = acc["count"]
    if "bufferView" in acc:
        view = gltf["bufferViews"][acc["bufferView"]]
        data = buffers[view["buffer"]]
        start = view.get("byteOffset", 0) + acc.get("byteOffset", 0)
        elem = dtype.itemsize * n
        stride = view.get("byteStride") or elem
        raw = np.frombuffer(data, dtype=np.uint8, count=stride * (count - 1) + elem, offset=start)
        rows = np.lib.stride_tricks.as_strided(raw, shape=(count, elem), strides=(stride, 1))
        arr = np.ascontiguousarray(rows).view(dtype).reshape(count, n).copy()
    else:
        arr = np.zeros((count, n), dtype=dtype)
    sparse = acc.get("sparse")
    if sparse:
        idx_info, val_info = sparse["indices"], sparse["values"]
        iv = gltf["bufferViews"][idx_info["bufferView"]]
        idx = np.frombuffer(buffers[iv["buffer"]], dtype=np.dtype(COMPONENT_DTYPES[idx_info["componentType"]]),
                            count=sparse["count"], offset=iv.get("byteOffset", 0) + idx_info.get("byteOffset", 0))
        vv = gltf["bufferViews"][val_info["bufferView"]]
        vals = np.frombuffer(buffers[vv["buffer"]], dtype=dtype, count=sparse["count"] * n,
                             offset=vv.get("byteOffset", 0) + val_info.get("byteOffset", 0)).reshape(-1, n)
        arr = arr.copy()
        arr[idx.astype(np.int64)] = vals
    return arr


def check_gltf(gltf, base_dir=None, *, buffers: list | None = None) -> list[GltfIssue]:
    """Structural problems of a glTF 2.0 document (empty list: none found).

    Parameters
    ----------
    gltf : dict
        The parsed JSON.
    base_dir : str or Path, optional
        Folder relative URIs are resolved against; ``None`` skips the file checks.
    buffers : list of bytes, optional
        Buffer bytes already read (else read with :func:`load_buffers`).

    Returns
    -------
    list of GltfIssue
    """
    issues: list[GltfIssue] = []

    def bad(pointer: str, message: str) -> None:
        issues.append(GltfIssue(pointer, message))

    if not isinstance(gltf, dict):
        return [GltfIssue("", "a glTF document is a JSON object")]
    asset = gltf.get("asset")
    if not isinstance(asset, dict) or "version" not in asset:
        bad("/asset", "asset.version is required")
    elif str(asset.get("version")) != "2.0":
        bad("/asset/version", f"version {asset.get('version')!r} is not 2.0")

    def arr(name: str) -> list:
        v = gltf.get(name, [])
        if not isinstance(v, list):
            bad(f"/{name}", "must be an array")
            return []
        for i, item in enumerate(v):
            if not isinstance(item, dict):
                bad(f"/{name}/{i}", "must be an object")
        return v

    accessors, views, bufs = arr("accessors"), arr("bufferViews"), arr("buffers")
    meshes, nodes, scenes = arr("meshes"), arr("nodes"), arr("scenes")
    materials, textures, images = arr("materials"), arr("textures"), arr("images")
    samplers, cameras = arr("samplers"), arr("cameras")
    if any(not isinstance(x, dict) for name in ("accessors", "bufferViews", "buffers", "meshes", "nodes",
                                               "scenes", "materials", "textures", "images", "samplers",
                                               "cameras") for x in gltf.get(name, []) or []):
        return issues

    if buffers is None:
        buffers = load_buffers(gltf, base_dir)
    for i, b in enumerate(bufs):
        p = f"/buffers/{i}"
        length = b.get("byteLength")
        if not (isinstance(length, int) and length >= 1):
            bad(p, "byteLength (an integer >= 1) is required")
            continue
        uri = b.get("uri")
        if uri is None:
            bad(p, "has no uri (only a .glb's first buffer may omit it)")
            continue
        data = buffers[i] if i < len(buffers) else None
        if data is None:
            if uri.startswith("data:"):
                bad(p, "its data URI cannot be decoded")
            elif base_dir is not None:
                bad(p, f"file {uri!r} not found next to the scene ({resolve_uri(uri, base_dir)})")
        elif len(data) < length:
            bad(p, f"byteLength {length} but {uri[:40]!r} holds only {len(data)} bytes")

    for i, v in enumerate(views):
        p = f"/bufferViews/{i}"
        if not _is_index(v.get("buffer"), len(bufs)):
            bad(p, f"buffer {v.get('buffer')!r} is not one of the {len(bufs)} buffers")
            continue
        length, offset = v.get("byteLength"), v.get("byteOffset", 0)
        if not (isinstance(length, int) and length >= 1):
            bad(p, "byteLength (an integer >= 1) is required")
            continue
        if not (isinstance(offset, int) and offset >= 0):
            bad(p, "byteOffset must be an integer >= 0")
            continue
        blen = bufs[v["buffer"]].get("byteLength")
        if isinstance(blen, int) and offset + length > blen:
            bad(p, f"bytes {offset}..{offset + length} run past the end of buffer {v['buffer']} ({blen} bytes)")
        stride = v.get("byteStride")
        if stride is not None and not (isinstance(stride, int) and 4 <= stride <= 252 and stride % 4 == 0):
            bad(p, f"byteStride {stride!r} must be a multiple of 4 in [4, 252]")

    for i, a in enumerate(accessors):
        p = f"/accessors/{i}"
        ctype, count, typ = a.get("componentType"), a.get("count"), a.get("type")
        if ctype not in COMPONENT_SIZES:
            bad(p, f"componentType {ctype!r} is not one of {sorted(COMPONENT_SIZES)}")
            continue
        if typ not in TYPE_COUNTS:
            bad(p, f"type {typ!r} is not one of {', '.join(TYPE_COUNTS)}")
            continue
        if not (isinstance(count, int) and count >= 1):
            bad(p, "count (an integer >= 1) is required")
            continue
        n = TYPE_COUNTS[typ]
        for key in ("min", "max"):
            if key in a and (not isinstance(a[key], list) or len(a[key]) != n):
                bad(f"{p}/{key}", f"needs {n} numbers for a {typ}")
        if "bufferView" in a:
            if not _is_index(a["bufferView"], len(views)):
                bad(p, f"bufferView {a['bufferView']!r} is not one of the {len(views)} buffer views")
                continue
            view = views[a["bufferView"]]
            elem = COMPONENT_SIZES[ctype] * n
            stride = view.get("byteStride") or elem
            need = a.get("byteOffset", 0) + stride * (count - 1) + elem
            if isinstance(view.get("byteLength"), int) and need > view["byteLength"]:
                bad(p, f"reads {need} bytes but bufferView {a['bufferView']} has {view['byteLength']}")
            if a.get("byteOffset", 0) % COMPONENT_SIZES[ctype]:
                bad(p, "byteOffset is not a multiple of the component size")

    def accessor_ok(i) -> bool:
        return _is_index(i, len(accessors)) and not any(x.pointer == f"/accessors/{i}" for x in issues)

    def buffers_ok() -> bool:
        return not any(x.pointer.startswith(("/buffers", "/bufferViews")) for x in issues)

    for mi, m in enumerate(meshes):
        prims = m.get("primitives")
        if not isinstance(prims, list) or not prims:
            bad(f"/meshes/{mi}", "primitives (a non-empty array) is required")
            continue
        for pi, prim in enumerate(prims):
            p = f"/meshes/{mi}/primitives/{pi}"
            attrs = prim.get("attributes") if isinstance(prim, dict) else None
            if not isinstance(attrs, dict) or not attrs:
                bad(p, "attributes (a non-empty object) is required")
                continue
            n_vertices = None
            for name, idx in attrs.items():
                if not _is_index(idx, len(accessors)):
                    bad(f"{p}/attributes/{name}", f"accessor {idx!r} is not one of the {len(accessors)} accessors")
                    continue
                if name == "POSITION":
                    acc = accessors[idx]
                    if acc.get("type") != "VEC3" or acc.get("componentType") != 5126:
                        bad(f"{p}/attributes/POSITION", "POSITION must be a float VEC3 accessor")
                    if not ("min" in acc and "max" in acc):
                        bad(f"/accessors/{idx}", "a POSITION accessor needs min and max (glTF 2.0 §3.7.2.1)")
                    n_vertices = acc.get("count")
            counts = {accessors[i].get("count") for i in attrs.values() if _is_index(i, len(accessors))}
            if len(counts) > 1:
                bad(f"{p}/attributes", f"attribute accessors disagree on the vertex count ({sorted(counts)})")
            if "indices" in prim:
                idx = prim["indices"]
                if not _is_index(idx, len(accessors)):
                    bad(f"{p}/indices", f"accessor {idx!r} is not one of the {len(accessors)} accessors")
                elif accessors[idx].get("componentType") not in (5121, 5123, 5125) or accessors[idx].get("type") != "SCALAR":
                    bad(f"{p}/indices", "indices must be an unsigned SCALAR accessor")
                elif n_vertices and accessor_ok(idx) and buffers_ok() and all(b is not None for b in buffers):
                    try:
                        values = accessor_array(gltf, buffers, idx)
                        if values.size and int(values.max()) >= n_vertices:
                            bad(f"{p}/indices", f"index {int(values.max())} >= vertex count {n_vertices}")
                    except (ValueError, KeyError, IndexError, TypeError) as exc:
                        bad(f"{p}/indices", f"cannot be read: {exc}")
            if "material" in prim and not _is_index(prim["material"], len(materials)):
                bad(f"{p}/material", f"material {prim['material']!r} is not one of the {len(materials)} materials")
            mode = prim.get("mode", 4)
            if mode not in range(7):
                bad(f"{p}/mode", f"mode {mode!r} is not 0..6")
            ext = (prim.get("extensions") or {}).get("KHR_materials_variants")
            if ext is not None:
                n_var = len(((gltf.get("extensions") or {}).get("KHR_materials_variants") or {}).get("variants", []))
                for k, mp in enumerate(ext.get("mappings", [])):
                    if not _is_index(mp.get("material"), len(materials)):
                        bad(f"{p}/extensions/KHR_materials_variants/mappings/{k}", "material index out of range")
                    if not all(_is_index(v, n_var) for v in mp.get("variants", [])) or not mp.get("variants"):
                        bad(f"{p}/extensions/KHR_materials_variants/mappings/{k}",
                            f"variants must be indices of the {n_var} root variants")

    # nodes: indices, transforms, cycles
    parent: dict[int, int] = {}
    for ni, node in enumerate(nodes):
        p = f"/nodes/{ni}"
        for c in node.get("children", []):
            if not _is_index(c, len(nodes)):
                bad(f"{p}/children", f"node {c!r} is not one of the {len(nodes)} nodes")
            elif c in parent:
                bad(f"{p}/children", f"node {c} already has a parent (node {parent[c]})")
            else:
                parent[c] = ni
        if "mesh" in node and not _is_index(node["mesh"], len(meshes)):
            bad(f"{p}/mesh", f"mesh {node['mesh']!r} is not one of the {len(meshes)} meshes")
        if "camera" in node and not _is_index(node["camera"], len(cameras)):
            bad(f"{p}/camera", f"camera {node['camera']!r} is not one of the {len(cameras)} cameras")
        for key, n in (("matrix", 16), ("rotation", 4), ("translation", 3), ("scale", 3)):
            if key in node:
                v = node[key]
                if not (isinstance(v, list) and len(v) == n and all(isinstance(x, (int, float)) for x in v)):
                    bad(f"{p}/{key}", f"needs {n} numbers")
                elif key == "rotation" and abs(math.sqrt(sum(x * x for x in v)) - 1.0) > 1e-5:
                    bad(f"{p}/rotation", "must be a unit quaternion")
        if "matrix" in node and any(k in node for k in ("rotation", "translation", "scale")):
            bad(p, "has both matrix and translation/rotation/scale")
    for ni in range(len(nodes)):
        seen, cur = set(), ni
        while cur in parent:
            if cur in seen:
                bad(f"/nodes/{ni}", "is part of a cycle of children")
                break
            seen.add(cur)
            cur = parent[cur]
    for si, s in enumerate(scenes):
        for n in s.get("nodes", []):
            if not _is_index(n, len(nodes)):
                bad(f"/scenes/{si}/nodes", f"node {n!r} is not one of the {len(nodes)} nodes")
            elif n in parent:
                bad(f"/scenes/{si}/nodes", f"node {n} is a child of node {parent[n]}, not a root")
    if "scene" in gltf and not _is_index(gltf["scene"], len(scenes)):
        bad("/scene", f"scene {gltf['scene']!r} is not one of the {len(scenes)} scenes")

    # materials, textures, images, samplers, cameras
    def tex_ref(pointer: str, ref) -> None:
        if isinstance(ref, dict) and not _is_index(ref.get("index"), len(textures)):
            bad(pointer, f"texture {ref.get('index')!r} is not one of the {len(textures)} textures")

    for mi, mat in enumerate(materials):
        p = f"/materials/{mi}"
        pbr = mat.get("pbrMetallicRoughness", {})
        f = pbr.get("baseColorFactor")
        if f is not None and not (isinstance(f, list) and len(f) == 4 and all(
                isinstance(x, (int, float)) and 0 <= x <= 1 for x in f)):
            bad(f"{p}/pbrMetallicRoughness/baseColorFactor", "needs 4 numbers in [0, 1]")
        for key in ("metallicFactor", "roughnessFactor"):
            v = pbr.get(key)
            if v is not None and not (isinstance(v, (int, float)) and 0 <= v <= 1):
                bad(f"{p}/pbrMetallicRoughness/{key}", "must be a number in [0, 1]")
        for slot in _PBR_TEXTURE_SLOTS:
            tex_ref(f"{p}/pbrMetallicRoughness/{slot}", pbr.get(slot))
        for slot in _TEXTURE_SLOTS:
            tex_ref(f"{p}/{slot}", mat.get(slot))
        for ext_name, ext in (mat.get("extensions") or {}).items():
            for key, ref in (ext or {}).items():
                if key.endswith("Texture"):
                    tex_ref(f"{p}/extensions/{ext_name}/{key}", ref)
        if mat.get("alphaMode", "OPAQUE") not in ("OPAQUE", "MASK", "BLEND"):
            bad(f"{p}/alphaMode", "must be OPAQUE, MASK or BLEND")
    for ti, t in enumerate(textures):
        if "source" in t and not _is_index(t["source"], len(images)):
            bad(f"/textures/{ti}/source", f"image {t['source']!r} is not one of the {len(images)} images")
        if "sampler" in t and not _is_index(t["sampler"], len(samplers)):
            bad(f"/textures/{ti}/sampler", f"sampler {t['sampler']!r} is not one of the {len(samplers)} samplers")
    for ii, im in enumerate(images):
        p = f"/images/{ii}"
        if "uri" in im:
            uri = im["uri"]
            if not uri.startswith("data:") and base_dir is not None and not resolve_uri(uri, base_dir).is_file():
                bad(p, f"file {uri!r} not found next to the scene")
        elif "bufferView" in im:
            if not _is_index(im["bufferView"], len(views)):
                bad(p, "bufferView out of range")
            if "mimeType" not in im:
                bad(p, "an image in a buffer view needs mimeType")
        else:
            bad(p, "needs uri or bufferView")
    for ci, cam in enumerate(cameras):
        p = f"/cameras/{ci}"
        kind = cam.get("type")
        if kind == "perspective":
            pp = cam.get("perspective")
            if not isinstance(pp, dict):
                bad(p, "a perspective camera needs a perspective object")
                continue
            yfov, znear = pp.get("yfov"), pp.get("znear")
            if not (isinstance(yfov, (int, float)) and 0 < yfov < math.pi):
                bad(f"{p}/perspective/yfov", "must be in (0, pi)")
            if not (isinstance(znear, (int, float)) and znear > 0):
                bad(f"{p}/perspective/znear", "must be > 0")
            if "zfar" in pp and not (isinstance(pp["zfar"], (int, float)) and pp["zfar"] > (znear or 0)):
                bad(f"{p}/perspective/zfar", "must be > znear")
            if "aspectRatio" in pp and not (isinstance(pp["aspectRatio"], (int, float)) and pp["aspectRatio"] > 0):
                bad(f"{p}/perspective/aspectRatio", "must be > 0")
        elif kind == "orthographic":
            op = cam.get("orthographic")
            if not isinstance(op, dict) or not all(k in op for k in ("xmag", "ymag", "znear", "zfar")):
                bad(p, "an orthographic camera needs xmag, ymag, znear and zfar")
        else:
            bad(f"{p}/type", f"type {kind!r} is not perspective or orthographic")

    used = set(used_extensions(gltf))
    declared = set(gltf.get("extensionsUsed", []) or [])
    for name in sorted(used - declared):
        bad("/extensionsUsed", f"{name} is used but not listed in extensionsUsed")
    for name in sorted(set(gltf.get("extensionsRequired", []) or []) - declared):
        bad("/extensionsRequired", f"{name} is required but not in extensionsUsed")
    return issues


def _node_matrix(node: dict) -> np.ndarray:
    if "matrix" in node:
        return np.asarray(node["matrix"], dtype=np.float64).reshape(4, 4).T  # column-major
    t = np.asarray(node.get("translation", [0, 0, 0]), dtype=np.float64)
    x, y, z, w = (float(v) for v in node.get("rotation", [0, 0, 0, 1]))
    n = math.sqrt(x * x + y * y + z * z + w * w) or 1.0
    x, y, z, w = x / n, y / n, z / n, w / n
    r = np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
        [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
        [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
    ])
    s = np.asarray(node.get("scale", [1, 1, 1]), dtype=np.float64)
    m = np.eye(4)
    m[:3, :3] = r * s[None, :]
    m[:3, 3] = t
    return m


def world_positions(gltf: dict, buffers: list) -> np.ndarray:
    """World-space positions ``(V, 3) float64`` of every vertex drawn by the default scene's meshes.

    Uses the vertices each triangle primitive references (or all when it has no indices);
    instanced meshes count once per node.
    """
    scenes = gltf.get("scenes", [])
    if not scenes:
        return np.zeros((0, 3))
    nodes = gltf.get("nodes", [])
    roots = scenes[gltf.get("scene", 0)].get("nodes", [])
    out = []
    stack = [(n, np.eye(4)) for n in roots]
    while stack:
        ni, parent_m = stack.pop()
        node = nodes[ni]
        m = parent_m @ _node_matrix(node)
        if "mesh" in node:
            for prim in gltf["meshes"][node["mesh"]].get("primitives", []):
                if prim.get("mode", 4) not in (4, 5, 6):
                    continue
                pos = accessor_array(gltf, buffers, prim["attributes"]["POSITION"]).astype(np.float64)
                if "indices" in prim:
                    used = np.unique(accessor_array(gltf, buffers, prim["indices"]).ravel()).astype(np.int64)
                    pos = pos[used]
                out.append(pos @ m[:3, :3].T + m[:3, 3])
        stack.extend((c, m) for c in node.get("children", []))
    return np.concatenate(out, axis=0) if out else np.zeros((0, 3))


def camera_nodes(gltf: dict) -> dict[str, int]:
    """``{name: node index}`` of the default scene's camera nodes (node name, else camera name)."""
    out: dict[str, int] = {}
    for ni, node in enumerate(gltf.get("nodes", [])):
        if "camera" in node:
            cam = gltf.get("cameras", [])[node["camera"]] if _is_index(node["camera"], len(gltf.get("cameras", []))) else {}
            name = node.get("name") or cam.get("name") or f"camera-{ni}"
            out.setdefault(name, ni)
    return out
