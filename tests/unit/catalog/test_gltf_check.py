"""The structural glTF check and world positions against the Khronos samples and facts.json.

facts.json (shared/gltf-samples, written by an independent json+numpy reader) gives every
sample's default-scene bounding box; the Khronos files are valid glTF 2.0 (the validator's own
test data and sample models), so the check must find nothing in them.
"""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from variantshot.catalog.gltf_check import check_gltf, load_buffers, used_extensions, world_positions


@pytest.fixture(scope="module")
def facts(gltf_samples):
    return json.loads((gltf_samples / "facts.json").read_text())["files"]


def test_khronos_samples_pass(gltf_samples, facts):
    for name in facts:
        doc = json.loads((gltf_samples / name).read_text())
        assert check_gltf(doc, gltf_samples) == [], name


def test_world_bounds_match_facts(gltf_samples, facts):
    for name, f in facts.items():
        if f["default_scene_aabb_min"] is None:
            continue
        doc = json.loads((gltf_samples / name).read_text())
        p = world_positions(doc, load_buffers(doc, gltf_samples))
        # 1e-5: Cameras.gltf's quaternion is not unit length (README notes), we normalise as facts does
        np.testing.assert_allclose(p.min(axis=0), f["default_scene_aabb_min"], atol=1e-5, err_msg=name)
        np.testing.assert_allclose(p.max(axis=0), f["default_scene_aabb_max"], atol=1e-5, err_msg=name)


def test_used_extensions_match_declared(gltf_samples, facts):
    for name, f in facts.items():
        doc = json.loads((gltf_samples / name).read_text())
        assert used_extensions(doc) == sorted(f["extensionsUsed"]), name


@pytest.mark.parametrize(
    "mutate, pointer",
    [
        (lambda d: d["accessors"][0].update(count=10_000), "/accessors/0"),
        (lambda d: d["bufferViews"][0].update(byteLength=10_000_000), "/bufferViews/0"),
        (lambda d: d["meshes"][0]["primitives"][0].update(indices=99), "/meshes/0/primitives/0/indices"),
        (lambda d: d["nodes"][0].update(children=[0]), "/nodes/0"),
        (lambda d: d["scenes"][0].update(nodes=[7]), "/scenes/0/nodes"),
        (lambda d: d.pop("asset"), "/asset"),
        (lambda d: d["buffers"][0].update(uri="nowhere.bin"), "/buffers/0"),
        (lambda d: d["accessors"][0].pop("componentType"), "/accessors/0"),
        (lambda d: d["materials"][0]["pbrMetallicRoughness"].update(baseColorFactor=[2, 0, 0, 1]),
         "/materials/0/pbrMetallicRoughness/baseColorFactor"),
        (lambda d: d["nodes"][1].update(rotation=[0, 0, 0, 2]), "/nodes/1/rotation"),
        (lambda d: d["materials"][0].setdefault("extensions", {}).update(KHR_materials_ior={"ior": 1.4}),
         "/extensionsUsed"),
    ],
)
def test_broken_box_is_flagged(gltf_samples, mutate, pointer):
    doc = json.loads((gltf_samples / "Box.gltf").read_text())
    broken = copy.deepcopy(doc)
    mutate(broken)
    issues = check_gltf(broken, gltf_samples)
    assert any(i.pointer == pointer for i in issues), [str(i) for i in issues]


def test_index_values_beyond_the_vertex_count_are_found(gltf_samples):
    doc = json.loads((gltf_samples / "Triangle.gltf").read_text())
    # Triangle.gltf draws 3 vertices; claim the POSITION accessor has only 2
    doc["accessors"][1]["count"] = 2
    issues = check_gltf(doc, gltf_samples)
    assert any(i.pointer == "/meshes/0/primitives/0/indices" and "index 2 >= vertex count 2" in i.message
               for i in issues), [str(i) for i in issues]
