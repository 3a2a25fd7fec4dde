"""glTF 2.0 loader: the Khronos samples against facts.json, plus generated files for each feature.

Check values come from outside the loader: ``facts.json`` (computed by the samples' own reference
reader, see ../shared/gltf-samples/README.md), the glTF 2.0 specification's formulas (normalised
integers §3.11, strip/fan triangulation and flat normals §3.7.2.1, TRS order §3.5.2, sampler
constants §5.26), closed-form geometry, and trimesh 5.x as a reference loader.
"""

from __future__ import annotations

import base64
import io
import json
import logging
import math
import struct

import numpy as np
import pytest

from variantshot.errors import SceneError
from variantshot.geometry.gltf import load_gltf, load_gltf_bytes
from variantshot.geometry.scene import CLAMP_TO_EDGE, LINEAR, MIRRORED_REPEAT, NEAREST, REPEAT

FLOAT, BYTE, UBYTE, SHORT, USHORT, UINT = 5126, 5120, 5121, 5122, 5123, 5125
_DT = {FLOAT: "<f4", BYTE: "i1", UBYTE: "u1", SHORT: "<i2", USHORT: "<u2", UINT: "<u4"}
_N = {"SCALAR": 1, "VEC2": 2, "VEC3": 3, "VEC4": 4}


# ----------------------------------------------------------------------------- a tiny writer
class GltfWriter:
    """Writes small glTF 2.0 files (JSON + one buffer) for tests; layout per glTF 2.0 §3.6."""

    def __init__(self):
        self.doc = {"asset": {"version": "2.0"}, "buffers": [], "bufferViews": [], "accessors": [],
                    "meshes": [], "nodes": [], "scenes": [{"nodes": []}], "scene": 0}
        self.blob = bytearray()

    def view(self, data: bytes, stride=None) -> int:
        while len(self.blob) % 4:
            self.blob.append(0)
        v = {"buffer": 0, "byteOffset": len(self.blob), "byteLength": len(data)}
        if stride:
            v["byteStride"] = stride
        self.blob.extend(data)
        self.doc["bufferViews"].append(v)
        return len(self.doc["bufferViews"]) - 1

    def accessor(self, values, ctype=FLOAT, type_=None, normalized=False, view=None, byte_offset=0,
                 count=None) -> int:
        values = np.asarray(values)
        type_ = type_ or ("SCALAR" if values.ndim == 1 else f"VEC{values.shape[1]}")
        if view is None:
            view = self.view(values.astype(_DT[ctype]).tobytes())
        acc = {"bufferView": view, "componentType": ctype, "type": type_, "count": int(count or values.shape[0])}
        if byte_offset:
            acc["byteOffset"] = byte_offset
        if normalized:
            acc["normalized"] = True
        self.doc["accessors"].append(acc)
        return len(self.doc["accessors"]) - 1

    def mesh(self, positions=None, indices=None, *, mode=None, material=None, index_type=UINT, z_normals=False,
             **attrs) -> int:
        """One single-primitive mesh; ``z_normals`` adds NORMAL (0, 0, 1) so vertices stay shared."""
        if z_normals:
            attrs["NORMAL"] = np.tile([0, 0, 1], (len(positions), 1))
        a = {}
        if positions is not None:
            p = np.asarray(positions, np.float32)
            a["POSITION"] = self.accessor(p)
            self.doc["accessors"][a["POSITION"]]["min"] = p.min(axis=0).tolist()
            self.doc["accessors"][a["POSITION"]]["max"] = p.max(axis=0).tolist()
        for k, v in attrs.items():
            a[k] = v if isinstance(v, int) else self.accessor(np.asarray(v, np.float32))
        prim = {"attributes": a}
        if indices is not None:
            prim["indices"] = self.accessor(np.asarray(indices).ravel(), index_type)
        if mode is not None:
            prim["mode"] = mode
        if material is not None:
            prim["material"] = material
        self.doc["meshes"].append({"primitives": [prim]})
        return len(self.doc["meshes"]) - 1

    def node(self, root=True, **fields) -> int:
        self.doc["nodes"].append(fields)
        i = len(self.doc["nodes"]) - 1
        if root:
            self.doc["scenes"][0]["nodes"].append(i)
        return i

    def _buffer(self, uri=None):
        b = {"byteLength": len(self.blob)}
        if uri:
            b["uri"] = uri
        self.doc["buffers"] = [b]

    def gltf_bytes(self) -> bytes:
        self._buffer("data:application/octet-stream;base64," + base64.b64encode(bytes(self.blob)).decode())
        return json.dumps(self.doc).encode()

    def write_gltf(self, path, external=False):
        if external:
            bin_name = path.stem + ".bin"
            (path.parent / bin_name).write_bytes(bytes(self.blob))
            self._buffer(bin_name)
            path.write_text(json.dumps(self.doc))
        else:
            path.write_bytes(self.gltf_bytes())
        return path

    def glb_bytes(self) -> bytes:
        self._buffer(None)
        text = json.dumps(self.doc).encode()
        text += b" " * (-len(text) % 4)
        blob = bytes(self.blob) + b"\0" * (-len(self.blob) % 4)
        total = 12 + 8 + len(text) + 8 + len(blob)
        return (struct.pack("<4sII", b"glTF", 2, total) + struct.pack("<II", len(text), 0x4E4F534A) + text
                + struct.pack("<II", len(blob), 0x004E4942) + blob)


def load(w: GltfWriter, **kw):
    return load_gltf_bytes(w.gltf_bytes(), "test.gltf", **kw)


QUAD = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], np.float32)
QUAD_TRIS = np.array([[0, 1, 2], [0, 2, 3]])
# unit cube, 8 shared corners, 12 CCW-outward triangles (right-handed, glTF §3.7.2.1 front faces CCW)
CUBE_V = np.array([[x, y, z] for z in (0, 1) for y in (0, 1) for x in (0, 1)], np.float32)
CUBE_T = np.array([
    [0, 2, 1], [1, 2, 3],  # z = 0, facing -Z
    [4, 5, 6], [5, 7, 6],  # z = 1, facing +Z
    [0, 1, 4], [1, 5, 4],  # y = 0, facing -Y
    [2, 6, 3], [3, 6, 7],  # y = 1, facing +Y
    [0, 4, 2], [2, 4, 6],  # x = 0, facing -X
    [1, 3, 5], [3, 7, 5],  # x = 1, facing +X
])


def face_normals(scene):
    p = scene.positions.astype(np.float64)
    t = scene.triangles
    return np.cross(p[t[:, 1]] - p[t[:, 0]], p[t[:, 2]] - p[t[:, 0]])


def signed_volume(scene):
    # divergence theorem: V = 1/6 sum p0 . (p1 x p2); positive for outward CCW faces
    p = scene.positions.astype(np.float64)[scene.triangles]
    return float(np.einsum("ij,ij->i", p[:, 0], np.cross(p[:, 1], p[:, 2])).sum() / 6.0)


def surface_area(scene):
    return float(0.5 * np.linalg.norm(face_normals(scene), axis=1).sum())


# ----------------------------------------------------------------------------- samples vs facts.json
SAMPLES = [
    "AnimatedTriangle.gltf", "Box.gltf", "BoxTextured.gltf", "BoxVertexColors.gltf", "Cameras.gltf",
    "MultipleScenes.gltf", "SimpleMeshes.gltf", "SimpleSparseAccessor.gltf", "Triangle.gltf",
    "TriangleWithoutIndices.gltf", "Validator_KHR_materials_clearcoat.gltf",
    "Validator_KHR_materials_transmission.gltf", "Validator_KHR_materials_variants.gltf",
    "Validator_KHR_texture_transform.gltf",
]


@pytest.fixture(scope="module")
def facts(gltf_samples):
    return json.loads((gltf_samples / "facts.json").read_text())["files"]


@pytest.mark.parametrize("name", SAMPLES)
def test_sample_matches_facts(gltf_samples, facts, name):
    # expected values: facts.json, from the samples' independent reference reader
    f = facts[name]
    scene = load_gltf(gltf_samples / name)
    assert scene.source == str(gltf_samples / name)
    assert len(scene.textures) == f["counts"]["textures"]
    # the file's materials, plus the glTF default material when a drawn primitive has none
    uses_default = any(p["material"] is None for p in f["primitives_detail"]) and f["default_scene"] is not None
    assert len(scene.materials) == f["counts"]["materials"] + int(uses_default)
    if f["default_scene"] is None:  # parsing-only files: no scene, nothing to draw
        assert scene.n_triangles == 0
        assert scene.cameras == []
        return
    detail = f["scenes_detail"][f["default_scene"]]
    assert scene.n_triangles == f["default_scene_triangles"]
    lo, hi = scene.bounds()
    # README "Notes": compare with a tolerance of about 1e-5 (Cameras.gltf's quaternion norm)
    np.testing.assert_allclose(lo, f["default_scene_aabb_min"], atol=1e-5)
    np.testing.assert_allclose(hi, f["default_scene_aabb_max"], atol=1e-5)
    assert surface_area(scene) == pytest.approx(f["default_scene_surface_area"], abs=1e-5)
    assert len(scene.cameras) == len(detail["camera_nodes"])
    assert [c.kind for c in scene.cameras] == [c["type"] for c in detail["camera_nodes"]]
    # Scene contract: dtypes and shapes
    v = scene.positions.shape[0]
    for arr, shape, dtype in [(scene.positions, (v, 3), np.float32), (scene.normals, (v, 3), np.float32),
                              (scene.uvs, (v, 2, 2), np.float32), (scene.tangents, (v, 4), np.float32),
                              (scene.colours, (v, 4), np.float32), (scene.triangles, (scene.n_triangles, 3), np.int32),
                              (scene.tri_material, (scene.n_triangles,), np.int32)]:
        assert arr.shape == shape and arr.dtype == dtype
        assert arr.flags.c_contiguous and arr.flags.writeable
    assert np.all(scene.tri_material < len(scene.materials))
    np.testing.assert_allclose(np.linalg.norm(scene.normals, axis=1), 1.0, atol=1e-6)


@pytest.mark.parametrize("name", ["Box.gltf", "BoxVertexColors.gltf", "BoxTextured.gltf"])
def test_box_winding_agrees_with_normals(gltf_samples, facts, name):
    # facts.json: every triangle winds CCW against its NORMAL (12/12); the world transform must keep that
    scene = load_gltf(gltf_samples / name)
    fn = face_normals(scene)
    vn = scene.normals[scene.triangles].mean(axis=1)
    agree = int((np.einsum("ij,ij->i", fn, vn) > 0).sum())
    expected = facts[name]["primitives_detail"][0]["ccw_triangles_agreeing_with_NORMAL"]
    if isinstance(expected, str):  # "12/12"
        expected = int(expected.split("/")[0])
    assert agree == expected == 12
    # a closed box with outward faces has positive signed volume 1 (unit cube, closed form)
    assert signed_volume(scene) == pytest.approx(1.0, abs=1e-6)


def test_cameras_sample(gltf_samples, facts):
    scene = load_gltf(gltf_samples / "Cameras.gltf")
    f = facts["Cameras.gltf"]
    persp, ortho = scene.cameras
    assert persp.kind == "perspective" and ortho.kind == "orthographic"
    p = f["cameras"][0]["perspective"]
    assert (persp.yfov_rad, persp.aspect_ratio, persp.znear, persp.zfar) == (p["yfov"], p["aspectRatio"], p["znear"], p["zfar"])
    o = f["cameras"][1]["orthographic"]
    assert (ortho.xmag, ortho.ymag, ortho.znear, ortho.zfar) == (o["xmag"], o["ymag"], o["znear"], o["zfar"])
    for cam, node in zip(scene.cameras, f["scenes_detail"][0]["camera_nodes"]):
        m = cam.world_from_camera
        assert m.shape == (4, 4) and m.dtype == np.float64
        np.testing.assert_allclose(m[:3, 3], node["world_position"], atol=1e-6)
        np.testing.assert_allclose(-m[:3, 2], node["world_forward"], atol=1e-6)  # looks down local -Z
        np.testing.assert_allclose(m[:3, 1], node["world_up"], atol=1e-6)
    assert len({c.name for c in scene.cameras}) == 2


def test_multiple_scenes_default_and_explicit(gltf_samples, facts):
    f = facts["MultipleScenes.gltf"]
    assert f["default_scene"] == 1
    default = load_gltf(gltf_samples / "MultipleScenes.gltf")
    assert default.n_triangles == f["scenes_detail"][1]["triangles"] == 2
    first = load_gltf(gltf_samples / "MultipleScenes.gltf", scene=0)
    assert first.n_triangles == f["scenes_detail"][0]["triangles"] == 1
    assert surface_area(first) == pytest.approx(f["scenes_detail"][0]["surface_area"])
    assert load_gltf(gltf_samples / "MultipleScenes.gltf", scene="0").n_triangles == 1
    with pytest.raises(SceneError, match=r"MultipleScenes\.gltf: has no scene 2"):
        load_gltf(gltf_samples / "MultipleScenes.gltf", scene=2)


def test_sparse_accessor_sample(gltf_samples, facts):
    scene = load_gltf(gltf_samples / "SimpleSparseAccessor.gltf")
    lo, hi = scene.bounds()
    assert hi[1] == pytest.approx(4.0)  # README: 4.0 with sparse substitution, 1.0 if ignored
    # the substituted vertices 8, 10, 12 -> (1,2,0), (3,3,0), (5,4,0) (README); the file has no
    # NORMAL, so vertices are un-shared (flat normals) and we look them up by value
    drawn = {tuple(p) for p in scene.positions.tolist()}
    assert {(1, 2, 0), (3, 3, 0), (5, 4, 0)} <= drawn
    assert not {(1, 1, 0), (3, 1, 0), (5, 1, 0)} & drawn  # the base values they replace
    assert surface_area(scene) == pytest.approx(facts["SimpleSparseAccessor.gltf"]["default_scene_surface_area"])


def test_simple_meshes_instancing(gltf_samples):
    scene = load_gltf(gltf_samples / "SimpleMeshes.gltf")
    assert scene.n_triangles == 2
    a, b = scene.positions[scene.triangles[0]], scene.positions[scene.triangles[1]]
    np.testing.assert_allclose(b - a, [[1, 0, 0]] * 3)  # second node: translation (1, 0, 0)
    np.testing.assert_allclose(scene.normals, [[0, 0, 1]] * len(scene.normals))  # README: NORMAL (0,0,1)


def test_box_material_defaults_and_matrix(gltf_samples):
    scene = load_gltf(gltf_samples / "Box.gltf")
    (m,) = scene.materials
    # README notes: baseColorFactor (0.8, 0, 0, 1); no metallicFactor -> spec default 1.0, roughness 1.0
    assert m.base_colour_factor == pytest.approx((0.8, 0.0, 0.0, 1.0))
    assert (m.metallic_factor, m.roughness_factor) == (1.0, 1.0)
    assert (m.alpha_mode, m.alpha_cutoff, m.double_sided) == ("OPAQUE", 0.5, False)
    # six axis-aligned unit face normals survive the Z-up -> Y-up parent matrix
    assert set(map(tuple, np.round(scene.normals).astype(int).tolist())) == {
        (1, 0, 0), (-1, 0, 0), (0, 1, 0), (0, -1, 0), (0, 0, 1), (0, 0, -1)}


def test_box_textured(gltf_samples, facts):
    scene = load_gltf(gltf_samples / "BoxTextured.gltf")
    (tex,) = scene.textures
    assert tex.pixels.shape == (256, 256, 4) and tex.pixels.dtype == np.float32
    assert 0.0 <= tex.pixels.min() and tex.pixels.max() <= 1.0
    # README: mag LINEAR 9729, min NEAREST_MIPMAP_LINEAR 9986, wrap REPEAT/REPEAT
    assert (tex.mag_filter, tex.min_filter, tex.wrap_s, tex.wrap_t) == (LINEAR, 9986, REPEAT, REPEAT)
    (m,) = scene.materials
    assert m.metallic_factor == 0.0
    assert m.base_colour_texture.index == 0 and m.base_colour_texture.tex_coord == 0
    uv = scene.uvs[:, 0]
    np.testing.assert_allclose(uv.min(axis=0), [0, 0], atol=1e-6)
    np.testing.assert_allclose(uv.max(axis=0), [6, 1], atol=1e-6)  # README: TEXCOORD_0 max (6, 1)


def test_box_textured_pixels_match_pillow(gltf_samples):
    # reference decoder: Pillow on the PNG cut out of the data URI by hand
    from PIL import Image

    doc = json.loads((gltf_samples / "BoxTextured.gltf").read_text())
    uri = doc["images"][0].get("uri")
    if uri is None:  # image in a bufferView of the embedded buffer
        view = doc["bufferViews"][doc["images"][0]["bufferView"]]
        blob = base64.b64decode(doc["buffers"][view["buffer"]]["uri"].split(",", 1)[1])
        png = blob[view.get("byteOffset", 0): view.get("byteOffset", 0) + view["byteLength"]]
    else:
        png = base64.b64decode(uri.split(",", 1)[1])
    expected = np.asarray(Image.open(io.BytesIO(png)).convert("RGBA"), np.float32) / 255.0
    np.testing.assert_array_equal(load_gltf(gltf_samples / "BoxTextured.gltf").textures[0].pixels, expected)


def test_box_vertex_colours(gltf_samples):
    scene = load_gltf(gltf_samples / "BoxVertexColors.gltf")
    # README: COLOR_0 is float VEC3 with colour = position; alpha defaults to 1
    np.testing.assert_allclose(scene.colours[:, :3], scene.positions, atol=1e-6)
    np.testing.assert_array_equal(scene.colours[:, 3], 1.0)


def test_validator_texture_transform(gltf_samples):
    (m,) = load_gltf(gltf_samples / "Validator_KHR_texture_transform.gltf").materials
    ref = m.emissive_texture
    # README: offset (0,1), rotation 1.57079632679, scale (0.5,0.5), texCoord 1 (overrides textureInfo)
    assert ref.transform.offset == (0.0, 1.0)
    assert ref.transform.rotation_rad == pytest.approx(1.57079632679)
    assert ref.transform.scale == (0.5, 0.5)
    assert ref.tex_coord == 1


def test_validator_material_extensions_kept_raw(gltf_samples):
    (cc,) = load_gltf(gltf_samples / "Validator_KHR_materials_clearcoat.gltf").materials
    ext = cc.extensions["KHR_materials_clearcoat"]
    # README: clearcoat factor 0.5, roughness factor 1.0, clearcoat normal scale 1.5
    assert (ext["clearcoatFactor"], ext["clearcoatRoughnessFactor"]) == (0.5, 1.0)
    assert ext["clearcoatNormalTexture"]["scale"] == 1.5
    (tr,) = load_gltf(gltf_samples / "Validator_KHR_materials_transmission.gltf").materials
    assert tr.extensions["KHR_materials_transmission"]["transmissionFactor"] == 0.5
    variants = load_gltf(gltf_samples / "Validator_KHR_materials_variants.gltf")
    assert "KHR_materials_sheen" in variants.materials[1].extensions


@pytest.mark.parametrize("name", [n for n in SAMPLES if not n.startswith("Validator")])
def test_samples_agree_with_trimesh(gltf_samples, name):
    # reference library: trimesh 5.x loads the default scene; README: it ignores sparse data
    trimesh = pytest.importorskip("trimesh")
    ref = trimesh.load(gltf_samples / name, force="scene").to_mesh()
    scene = load_gltf(gltf_samples / name)
    assert scene.n_triangles == len(ref.faces)
    lo, hi = scene.bounds()
    if name == "SimpleSparseAccessor.gltf":
        assert ref.bounds[1][1] == pytest.approx(1.0) and hi[1] == pytest.approx(4.0)
        return
    np.testing.assert_allclose([lo, hi], ref.bounds, atol=1e-5)


# ----------------------------------------------------------------------------- containers
def _cube_writer():
    w = GltfWriter()
    w.mesh(CUBE_V, CUBE_T, TEXCOORD_0=CUBE_V[:, :2])
    w.node(mesh=0, translation=[1, 2, 3])
    return w


def test_glb_external_and_data_uri_agree(tmp_path):
    w = _cube_writer()
    a = load_gltf_bytes(w.gltf_bytes(), "cube.gltf")
    (tmp_path / "cube.glb").write_bytes(w.glb_bytes())
    b = load_gltf(tmp_path / "cube.glb")
    c = load_gltf(w.write_gltf(tmp_path / "ext.gltf", external=True))
    assert (tmp_path / "ext.bin").exists()
    for s in (b, c):
        np.testing.assert_array_equal(s.positions, a.positions)
        np.testing.assert_array_equal(s.triangles, a.triangles)
        np.testing.assert_array_equal(s.uvs, a.uvs)
    lo, hi = a.bounds()
    np.testing.assert_allclose([lo, hi], [[1, 2, 3], [2, 3, 4]])


def test_glb_agrees_with_trimesh(tmp_path):
    trimesh = pytest.importorskip("trimesh")
    w = GltfWriter()
    w.mesh(CUBE_V, CUBE_T)
    w.node(mesh=0, rotation=[0, math.sin(0.3), 0, math.cos(0.3)], scale=[2, 1, 0.5], translation=[0, 1, 0])
    w.node(mesh=0, translation=[5, 0, 0])
    path = tmp_path / "two.glb"
    path.write_bytes(w.glb_bytes())
    ref = trimesh.load(path, force="scene").to_mesh()
    scene = load_gltf(path)
    assert scene.n_triangles == len(ref.faces) == 24
    np.testing.assert_allclose(scene.bounds(), ref.bounds, atol=1e-5)
    assert surface_area(scene) == pytest.approx(ref.area, rel=1e-6)


def test_bytes_without_base_dir_cannot_read_external(tmp_path):
    w = _cube_writer()
    w.write_gltf(tmp_path / "ext.gltf", external=True)
    data = (tmp_path / "ext.gltf").read_bytes()
    with pytest.raises(SceneError, match=r"mem\.gltf: buffers\[0\]: external file 'ext\.bin' cannot be read"):
        load_gltf_bytes(data, "mem.gltf")
    assert load_gltf_bytes(data, "mem.gltf", base_dir=tmp_path).n_triangles == 12


def test_uri_percent_encoding(tmp_path):
    w = _cube_writer()
    (tmp_path / "my cube.bin").write_bytes(bytes(w.blob))
    w._buffer("my%20cube.bin")  # glTF 2.0 §3.6.1: URIs are percent-encoded (RFC 3986)
    (tmp_path / "c.gltf").write_text(json.dumps(w.doc))
    assert load_gltf(tmp_path / "c.gltf").n_triangles == 12


# ----------------------------------------------------------------------------- accessor decoding
def test_every_component_type_and_normalisation():
    w = GltfWriter()
    pos = QUAD
    i8 = np.array([[-128, 127], [-127, 0], [64, -64], [1, -1]], np.int8)
    u8 = np.array([[0, 255], [128, 1], [255, 0], [17, 34]], np.uint8)
    i16 = np.array([[-32768, 32767], [-32767, 0], [16384, -1], [1, 2]], np.int16)
    u16 = np.array([[0, 65535], [32768, 1], [65535, 0], [300, 3]], np.uint16)
    col_u8 = np.array([[255, 0, 51, 255], [0, 255, 102, 0], [10, 20, 30, 40], [1, 2, 3, 4]], np.uint8)
    w.mesh(pos, QUAD_TRIS, index_type=UBYTE, z_normals=True,
           TEXCOORD_0=w.accessor(i8, BYTE, normalized=True), TEXCOORD_1=w.accessor(u16, USHORT, normalized=True),
           COLOR_0=w.accessor(col_u8, UBYTE, normalized=True))
    w.mesh(pos, QUAD_TRIS, index_type=USHORT, z_normals=True,
           TEXCOORD_0=w.accessor(u8, UBYTE, normalized=True), TEXCOORD_1=w.accessor(i16, SHORT, normalized=True))
    w.mesh(pos, QUAD_TRIS, index_type=UINT, z_normals=True,
           TEXCOORD_0=w.accessor(u8, UBYTE),  # KHR_mesh_quantization: integers by value
           COLOR_0=w.accessor(u16[:, [0, 1, 0]], USHORT, normalized=True))
    for m in range(3):
        w.node(mesh=m)
    s = load(w)
    uv = s.uvs
    # glTF 2.0 §3.11: int8 max(c/127, -1), uint8 c/255, int16 max(c/32767, -1), uint16 c/65535
    np.testing.assert_allclose(uv[0:4, 0], np.maximum(i8 / 127.0, -1.0), rtol=1e-6)
    np.testing.assert_allclose(uv[0:4, 1], u16 / 65535.0, rtol=1e-6)
    np.testing.assert_allclose(s.colours[0:4], col_u8 / 255.0, rtol=1e-6)
    np.testing.assert_allclose(uv[4:8, 0], u8 / 255.0, rtol=1e-6)
    np.testing.assert_allclose(uv[4:8, 1], np.maximum(i16 / 32767.0, -1.0), rtol=1e-6)
    np.testing.assert_array_equal(uv[8:12, 0], u8.astype(np.float32))
    np.testing.assert_allclose(s.colours[8:12, :3], u16[:, [0, 1, 0]] / 65535.0, rtol=1e-6)
    np.testing.assert_array_equal(s.colours[8:12, 3], 1.0)
    assert uv[0, 0, 0] == -1.0 and uv[1, 0, 0] == -1.0  # -128 and -127 both clamp/map to -1
    np.testing.assert_array_equal(s.triangles, np.concatenate([QUAD_TRIS, QUAD_TRIS + 4, QUAD_TRIS + 8]))


def test_quantized_positions():
    # KHR_mesh_quantization: SHORT normalized positions, placed by the node's scale
    w = GltfWriter()
    w.doc["extensionsUsed"] = w.doc["extensionsRequired"] = ["KHR_mesh_quantization"]
    q = np.array([[0, 0, 0], [32767, 0, 0], [0, 32767, 0]], np.int16)
    w.doc["meshes"].append({"primitives": [{"attributes": {"POSITION": w.accessor(q, SHORT, normalized=True)}}]})
    w.node(mesh=0, scale=[10, 10, 10])
    s = load(w)
    np.testing.assert_allclose(s.positions, [[0, 0, 0], [10, 0, 0], [0, 10, 0]], atol=1e-6)


def test_interleaved_stride_and_offsets():
    # one view, stride 32: POSITION at 0, NORMAL at 12, TEXCOORD_0 at 24 (glTF 2.0 §3.6.2.4)
    w = GltfWriter()
    nrm = np.tile([0, 0, 1], (4, 1)).astype(np.float32)
    uv = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], np.float32)
    inter = np.zeros((4, 8), np.float32)
    inter[:, 0:3], inter[:, 3:6], inter[:, 6:8] = QUAD, nrm, uv
    v = w.view(inter.tobytes(), stride=32)
    a_p = w.accessor(QUAD, view=v)
    a_n = w.accessor(nrm, view=v, byte_offset=12)
    a_t = w.accessor(uv, view=v, byte_offset=24)
    w.mesh(None, QUAD_TRIS, POSITION=a_p, NORMAL=a_n, TEXCOORD_0=a_t)
    w.node(mesh=0)
    s = load(w)
    np.testing.assert_array_equal(s.positions, QUAD)
    np.testing.assert_array_equal(s.normals, nrm)
    np.testing.assert_array_equal(s.uvs[:, 0], uv)


def test_sparse_without_buffer_view():
    # glTF 2.0 §3.6.2.3: no bufferView -> zeros, then the sparse values are substituted
    w = GltfWriter()
    idx = w.view(np.array([1, 2], np.uint16).tobytes())
    val = w.view(np.array([[1, 0, 0], [0, 1, 0]], np.float32).tobytes())
    w.doc["accessors"].append({"componentType": FLOAT, "type": "VEC3", "count": 3, "sparse": {
        "count": 2, "indices": {"bufferView": idx, "componentType": USHORT}, "values": {"bufferView": val}}})
    w.doc["meshes"].append({"primitives": [{"attributes": {"POSITION": 0}}]})
    w.node(mesh=0)
    s = load(w)
    np.testing.assert_array_equal(s.positions, [[0, 0, 0], [1, 0, 0], [0, 1, 0]])


# ----------------------------------------------------------------------------- primitive modes
def test_triangle_strip_and_fan():
    # glTF 2.0 §3.7.2.1: strip p_i = {v_i, v_(i+(1+i%2)), v_(i+(2-i%2))}; fan p_i = {v_(i+1), v_(i+2), v_0}
    # (formulas from memory; they are the OpenGL strip/fan orders up to a cyclic shift)
    w = GltfWriter()
    strip = np.array([[0, 0, 0], [0, 1, 0], [1, 0, 0], [1, 1, 0], [2, 0, 0]], np.float32)
    fan = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [-1, 1, 0]], np.float32)
    w.mesh(strip, [0, 1, 2, 3, 4], mode=5, NORMAL=np.tile([0, 0, 1], (5, 1)))  # indexed strip
    w.mesh(fan, None, mode=6, NORMAL=np.tile([0, 0, 1], (5, 1)))  # non-indexed fan
    w.node(mesh=0)
    w.node(mesh=1)
    s = load(w)
    assert s.n_triangles == 3 + 3
    np.testing.assert_array_equal(s.triangles[:3], [[0, 1, 2], [1, 3, 2], [2, 3, 4]])
    np.testing.assert_array_equal(s.triangles[3:] - 5, [[1, 2, 0], [2, 3, 0], [3, 4, 0]])
    # the spec's orderings keep one winding along the strip (here clockwise seen from +Z) and the
    # fan (counter-clockwise), which is the point of alternating the strip's order
    fz = face_normals(s)[:, 2]
    assert np.all(fz[:3] < 0) and np.all(fz[3:] > 0)


def test_strip_formula_matches_spec_text():
    w = GltfWriter()
    pts = np.array([[i // 2, i % 2, 0] for i in range(6)], np.float32)
    w.mesh(pts, None, mode=5)
    w.node(mesh=0)
    s = load(w)
    # flat normals un-share vertices, so read the triangles back as positions
    tri_pos = s.positions[s.triangles]
    expect = [[pts[i], pts[i + 1 + i % 2], pts[i + 2 - i % 2]] for i in range(4)]
    np.testing.assert_array_equal(tri_pos, expect)
    # vertices (0,0) (0,1) (1,0): the first triangle turns clockwise seen from +Z -> faces -Z
    np.testing.assert_allclose(s.normals, [[0, 0, -1]] * 12)


def test_points_and_lines_are_skipped_with_a_warning(caplog):
    w = GltfWriter()
    w.mesh(QUAD, None, mode=0)
    w.mesh(QUAD, [0, 1, 1, 2], mode=1)
    w.mesh(QUAD, QUAD_TRIS)
    for m in range(3):
        w.node(mesh=m)
    with caplog.at_level(logging.WARNING, logger="variantshot.geometry.gltf"):
        s = load(w)
    assert s.n_triangles == 2
    assert "POINTS" in caplog.text and "LINES" in caplog.text


# ----------------------------------------------------------------------------- transforms
def _trs_matrix(t, q, s):
    # glTF 2.0 §3.5.2: M = T * R * S; rotation from a unit quaternion [x, y, z, w]
    x, y, z, w_ = q
    r = np.array([[1 - 2 * (y * y + z * z), 2 * (x * y - z * w_), 2 * (x * z + y * w_)],
                  [2 * (x * y + z * w_), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w_)],
                  [2 * (x * z - y * w_), 2 * (y * z + x * w_), 1 - 2 * (x * x + y * y)]])
    m = np.eye(4)
    m[:3, :3] = r @ np.diag(s)
    m[:3, 3] = t
    return m


def test_trs_equals_matrix_and_hierarchy():
    t, q, sc = [1, 2, 3], [0, 0, math.sin(math.pi / 4), math.cos(math.pi / 4)], [2, 3, 4]  # 90 deg about Z
    w = GltfWriter()
    w.mesh(QUAD, QUAD_TRIS, z_normals=True)
    w.node(mesh=0, translation=t, rotation=q, scale=sc)
    w.node(mesh=0, matrix=_trs_matrix(t, q, sc).T.ravel().tolist())  # column-major
    s = load(w)
    a, b = s.positions[:4], s.positions[4:]
    np.testing.assert_allclose(a, b, atol=1e-6)
    # closed form: scale then rotate 90 deg about Z ((x, y) -> (-y, x)) then translate
    np.testing.assert_allclose(a[1], [1 - 0, 2 + 2, 3], atol=1e-6)  # (1,0,0) -> (2,0,0) -> (0,2,0) -> +t
    np.testing.assert_allclose(a[3], [1 - 3, 2 + 0, 3], atol=1e-6)  # (0,1,0) -> (0,3,0) -> (-3,0,0) -> +t
    # parent * child: the child's translation is scaled by the parent
    w2 = GltfWriter()
    w2.mesh(QUAD, QUAD_TRIS)
    child = w2.node(root=False, mesh=0, translation=[1, 0, 0])
    w2.node(children=[child], scale=[2, 2, 2])
    lo, hi = load(w2).bounds()
    np.testing.assert_allclose([lo, hi], [[2, 0, 0], [4, 2, 0]])


def test_negative_scale_flips_winding_normals_and_tangent_w():
    w = GltfWriter()
    corners = CUBE_V
    vn = corners - 0.5  # outward-ish smooth normals
    vn /= np.linalg.norm(vn, axis=1, keepdims=True)
    tang = np.tile([1, 0, 0, 1], (8, 1)).astype(np.float32)
    w.mesh(corners, CUBE_T, NORMAL=vn, TANGENT=tang)
    w.node(mesh=0, scale=[-1, 1, 1])
    w.node(mesh=0, translation=[3, 0, 0])
    s = load(w)
    # a closed mesh with outward CCW faces has positive volume (divergence theorem); mirroring must keep it
    p = s.positions.astype(np.float64)
    for part in (slice(0, 12), slice(12, 24)):
        t = s.triangles[part]
        vol = np.einsum("ij,ij->i", p[t[:, 0]], np.cross(p[t[:, 1]], p[t[:, 2]])).sum() / 6.0
        assert vol == pytest.approx(1.0, abs=1e-6)
    # vertex normals still point out of the faces that use them
    fn = face_normals(s)
    assert np.all(np.einsum("ij,ij->i", fn, s.normals[s.triangles].mean(axis=1)) > 0)
    # tangent: x mirrored to -x, handedness w flipped (bitangent = w * cross(n, t) keeps pointing along M b)
    np.testing.assert_allclose(s.tangents[:8], np.tile([-1, 0, 0, -1], (8, 1)), atol=1e-6)
    np.testing.assert_allclose(s.tangents[8:], np.tile([1, 0, 0, 1], (8, 1)), atol=1e-6)


def test_normals_use_inverse_transpose():
    # a slanted plane x + y = 1 with normal (1,1,0)/sqrt2; scaling x by 2 -> plane x/2 + y = 1,
    # whose normal is (1/2, 1, 0)/|..| (closed form)
    w = GltfWriter()
    pts = np.array([[1, 0, 0], [0, 1, 0], [1, 0, 1], [0, 1, 1]], np.float32)
    n = np.tile([1, 1, 0], (4, 1)) / math.sqrt(2)
    w.mesh(pts, [[0, 1, 2], [1, 3, 2]], NORMAL=n)
    w.node(mesh=0, scale=[2, 1, 1])
    s = load(w)
    expect = np.array([0.5, 1, 0]) / math.hypot(0.5, 1)
    np.testing.assert_allclose(s.normals, np.tile(expect, (4, 1)), atol=1e-6)
    edges = s.positions[1] - s.positions[0]
    assert abs(float(np.dot(edges, s.normals[0]))) < 1e-6


def test_missing_normals_are_flat():
    # glTF 2.0 §3.7.2.1: no NORMAL -> flat normals (vertices un-shared), provided tangents ignored
    w = GltfWriter()
    pts = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [1, 0, -1]], np.float32)  # a 90-degree crease
    w.mesh(pts, [[0, 1, 2], [1, 3, 2]], TANGENT=np.tile([1, 0, 0, 1], (4, 1)))
    w.node(mesh=0)
    s = load(w)
    assert s.positions.shape == (6, 3)
    np.testing.assert_allclose(s.normals[:3], [[0, 0, 1]] * 3, atol=1e-6)
    np.testing.assert_allclose(s.normals[3:], [[1, 0, 0]] * 3, atol=1e-6)
    np.testing.assert_array_equal(s.tangents, 0.0)


def test_singular_instance_is_skipped(caplog):
    w = GltfWriter()
    w.mesh(QUAD, QUAD_TRIS)
    w.node(mesh=0, scale=[0, 1, 1])
    w.node(mesh=0)
    with caplog.at_level(logging.WARNING, logger="variantshot.geometry.gltf"):
        assert load(w).n_triangles == 2
    assert "singular" in caplog.text


def test_no_scenes_uses_parentless_nodes():
    w = GltfWriter()
    w.mesh(QUAD, QUAD_TRIS)
    child = w.node(root=False, mesh=0, translation=[0, 0, 1])
    w.node(root=False, children=[child])
    w.node(root=False, mesh=0)
    del w.doc["scenes"], w.doc["scene"]
    assert load(w).n_triangles == 4


def test_scene_by_name():
    w = GltfWriter()
    w.mesh(QUAD, QUAD_TRIS)
    w.node(mesh=0)
    w.doc["scenes"].append({"name": "empty", "nodes": []})
    w.doc["scenes"][0]["name"] = "product"
    assert load(w, scene="product").n_triangles == 2
    assert load(w, scene="empty").n_triangles == 0
    with pytest.raises(SceneError, match=r"no scene named 'nope' \(scene names: 'product', 'empty'\)"):
        load(w, scene="nope")


# ----------------------------------------------------------------------------- materials, textures
def _png(rgba: np.ndarray) -> bytes:
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(rgba).save(buf, format="PNG")
    return buf.getvalue()


def test_materials_parsed_with_spec_defaults():
    w = GltfWriter()
    w.doc["textures"] = [{"source": 0}]
    w.doc["images"] = [{"uri": "data:image/png;base64," + base64.b64encode(_png(np.zeros((2, 2, 4), np.uint8))).decode()}]
    w.doc["materials"] = [{
        "name": "paint",
        "pbrMetallicRoughness": {"baseColorFactor": [0.1, 0.2, 0.3, 0.4], "metallicFactor": 0.25,
                                 "roughnessFactor": 0.75, "baseColorTexture": {"index": 0, "texCoord": 1},
                                 "metallicRoughnessTexture": {"index": 0}},
        "normalTexture": {"index": 0, "scale": 0.5}, "occlusionTexture": {"index": 0, "strength": 0.3},
        "emissiveFactor": [1, 0.5, 0], "emissiveTexture": {"index": 0},
        "extensions": {"KHR_materials_emissive_strength": {"emissiveStrength": 40.0},
                       "KHR_materials_ior": {"ior": 1.45}},
        "alphaMode": "MASK", "alphaCutoff": 0.3, "doubleSided": True,
    }, {}]
    w.mesh(QUAD, QUAD_TRIS, material=0)
    w.mesh(QUAD, QUAD_TRIS, material=1)
    w.mesh(QUAD, QUAD_TRIS)
    for m in range(3):
        w.node(mesh=m)
    s = load(w)
    paint, empty, default = s.materials
    assert paint.name == "paint"
    assert paint.base_colour_factor == (0.1, 0.2, 0.3, 0.4)
    assert (paint.metallic_factor, paint.roughness_factor) == (0.25, 0.75)
    assert paint.base_colour_texture.tex_coord == 1 and paint.metallic_roughness_texture.index == 0
    assert paint.normal_texture.scale == 0.5 and paint.occlusion_texture.scale == 0.3
    assert paint.emissive_factor == (1.0, 0.5, 0.0) and paint.emissive_strength == 40.0
    assert (paint.alpha_mode, paint.alpha_cutoff, paint.double_sided) == ("MASK", 0.3, True)
    assert paint.extensions["KHR_materials_ior"] == {"ior": 1.45}
    # glTF 2.0 §5.19/§5.22 defaults: base colour 1, metallic 1, roughness 1, emissive 0, OPAQUE, cutoff 0.5
    for m in (empty, default):
        assert m.base_colour_factor == (1, 1, 1, 1) and (m.metallic_factor, m.roughness_factor) == (1, 1)
        assert m.emissive_factor == (0, 0, 0) and m.alpha_mode == "OPAQUE" and m.alpha_cutoff == 0.5
        assert m.double_sided is False and m.base_colour_texture is None
    np.testing.assert_array_equal(s.tri_material, [0, 0, 1, 1, 2, 2])


def test_textures_from_buffer_view_file_and_data_uri(tmp_path):
    from PIL import Image

    rng = np.random.default_rng(7)
    rgba = rng.integers(0, 256, (3, 5, 4), dtype=np.uint8)
    rgb = rng.integers(0, 256, (4, 2, 3), dtype=np.uint8)
    grey = rng.integers(0, 256, (2, 2), dtype=np.uint8)
    w = GltfWriter()
    view = w.view(_png(rgba))
    Image.fromarray(rgb).save(tmp_path / "rgb.png")
    buf = io.BytesIO()
    Image.fromarray(grey).save(buf, format="PNG")
    w.doc["images"] = [{"bufferView": view, "mimeType": "image/png"}, {"uri": "rgb.png"},
                       {"uri": "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode()}]
    w.doc["samplers"] = [{"magFilter": NEAREST, "wrapS": CLAMP_TO_EDGE, "wrapT": MIRRORED_REPEAT}]
    w.doc["textures"] = [{"source": 0, "sampler": 0}, {"source": 1}, {"source": 2}]
    w.mesh(QUAD, QUAD_TRIS)
    w.node(mesh=0)
    (tmp_path / "t.glb").write_bytes(w.glb_bytes())
    s = load_gltf(tmp_path / "t.glb")
    a, b, c = s.textures
    np.testing.assert_array_equal(a.pixels, rgba / np.float32(255))
    assert (a.mag_filter, a.min_filter, a.wrap_s, a.wrap_t) == (NEAREST, None, CLAMP_TO_EDGE, MIRRORED_REPEAT)
    np.testing.assert_array_equal(b.pixels[..., :3], rgb / np.float32(255))
    np.testing.assert_array_equal(b.pixels[..., 3], 1.0)
    assert (b.wrap_s, b.wrap_t) == (REPEAT, REPEAT)  # glTF 2.0 §5.26: default wrap is REPEAT
    np.testing.assert_array_equal(c.pixels[..., 0], grey / np.float32(255))
    np.testing.assert_array_equal(c.pixels[..., 2], grey / np.float32(255))
    for t in s.textures:
        assert t.pixels.dtype == np.float32 and t.pixels.flags.c_contiguous


def test_jpeg_texture_decodes(tmp_path):
    from PIL import Image

    img = np.full((8, 8, 3), (200, 100, 50), np.uint8)
    Image.fromarray(img).save(tmp_path / "j.jpg", quality=95)
    w = GltfWriter()
    w.doc["images"] = [{"uri": "j.jpg"}]
    w.doc["textures"] = [{"source": 0}]
    w.mesh(QUAD, QUAD_TRIS)
    w.node(mesh=0)
    s = load_gltf(w.write_gltf(tmp_path / "j.gltf"))
    ref = np.asarray(Image.open(tmp_path / "j.jpg").convert("RGBA"), np.float32) / 255  # Pillow as reference
    np.testing.assert_array_equal(s.textures[0].pixels, ref)


# ----------------------------------------------------------------------------- cameras and lights
def test_camera_world_transform_is_rigid_and_named():
    w = GltfWriter()
    w.doc["cameras"] = [{"type": "perspective", "perspective": {"yfov": 0.5, "znear": 0.1}},
                        {"name": "top", "type": "orthographic",
                         "orthographic": {"xmag": 2, "ymag": 1, "znear": 0, "zfar": 10}}]
    cam = w.node(root=False, camera=0, translation=[0, 0, 5], name="front")
    w.node(children=[cam], scale=[3, 3, 3], rotation=[0, math.sin(math.pi / 4), 0, math.cos(math.pi / 4)])
    w.node(camera=1, translation=[0, 4, 0], rotation=[-math.sin(math.pi / 4), 0, 0, math.cos(math.pi / 4)])
    w.node(camera=0)
    s = load(w)
    front, top, third = s.cameras
    assert (front.name, top.name, third.name) == ("front", "top", "camera2")
    assert front.zfar is None and front.aspect_ratio is None and front.yfov_rad == 0.5
    m = front.world_from_camera
    np.testing.assert_allclose(m[:3, :3] @ m[:3, :3].T, np.eye(3), atol=1e-12)
    assert np.linalg.det(m[:3, :3]) == pytest.approx(1.0)
    # parent: scale 3 then 90 deg about +Y; child at z=5 -> world (15, 0, 0), looking along -X
    np.testing.assert_allclose(m[:3, 3], [15, 0, 0], atol=1e-9)
    np.testing.assert_allclose(-m[:3, 2], [-1, 0, 0], atol=1e-9)
    # -90 deg about X: the camera at y=4 looks straight down (-Y)
    np.testing.assert_allclose(-top.world_from_camera[:3, 2], [0, -1, 0], atol=1e-9)
    assert (top.xmag, top.ymag, top.znear, top.zfar) == (2, 1, 0, 10)


def test_punctual_lights():
    w = GltfWriter()
    w.doc["extensionsUsed"] = ["KHR_lights_punctual"]
    w.doc["extensions"] = {"KHR_lights_punctual": {"lights": [
        {"type": "spot", "name": "key", "color": [1, 0.5, 0.25], "intensity": 30,
         "spot": {"innerConeAngle": 0.2, "outerConeAngle": 0.5}},
        {"type": "point"},
        {"type": "directional", "intensity": 3},
    ]}}
    ext = lambda i: {"KHR_lights_punctual": {"light": i}}  # noqa: E731
    w.node(extensions=ext(0), translation=[1, 2, 3], rotation=[-math.sin(math.pi / 4), 0, 0, math.cos(math.pi / 4)])
    w.node(extensions=ext(1), translation=[0, 1, 0], name="bulb")
    w.node(extensions=ext(2))
    s = load(w)
    spot, point, sun = s.lights
    assert (spot.name, spot.kind, spot.colour_linear, spot.intensity) == ("key", "spot", (1, 0.5, 0.25), 30)
    assert (spot.inner_cone_rad, spot.outer_cone_rad) == (0.2, 0.5)
    np.testing.assert_allclose(spot.position, [1, 2, 3])
    np.testing.assert_allclose(spot.direction, [0, -1, 0], atol=1e-12)  # -Z rotated -90 deg about X
    # KHR_lights_punctual defaults: colour 1, intensity 1, infinite range, cone 0 .. pi/4
    assert (point.name, point.kind, point.colour_linear, point.intensity) == ("bulb", "point", (1, 1, 1), 1)
    assert point.range == math.inf and point.position == (0, 1, 0)
    assert sun.kind == "directional" and sun.direction == (0, 0, -1) and sun.name == "light2"


# ----------------------------------------------------------------------------- robustness and speed
def test_large_mesh_loads_vectorised():
    # 200k triangles: the loader has no per-triangle Python loop, so this is quick (no timing assert)
    n = 317
    g = np.stack(np.meshgrid(np.arange(n), np.arange(n), indexing="ij"), -1).reshape(-1, 2)
    pts = np.c_[g, np.zeros(len(g))].astype(np.float32)
    i = np.arange(n - 1)
    a = (i[:, None] * n + i[None, :]).ravel()
    tris = np.concatenate([np.c_[a, a + n, a + 1], np.c_[a + 1, a + n, a + n + 1]])
    w = GltfWriter()
    w.mesh(pts, tris)
    w.node(mesh=0)
    s = load(w)
    assert s.n_triangles == 2 * (n - 1) ** 2
    assert surface_area(s) == pytest.approx((n - 1) ** 2)


def test_webp_source_and_sourceless_textures(caplog):
    # EXT_texture_webp: its source is used when the client can decode WebP; a texture with no
    # decodable source (as in the Validator files) becomes a 1x1 white texture with a warning
    from PIL import Image

    rgba = np.array([[[10, 20, 30, 255], [200, 100, 0, 128]]], np.uint8)
    buf = io.BytesIO()
    Image.fromarray(rgba).save(buf, format="WEBP", lossless=True, exact=True)
    w = GltfWriter()
    w.doc["extensionsUsed"] = ["EXT_texture_webp"]
    w.doc["images"] = [{"uri": "data:image/png;base64," + base64.b64encode(_png(np.zeros((1, 1, 4), np.uint8))).decode()},
                       {"uri": "data:image/webp;base64," + base64.b64encode(buf.getvalue()).decode()}]
    w.doc["textures"] = [{"source": 0, "extensions": {"EXT_texture_webp": {"source": 1}}}, {}]
    w.mesh(QUAD, QUAD_TRIS)
    w.node(mesh=0)
    with caplog.at_level(logging.WARNING, logger="variantshot.geometry.gltf"):
        webp, blank = load(w).textures
    ref = np.asarray(Image.open(io.BytesIO(buf.getvalue())).convert("RGBA"), np.float32) / 255  # Pillow reference
    np.testing.assert_array_equal(webp.pixels, ref)
    np.testing.assert_array_equal(blank.pixels, np.ones((1, 1, 4)))
    assert "textures[1] has no image source" in caplog.text


def test_supported_required_extensions_load_and_vendor_extensions_stay_raw():
    w = GltfWriter()
    w.doc["extensionsRequired"] = ["KHR_materials_clearcoat", "KHR_texture_transform", "KHR_materials_variants"]
    w.doc["extensionsUsed"] = w.doc["extensionsRequired"] + ["VENDOR_fancy"]
    w.doc["materials"] = [{"extensions": {"VENDOR_fancy": {"glowTexture": "not a textureInfo"},
                                          "KHR_materials_clearcoat": {"clearcoatFactor": 1.0}}}]
    w.mesh(QUAD, QUAD_TRIS, material=0)
    w.node(mesh=0)
    (m,) = load(w).materials
    assert m.extensions["VENDOR_fancy"] == {"glowTexture": "not a textureInfo"}
    assert m.extensions["KHR_materials_clearcoat"] == {"clearcoatFactor": 1.0}


def test_primitive_without_position_is_skipped(caplog):
    # glTF 2.0 §3.7.2.1: without POSITION the client SHOULD skip the primitive
    w = GltfWriter()
    w.mesh(QUAD, QUAD_TRIS)
    w.doc["meshes"][0]["primitives"].append({"attributes": {"NORMAL": w.accessor(np.tile([0, 0, 1.0], (4, 1)))}})
    w.node(mesh=0)
    with caplog.at_level(logging.WARNING, logger="variantshot.geometry.gltf"):
        assert load(w).n_triangles == 2
    assert "primitives[1] has no POSITION" in caplog.text


def _feature_writer():
    """A file using most loader features at once: strip, fan, texture, sampler, materials, lights, cameras."""
    w = GltfWriter()
    w.doc["extensionsUsed"] = ["KHR_lights_punctual", "KHR_texture_transform", "KHR_materials_emissive_strength"]
    w.doc["extensions"] = {"KHR_lights_punctual": {"lights": [{"type": "spot", "spot": {"outerConeAngle": 0.6}}]}}
    w.doc["images"] = [{"bufferView": w.view(_png(np.full((4, 4, 4), 200, np.uint8))), "mimeType": "image/png"}]
    w.doc["samplers"] = [{"magFilter": LINEAR, "minFilter": 9987, "wrapS": MIRRORED_REPEAT}]
    w.doc["textures"] = [{"source": 0, "sampler": 0}]
    w.doc["materials"] = [{"pbrMetallicRoughness": {"baseColorTexture": {
        "index": 0, "extensions": {"KHR_texture_transform": {"scale": [2, 2]}}}},
        "emissiveFactor": [1, 1, 1], "extensions": {"KHR_materials_emissive_strength": {"emissiveStrength": 5}}}]
    w.doc["cameras"] = [{"type": "perspective", "perspective": {"yfov": 0.6, "znear": 0.05}}]
    strip = np.array([[0, 0, 0], [0, 1, 0], [1, 0, 0], [1, 1, 0]], np.float32)
    w.mesh(strip, np.array([0, 1, 2, 3], np.uint16), mode=5, index_type=USHORT, material=0,
           TEXCOORD_0=strip[:, :2])
    w.mesh(QUAD, None, mode=6)
    w.node(mesh=0, rotation=[0, 0.6, 0, 0.8])
    w.node(mesh=1, scale=[-1, 1, 1])
    w.node(camera=0, translation=[0, 0, 4])
    w.node(extensions={"KHR_lights_punctual": {"light": 0}}, translation=[0, 3, 0])
    return w


def test_generated_files_pass_the_khronos_validator(khronos_validate, tmp_path):
    # the fixtures these tests trust are valid glTF 2.0 according to the reference validator
    paths = []
    w = _cube_writer()
    paths.append(w.write_gltf(tmp_path / "cube.gltf"))
    paths.append(_cube_writer().write_gltf(tmp_path / "cube_ext.gltf", external=True))
    (tmp_path / "cube.glb").write_bytes(_cube_writer().glb_bytes())
    paths.append(tmp_path / "cube.glb")
    (tmp_path / "features.glb").write_bytes(_feature_writer().glb_bytes())
    paths.append(tmp_path / "features.glb")
    for report in khronos_validate(paths):
        assert report["errors"] == 0, report
    scene = load_gltf(tmp_path / "features.glb")
    assert scene.n_triangles == 2 + 2 and len(scene.cameras) == 1 and len(scene.lights) == 1
    assert scene.materials[0].base_colour_texture.transform.scale == (2.0, 2.0)
    assert scene.materials[0].emissive_strength == 5.0
