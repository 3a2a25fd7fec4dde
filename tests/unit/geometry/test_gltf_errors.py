"""glTF loader on bad input: every failure is a SceneError naming the file and the glTF object.

Each case breaks one rule of the glTF 2.0 specification (the section is named beside it) in an
otherwise valid one-quad file, and checks the message names the file, the object path and the
problem.  A property-based test then mutates valid files at random: the loader must either load
them or raise SceneError, never anything else.
"""

from __future__ import annotations

import base64
import copy
import json
import struct

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from variantshot.errors import InputError, SceneError
from variantshot.geometry import gltf as gltf_module
from variantshot.geometry.gltf import load_gltf, load_gltf_bytes

NAME = "bottle.gltf"


def base_file():
    """A valid glTF 2.0 document: one indexed quad (POSITION, NORMAL; uint16 indices), data-URI buffer."""
    pos = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], np.float32)
    nrm = np.tile(np.float32([0, 0, 1]), (4, 1))
    idx = np.array([0, 1, 2, 0, 2, 3], np.uint16)
    blob = pos.tobytes() + nrm.tobytes() + idx.tobytes() + b"\0\0\0\0"
    doc = {
        "asset": {"version": "2.0"},
        "scene": 0,
        "scenes": [{"nodes": [0]}],
        "nodes": [{"mesh": 0}],
        "meshes": [{"primitives": [{"attributes": {"POSITION": 0, "NORMAL": 1}, "indices": 2, "material": 0}]}],
        "materials": [{"pbrMetallicRoughness": {"baseColorFactor": [1, 1, 1, 1]}}],
        "accessors": [
            {"bufferView": 0, "componentType": 5126, "type": "VEC3", "count": 4, "min": [0, 0, 0], "max": [1, 1, 0]},
            {"bufferView": 1, "componentType": 5126, "type": "VEC3", "count": 4},
            {"bufferView": 2, "componentType": 5123, "type": "SCALAR", "count": 6},
        ],
        "bufferViews": [
            {"buffer": 0, "byteOffset": 0, "byteLength": 48},
            {"buffer": 0, "byteOffset": 48, "byteLength": 48},
            {"buffer": 0, "byteOffset": 96, "byteLength": 12},
        ],
        "buffers": [{"byteLength": len(blob)}],
    }
    return doc, bytearray(blob)


def encode(doc, blob) -> bytes:
    doc = copy.deepcopy(doc)
    if doc.get("buffers") and "uri" not in doc["buffers"][0] and blob is not None:
        doc["buffers"][0]["uri"] = "data:application/octet-stream;base64," + base64.b64encode(bytes(blob)).decode()
    return json.dumps(doc).encode()


def glb(doc, blob, *, total=None, json_len=None) -> bytes:
    text = json.dumps(doc).encode()
    text += b" " * (-len(text) % 4)
    blob = bytes(blob) + b"\0" * (-len(blob) % 4)
    body = struct.pack("<II", json_len or len(text), 0x4E4F534A) + text + struct.pack("<II", len(blob), 0x004E4942) + blob
    return struct.pack("<4sII", b"glTF", 2, total or 12 + len(body)) + body


def test_base_file_is_valid():
    doc, blob = base_file()
    assert load_gltf_bytes(encode(doc, blob), NAME).n_triangles == 2
    assert load_gltf_bytes(glb(doc, blob), "b.glb").n_triangles == 2


# ----------------------------------------------------------------------------- the table
def _set(path, value):
    def mutate(doc, blob):
        *head, last = path
        obj = doc
        for k in head:
            obj = obj[k]
        obj[last] = value
    return mutate


def _delete(path):
    def mutate(doc, blob):
        *head, last = path
        obj = doc
        for k in head:
            obj = obj[k]
        del obj[last]
    return mutate


def _nan_position(doc, blob):
    blob[12:16] = struct.pack("<f", float("nan"))  # vertex 1, x


def _inf_position(doc, blob):
    blob[0:4] = struct.pack("<f", float("inf"))


def _index_out_of_range(doc, blob):
    blob[96 + 4:96 + 6] = struct.pack("<H", 7)  # third index -> vertex 7 of 4


def _cycle(doc, blob):
    doc["nodes"] = [{"mesh": 0, "children": [1]}, {"children": [0]}]


def _dag(doc, blob):
    # a node reached from two parents; the spec requires strict trees (and this is how a hostile
    # file would multiply instances exponentially)
    doc["nodes"] = [{"children": [1, 1]}, {"mesh": 0}]


def _sparse_index_out_of_range(doc, blob):
    doc["bufferViews"].append({"buffer": 0, "byteOffset": 108, "byteLength": 2})
    blob[108:110] = struct.pack("<H", 9)
    doc["accessors"][0]["sparse"] = {"count": 1, "indices": {"bufferView": 3, "componentType": 5123},
                                     "values": {"bufferView": 0}}


def _light_out_of_range(doc, blob):
    doc["extensionsUsed"] = ["KHR_lights_punctual"]
    doc["nodes"][0]["extensions"] = {"KHR_lights_punctual": {"light": 3}}
    doc["extensions"] = {"KHR_lights_punctual": {"lights": [{"type": "point"}]}}


CASES = {
    # glTF 2.0 §3.6.2 accessors
    "accessor index out of range": (
        _set(["meshes", 0, "primitives", 0, "attributes", "POSITION"], 7),
        ["meshes[0].primitives[0]", "accessor 7 is out of range (the file has 3 accessors)"]),
    "accessor reads past the end of buffer": (
        _set(["bufferViews", 2, "byteLength"], 400),
        ["meshes[0].primitives[0]", "accessor 2 (indices) reads past the end of buffer 0"]),
    "accessor reads past the end of its view": (
        _set(["accessors", 0, "count"], 5),
        ["meshes[0].primitives[0]", "accessor 0 (POSITION) reads past the end of bufferView 0"]),
    "huge declared count": (
        _set(["accessors", 0, "count"], 10**12),
        ["meshes[0].primitives[0]", "accessor 0 (POSITION) reads past the end of bufferView 0"]),
    "huge count without a bufferView": (
        lambda d, b: d["accessors"][0].update(bufferView=None, count=10**12) or d["accessors"][0].pop("bufferView"),
        ["accessor 0 (POSITION) declares 1000000000000 elements with no bufferView"]),
    "negative byteOffset": (
        _set(["accessors", 0, "byteOffset"], -4), ["accessors[0]", "byteOffset must be >= 0, got -4"]),
    "absurd byteOffset": (
        _set(["bufferViews", 0, "byteOffset"], 2**62),
        ["meshes[0].primitives[0]", "accessor 0 (POSITION) reads past the end of buffer 0"]),
    "bad componentType": (
        _set(["accessors", 0, "componentType"], 5124), ["accessors[0]", "componentType 5124 is not a glTF 2.0"]),
    "bad accessor type": (_set(["accessors", 0, "type"], "VEC5"), ["accessors[0]", "type 'VEC5' is not one of"]),
    "normalized float": (
        _set(["accessors", 0, "normalized"], True), ["accessors[0]", "normalized must not be true for FLOAT"]),
    "stride smaller than element": (
        _set(["bufferViews", 0, "byteStride"], 8),
        ["meshes[0].primitives[0]", "accessor 0 (POSITION): bufferView 0 byteStride 8 is smaller than"]),
    "stride not a multiple of 4": (_set(["bufferViews", 0, "byteStride"], 14), ["bufferViews[0]", "multiple of 4"]),
    "sparse index out of range": (_sparse_index_out_of_range, ["accessor 0 (POSITION): sparse index 9"]),
    "POSITION as integers of the wrong shape": (
        _set(["accessors", 0, "type"], "VEC2"), ["meshes[0].primitives[0]", "accessor 0 (POSITION) is VEC2"]),
    "attribute count mismatch": (
        _set(["accessors", 1, "count"], 3), ["accessor 1 (NORMAL) has 3 elements but POSITION has 4"]),
    # §3.7.2 meshes
    "index out of range": (_index_out_of_range, ["meshes[0].primitives[0]", "index 7 at element 2 is out of range"]),
    "float indices": (
        _set(["meshes", 0, "primitives", 0, "indices"], 0),
        ["accessor 0 (indices) must be SCALAR UNSIGNED_BYTE/UNSIGNED_SHORT/UNSIGNED_INT"]),
    "non-finite position (NaN)": (_nan_position, ["meshes[0].primitives[0]", "accessor 0 (POSITION) has a non-finite"]),
    "non-finite position (inf)": (_inf_position, ["meshes[0].primitives[0]", "accessor 0 (POSITION) has a non-finite"]),
    "bad primitive mode": (_set(["meshes", 0, "primitives", 0, "mode"], 9), ["meshes[0].primitives[0]", "mode 9"]),
    "no POSITION, Draco data": (
        lambda d, b: d["meshes"][0]["primitives"][0].update(
            attributes={}, extensions={"KHR_draco_mesh_compression": {"bufferView": 0, "attributes": {}}}),
        ["meshes[0].primitives[0]", "has no POSITION attribute (its data is Draco-compressed geometry"]),
    "material out of range": (
        _set(["meshes", 0, "primitives", 0, "material"], 4), ["meshes[0].primitives[0]", "material 4 is out of range"]),
    # §3.5 nodes and scenes
    "mesh out of range": (_set(["nodes", 0, "mesh"], 3), ["nodes[0]", "mesh 3 is out of range"]),
    "scene out of range": (_set(["scene"], 5), ["scene", "5 is out of range (the file has 1 scenes)"]),
    "scene node out of range": (_set(["scenes", 0, "nodes"], [0, 8]), ["scenes[0]", "node 8 is out of range"]),
    "node cycle": (_cycle, ["nodes[0]", "is reached twice"]),
    "node with two parents": (_dag, ["nodes[1]", "is reached twice", "strict trees"]),
    "matrix of 12 numbers": (_set(["nodes", 0, "matrix"], [1] * 12), ["nodes[0]", "matrix needs 16 finite numbers"]),
    "zero quaternion": (_set(["nodes", 0, "rotation"], [0, 0, 0, 0]), ["nodes[0]", "zero quaternion"]),
    # §3.9 materials
    "baseColorFactor of 3": (
        _set(["materials", 0, "pbrMetallicRoughness", "baseColorFactor"], [1, 0, 0]),
        ["materials[0].pbrMetallicRoughness", "baseColorFactor needs 4 finite numbers"]),
    "baseColorFactor above 1": (
        _set(["materials", 0, "pbrMetallicRoughness", "baseColorFactor"], [2, 0, 0, 1]),
        ["materials[0].pbrMetallicRoughness", "baseColorFactor needs 4 numbers in [0, 1]"]),
    "emissiveFactor above 1": (
        _set(["materials", 0, "emissiveFactor"], [5, 5, 5]), ["materials[0]", "KHR_materials_emissive_strength"]),
    "bad alphaMode": (_set(["materials", 0, "alphaMode"], "CLIP"), ["materials[0]", "alphaMode 'CLIP' is not one of"]),
    "texture out of range": (
        _set(["materials", 0, "normalTexture"], {"index": 2}),
        ["materials[0].normalTexture", "texture 2 is out of range (the file has 0 textures)"]),
    "extension texture out of range": (
        lambda d, b: d.update(extensionsUsed=["KHR_materials_clearcoat"]) or d["materials"][0].update(
            extensions={"KHR_materials_clearcoat": {"clearcoatTexture": {"index": 1}}}),
        ["materials[0].extensions.KHR_materials_clearcoat.clearcoatTexture", "texture 1 is out of range"]),
    # §3.10 cameras, KHR_lights_punctual
    "camera without znear": (
        lambda d, b: d.update(cameras=[{"type": "perspective", "perspective": {"yfov": 1}}])
        or d["nodes"][0].update(camera=0), ["cameras[0].perspective", "znear is required"]),
    "camera of unknown type": (
        lambda d, b: d.update(cameras=[{"type": "fisheye"}]) or d["nodes"][0].update(camera=0),
        ["cameras[0]", "type 'fisheye' is not perspective or orthographic"]),
    "light out of range": (_light_out_of_range, ["nodes[0].extensions.KHR_lights_punctual", "light 3 is out of range"]),
    # §3.6.1 buffers and URIs
    "buffer shorter than byteLength": (
        _set(["buffers", 0, "byteLength"], 4000), ["buffers[0]", "holds 112 bytes but declares byteLength 4000"]),
    "bad base64": (
        _set(["buffers", 0, "uri"], "data:application/octet-stream;base64,@@@@"), ["buffers[0]", "not valid base64"]),
    "remote URI": (
        _set(["buffers", 0, "uri"], "https://example.com/a.bin"), ["buffers[0]", "is not supported (accepted: data: URIs"]),
    # §3.2 asset, §3.12 extensions
    "glTF 1.0": (_set(["asset", "version"], "1.0"), ["asset", "version '1.0' is not supported"]),
    "no asset": (_delete(["asset"]), ["asset", "version is required"]),
    "Draco required": (
        _set(["extensionsRequired"], ["KHR_draco_mesh_compression"]),
        ["extensionsRequired", "KHR_draco_mesh_compression (Draco-compressed geometry)", "supported: "]),
    "meshopt required": (
        _set(["extensionsRequired"], ["EXT_meshopt_compression"]), ["extensionsRequired", "EXT_meshopt_compression"]),
    "KTX2 required": (_set(["extensionsRequired"], ["KHR_texture_basisu"]), ["KHR_texture_basisu", "KTX2"]),
    "unknown required extension": (
        _set(["extensionsRequired"], ["VENDOR_magic"]),
        ["unsupported required extension VENDOR_magic", "KHR_lights_punctual", "KHR_materials_clearcoat"]),
}


# What the Khronos glTF validator reports for the same files (its error codes, from its ISSUES.md).
# Cases left out are ones the validator does not count as errors but this loader refuses on
# purpose: an unknown alphaMode or camera type (the validator warns), extensions it cannot
# decode (Draco, meshopt, KTX2: the validator only checks they are declared).
VALIDATOR_CODES = {
    "accessor index out of range": "UNRESOLVED_REFERENCE",
    "accessor reads past the end of buffer": "BUFFER_VIEW_TOO_LONG",
    "accessor reads past the end of its view": "ACCESSOR_TOO_LONG",
    "huge declared count": "ACCESSOR_TOO_LONG",
    "negative byteOffset": "VALUE_NOT_IN_RANGE",
    "absurd byteOffset": "BUFFER_VIEW_TOO_LONG",
    "bad componentType": "MESH_PRIMITIVE_ATTRIBUTES_ACCESSOR_INVALID_FORMAT",
    "normalized float": "ACCESSOR_NORMALIZED_INVALID",
    "stride smaller than element": "ACCESSOR_SMALL_BYTESTRIDE",
    "stride not a multiple of 4": "VALUE_MULTIPLE_OF",
    "sparse index out of range": "ACCESSOR_SPARSE_INDEX_OOB",
    "POSITION as integers of the wrong shape": "MESH_PRIMITIVE_ATTRIBUTES_ACCESSOR_INVALID_FORMAT",
    "attribute count mismatch": "MESH_PRIMITIVE_UNEQUAL_ACCESSOR_COUNT",
    "index out of range": "ACCESSOR_INDEX_OOB",
    "non-finite position (NaN)": "ACCESSOR_INVALID_FLOAT",
    "non-finite position (inf)": "ACCESSOR_INVALID_FLOAT",
    "bad primitive mode": "VALUE_NOT_IN_RANGE",
    "material out of range": "UNRESOLVED_REFERENCE",
    "mesh out of range": "UNRESOLVED_REFERENCE",
    "scene out of range": "UNRESOLVED_REFERENCE",
    "scene node out of range": "UNRESOLVED_REFERENCE",
    "node cycle": "NODE_LOOP",
    "node with two parents": "DUPLICATE_ELEMENTS",
    "matrix of 12 numbers": "ARRAY_LENGTH_NOT_IN_LIST",
    "zero quaternion": "ROTATION_NON_UNIT",
    "baseColorFactor of 3": "ARRAY_LENGTH_NOT_IN_LIST",
    "baseColorFactor above 1": "VALUE_NOT_IN_RANGE",
    "emissiveFactor above 1": "VALUE_NOT_IN_RANGE",
    "texture out of range": "UNRESOLVED_REFERENCE",
    "extension texture out of range": "UNRESOLVED_REFERENCE",
    "camera without znear": "UNDEFINED_PROPERTY",
    "light out of range": "UNRESOLVED_REFERENCE",
    "buffer shorter than byteLength": "BUFFER_BYTE_LENGTH_MISMATCH",
    "bad base64": "INVALID_URI",
    "glTF 1.0": "UNKNOWN_ASSET_MAJOR_VERSION",
    "no asset": "UNDEFINED_PROPERTY",
}


def test_rejections_agree_with_the_khronos_validator(khronos_validate, tmp_path):
    # outside check: the reference validator finds the base file clean and reports, for each broken
    # file the loader refuses, the error code of the same rule
    doc, blob = base_file()
    (tmp_path / "base.gltf").write_bytes(encode(doc, blob))
    paths = [tmp_path / "base.gltf"]
    for i, case in enumerate(VALIDATOR_CODES):
        doc, blob = base_file()
        CASES[case][0](doc, blob)
        paths.append(tmp_path / f"case{i}.gltf")
        paths[-1].write_bytes(encode(doc, blob))
    base, *reports = khronos_validate(paths)
    assert base["errors"] == 0, base["codes"]
    for case, report in zip(VALIDATOR_CODES, reports):
        codes = {c.split()[0] for c in report["codes"]}
        assert VALIDATOR_CODES[case] in codes, (case, report["codes"])


@pytest.mark.parametrize("case", list(CASES))
def test_bad_input_is_a_scene_error_naming_file_and_object(case):
    mutate, fragments = CASES[case]
    doc, blob = base_file()
    mutate(doc, blob)
    with pytest.raises(SceneError) as info:
        load_gltf_bytes(encode(doc, blob), NAME)
    message = str(info.value)
    assert message.startswith(f"{NAME}: "), message
    assert info.value.file == NAME
    for fragment in fragments:
        assert fragment in message, message
    assert isinstance(info.value, InputError)  # the CLI maps InputError to exit status 2


def test_example_message_from_the_error_docs():
    # SceneError's docstring example: "bottle.gltf: meshes[2].primitives[0]: accessor 7 reads past the
    # end of buffer 0" -- build exactly that situation
    doc, blob = base_file()
    doc["meshes"] = [doc["meshes"][0]] * 3
    doc["accessors"] += [dict(doc["accessors"][0]) for _ in range(5)]
    doc["accessors"][7]["bufferView"] = 3
    doc["bufferViews"].append({"buffer": 0, "byteOffset": 100, "byteLength": 48})
    doc["meshes"][2] = {"primitives": [{"attributes": {"POSITION": 7}}]}
    doc["nodes"] = [{"mesh": 0}, {"mesh": 2}]
    doc["scenes"] = [{"nodes": [0, 1]}]
    with pytest.raises(SceneError) as info:
        load_gltf_bytes(encode(doc, blob), NAME)
    assert str(info.value).startswith("bottle.gltf: meshes[2].primitives[0]: accessor 7 (POSITION) reads past the end of buffer 0")


# ----------------------------------------------------------------------------- containers and files
def test_malformed_json_names_line_and_column():
    text = b'{\n  "asset": {"version": "2.0"},\n  "nodes": [,]\n}'
    with pytest.raises(SceneError, match=r"^bottle\.gltf: is not valid JSON: Expecting value at line 3, column 13$"):
        load_gltf_bytes(text, NAME)


@pytest.mark.parametrize("data, fragment", [
    (b"\xff\xfe\x00garbage", "is neither GLB nor UTF-8"),
    (b"[1, 2]", "the JSON is not an object"),
    (b'{"asset": {"version": "2.0"}, "nodes": [{"scale": [NaN, 1, 1]}]}', "non-standard JSON constant NaN"),
    (b"[" * 100000 + b"]" * 100000, "nested too deeply"),
    (b"", "is not valid JSON"),
])
def test_not_gltf_at_all(data, fragment):
    with pytest.raises(SceneError) as info:
        load_gltf_bytes(data, NAME)
    assert str(info.value).startswith(NAME) and fragment in str(info.value)


def test_glb_container_errors():
    doc, blob = base_file()
    good = glb(doc, blob)
    with pytest.raises(SceneError, match=r"b\.glb: GLB header is truncated"):
        load_gltf_bytes(good[:10], "b.glb")
    with pytest.raises(SceneError, match=r"b\.glb: GLB header declares \d+ bytes but the file has 100"):
        load_gltf_bytes(good[:100], "b.glb")
    with pytest.raises(SceneError, match=r"b\.glb: GLB chunk 0 declares 1000000 bytes, past the end"):
        load_gltf_bytes(glb(doc, blob, json_len=1000000), "b.glb")
    with pytest.raises(SceneError, match=r"GLB container version 1 is not supported"):
        load_gltf_bytes(good[:4] + struct.pack("<I", 1) + good[8:], "b.glb")
    # a GLB without its BIN chunk: buffer 0 has no uri and nothing to read
    text = json.dumps(doc).encode() + b" " * (-len(json.dumps(doc)) % 4)
    no_bin = struct.pack("<4sII", b"glTF", 2, 20 + len(text)) + struct.pack("<II", len(text), 0x4E4F534A) + text
    with pytest.raises(SceneError, match=r"b\.glb: buffers\[0\]: has no uri and there is no GLB binary chunk"):
        load_gltf_bytes(no_bin, "b.glb")


def test_missing_files(tmp_path):
    with pytest.raises(SceneError, match=r"nope\.gltf: cannot read the file"):
        load_gltf(tmp_path / "nope.gltf")
    doc, blob = base_file()
    doc["buffers"][0]["uri"] = "bottle.bin"
    path = tmp_path / "bottle.gltf"
    path.write_text(json.dumps(doc))
    with pytest.raises(SceneError) as info:
        load_gltf(path)
    assert str(info.value).startswith(f"{path}: buffers[0]: cannot read 'bottle.bin'")
    doc, blob = base_file()
    doc["images"] = [{"uri": "label.png"}]
    doc["textures"] = [{"source": 0}]
    path.write_bytes(encode(doc, blob))
    with pytest.raises(SceneError, match=r"images\[0\]: cannot read 'label\.png'"):
        load_gltf(path)


def test_undecodable_and_oversized_images(monkeypatch):
    doc, blob = base_file()
    doc["images"] = [{"uri": "data:image/png;base64," + base64.b64encode(b"not a png").decode()}]
    doc["textures"] = [{"source": 0}]
    with pytest.raises(SceneError, match=r"bottle\.gltf: images\[0\]: cannot be decoded as PNG/JPEG/WebP"):
        load_gltf_bytes(encode(doc, blob), NAME)
    # a declared 1x1 PNG is fine; over the pixel cap it is refused before decoding
    from PIL import Image
    import io

    buf = io.BytesIO()
    Image.new("RGBA", (64, 64)).save(buf, format="PNG")
    doc["images"] = [{"uri": "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode()}]
    assert load_gltf_bytes(encode(doc, blob), NAME).textures[0].pixels.shape == (64, 64, 4)
    monkeypatch.setattr(gltf_module, "MAX_TEXTURE_PIXELS", 1000)
    with pytest.raises(SceneError, match=r"images\[0\]: is 64x64 pixels, more than this loader accepts"):
        load_gltf_bytes(encode(doc, blob), NAME)


def test_triangle_budget_is_checked_before_decoding(monkeypatch):
    # many instances of one mesh: refused from the declared counts, before any geometry is built
    doc, blob = base_file()
    doc["nodes"] = [{"mesh": 0} for _ in range(50)]
    doc["scenes"] = [{"nodes": list(range(50))}]
    monkeypatch.setattr(gltf_module, "MAX_TRIANGLES", 99)
    with pytest.raises(SceneError, match=r"bottle\.gltf: the scene would have 100 triangles, more than this loader accepts \(99\)"):
        load_gltf_bytes(encode(doc, blob), NAME)


def test_hostile_huge_count_fails_without_allocating():
    # count 10**12 float VEC3 would be 12 TB: the extent check must refuse it from the numbers alone
    doc, blob = base_file()
    doc["accessors"][0]["count"] = 10**12
    doc["accessors"][1]["count"] = 10**12
    doc["accessors"][2]["count"] = 10**12
    with pytest.raises(SceneError, match="reads past the end"):
        load_gltf_bytes(encode(doc, blob), NAME)
    # the same, non-indexed and with the view enlarged to claim the whole range
    doc, blob = base_file()
    del doc["meshes"][0]["primitives"][0]["indices"]
    doc["accessors"][0]["count"] = 10**12
    doc["bufferViews"][0]["byteLength"] = 12 * 10**12
    with pytest.raises(SceneError, match="reads past the end of buffer 0"):
        load_gltf_bytes(encode(doc, blob), NAME)


def test_explicit_scene_argument_errors():
    doc, blob = base_file()
    data = encode(doc, blob)
    with pytest.raises(SceneError, match=r"bottle\.gltf: has no scene 3 \(it has 1 scenes, 0-based\)"):
        load_gltf_bytes(data, NAME, scene=3)
    with pytest.raises(SceneError, match=r"has no scene named 'studio' \(scene names: none\)"):
        load_gltf_bytes(data, NAME, scene="studio")


# ----------------------------------------------------------------------------- random mutations
_JSON_VALUES = st.recursive(
    st.none() | st.booleans() | st.integers(-(2**40), 2**40) | st.floats(allow_nan=False) | st.text(max_size=5),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner, max_size=4),
    max_leaves=8,
)


def _paths(obj, prefix=()):
    yield prefix
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _paths(v, prefix + (i,))


_BASE_PATHS = [p for p in _paths(base_file()[0]) if p]


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(_BASE_PATHS), st.sampled_from(["set", "delete"]), _JSON_VALUES),
                min_size=1, max_size=3))
def test_random_json_mutations_never_escape_as_other_exceptions(mutations):
    doc, blob = base_file()
    doc = json.loads(encode(doc, blob))  # buffer embedded as a data URI before mutating
    for path, action, value in mutations:
        obj = doc
        try:
            for k in path[:-1]:
                obj = obj[k]
            if action == "delete":
                del obj[path[-1]]
            else:
                obj[path[-1]] = value
        except (KeyError, IndexError, TypeError):
            continue  # an earlier mutation removed this path
    try:
        load_gltf_bytes(json.dumps(doc).encode(), NAME)
    except SceneError as exc:
        assert str(exc).startswith(NAME)


@settings(max_examples=200, deadline=None)
@given(st.data())
def test_random_glb_corruption_never_escapes(data):
    doc, blob = base_file()
    raw = bytearray(glb(doc, blob))
    n = data.draw(st.integers(1, 8))
    for _ in range(n):
        pos = data.draw(st.integers(0, len(raw) - 1))
        raw[pos] = data.draw(st.integers(0, 255))
    cut = data.draw(st.integers(0, len(raw)))
    try:
        load_gltf_bytes(bytes(raw[:cut]), "c.glb")
    except SceneError as exc:
        assert str(exc).startswith("c.glb")
