"""Template expansion: sandbox, error locations, the context a template sees, resource copies."""

from __future__ import annotations

import base64
import json
import shutil
import struct
from pathlib import Path

import numpy as np
import pytest

from variantshot.catalog.expand import check_expanded, expand_catalog
from variantshot.catalog.validate import read_catalog
from variantshot.errors import InputError, InputErrors

# one triangle (0,0,0) (1,0,0) (0,1,0): 9 float32 = 36 bytes
TRIANGLE = struct.pack("<9f", 0, 0, 0, 1, 0, 0, 0, 1, 0)
TRIANGLE_URI = "data:application/octet-stream;base64," + base64.b64encode(TRIANGLE).decode()

SCENE = """{
  "asset": {"version": "2.0", "extras": {"note": {{ row.note | tojson }}}},
  "scene": 0, "scenes": [{"nodes": [0]}], "nodes": [{"mesh": 0}],
  "meshes": [{"primitives": [{"attributes": {"POSITION": 0}, "material": 0}]}],
  "materials": [{{ material(finish, colour, "paint") | tojson }}],
  "accessors": [{"bufferView": 0, "componentType": 5126, "count": 3, "type": "VEC3",
                 "min": [0, 0, 0], "max": [1, 1, 0]}],
  "bufferViews": [{"buffer": 0, "byteLength": 36}],
  "buffers": [{"byteLength": 36, "uri": "BUFFER_URI"}]
}
"""


def make_library(tmp_path: Path, repo_dir: Path, templates: dict[str, str], *, buffer_uri=TRIANGLE_URI) -> Path:
    """A templates folder with the repo's finish library and the given templates."""
    tdir = tmp_path / "templates"
    shutil.copytree(repo_dir / "templates" / "finishes", tdir / "finishes")
    for name, text in templates.items():
        (tdir / name).parent.mkdir(parents=True, exist_ok=True)
        (tdir / name).write_text(text.replace("BUFFER_URI", buffer_uri), encoding="utf-8")
    return tdir


def write_catalog(tmp_path: Path, rows: str, header="sku,product,colour,finish,note") -> Path:
    path = tmp_path / "catalog.csv"
    path.write_text(header + "\n" + rows, encoding="utf-8")
    return path


def expand_errors(path, tdir, out):
    with pytest.raises(InputErrors) as info:
        expand_catalog(path, out, templates_dir=tdir)
    assert not out.exists(), "nothing is written for an invalid catalog"
    return [e.format() for e in info.value.errors]


def test_context_row_colour_finish_reach_the_scene(tmp_path, repo_dir):
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": SCENE})
    path = write_catalog(tmp_path, 'T-1,tri,#ff8000,gloss,"hello, world"\n')
    report, written = expand_catalog(path, tmp_path / "out", templates_dir=tdir)
    doc = json.loads(written[0].read_text())
    assert doc["asset"]["extras"]["note"] == "hello, world"  # an extra column is row.note
    mat = doc["materials"][0]
    # glTF baseColorFactor is linear: 0xff -> 1.0, 0x80 -> 0.2158605 (IEC 61966-2-1; REFERENCES §1 code 128)
    np.testing.assert_allclose(mat["pbrMetallicRoughness"]["baseColorFactor"], [1.0, 0.215861, 0.0, 1.0], atol=1e-6)
    assert mat["extensions"]["KHR_materials_clearcoat"]["clearcoatFactor"] == 1.0
    assert doc["extensionsUsed"] == ["KHR_materials_clearcoat"]
    assert [c["name"] for c in doc["cameras"]] == ["front", "three-quarter-left"]
    assert all(c["perspective"]["aspectRatio"] == 1.0 for c in doc["cameras"])
    extras = doc["asset"]["extras"]["variantshot"]
    assert extras["sku"] == "T-1" and extras["colour"]["text"] == "#ff8000"


@pytest.mark.parametrize(
    "body, fragment",
    [
        ("{{ ''.__class__.__mro__[1].__subclasses__() }}", "refused by the template sandbox"),
        ("{{ row.__class__ }}", "refused by the template sandbox"),
        ("{{ cycler.__init__.__globals__ }}", "refused by the template sandbox"),
        ("{{ material.__globals__ }}", "refused by the template sandbox"),
        ("{% include '../../../../etc/passwd' %}", "templates may only include files inside"),
        ("{% include '/etc/passwd' %}", "templates may only include files inside"),
        ("{{ open('/etc/passwd').read() }}", "'open' is undefined"),
        ("{{ lipsum.__globals__['os'] }}", "refused by the template sandbox"),
        ("{{ self._TemplateReference__context }}", "refused by the template sandbox"),
        ("{{ finish['__class__'] }}", "refused by the template sandbox"),
        ("{{ colour['__class__'] }}", "refused by the template sandbox"),
        ("{{ finishes.matte.__init__ }}", "refused by the template sandbox"),
        ("{% set x = row.update({'sku': 1}) %}", "refused by the template sandbox"),
    ],
)
def test_sandbox_refuses_files_and_python_internals(tmp_path, repo_dir, body, fragment):
    text = SCENE.replace('"scene": 0,', '"scene": 0,\n  "x": "' + body + '",')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    (line,) = expand_errors(path, tdir, tmp_path / "out")
    # the template file and the line of the offending expression (line 4 after the insertion)
    assert line.split(": ", 1)[0] == f"{tdir / 'tri.gltf.j2'}:4", line
    assert fragment in line, line
    assert f"catalog {path}:2, sku T-1" in line


def test_undefined_name_names_template_line_and_row(tmp_path, repo_dir):
    text = SCENE.replace('{{ row.note | tojson }}', '{{ row.colourway_typo | tojson }}')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\nT-2,tri,#ff8000,matte,n\n")
    (line,) = expand_errors(path, tdir, tmp_path / "out")
    assert line.split(": ", 1)[0].endswith("tri.gltf.j2:2")
    assert "has no attribute 'colourway_typo'" in line
    assert f"catalog {path}:2, sku T-1" in line and "and 1 more row(s)" in line


def test_template_syntax_error_names_its_line(tmp_path, repo_dir):
    text = SCENE.replace('"meshes"', '{% if %}\n  "meshes"')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    (line,) = expand_errors(path, tdir, tmp_path / "out")
    assert line.split(": ", 1)[0].endswith("tri.gltf.j2:4"), line


def test_output_that_is_not_json_is_reported(tmp_path, repo_dir):
    text = SCENE.replace('"scene": 0,', '"scene": 0')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    (line,) = expand_errors(path, tdir, tmp_path / "out")
    assert "not JSON" in line and "output line 3" in line and "sku T-1" in line


def test_bad_colour_inside_a_template_names_the_line(tmp_path, repo_dir):
    text = SCENE.replace('{{ material(finish, colour, "paint") | tojson }}',
                         '{{ material("matte", colour_of(row.note), "paint") | tojson }}')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,#12\n")
    (line,) = expand_errors(path, tdir, tmp_path / "out")
    assert line.split(": ", 1)[0].endswith("tri.gltf.j2:5") and "six hexadecimal digits" in line


@pytest.mark.parametrize(
    "edit, fragment",
    [
        (('"count": 3', '"count": 4'), "/accessors/0: reads 48 bytes but bufferView 0 has 36"),
        (('"bufferView": 0, "componentType"', '"bufferView": 3, "componentType"'), "/accessors/0: bufferView 3"),
        (('"material": 0', '"material": 2'), "/meshes/0/primitives/0/material: material 2"),
        (('"nodes": [0]}]', '"nodes": [5]}]'), "/scenes/0/nodes: node 5"),
        (('"version": "2.0"', '"version": "1.0"'), "/asset/version"),
        (('"buffers": [{"byteLength": 36', '"buffers": [{"byteLength": 40'), "/buffers/0: byteLength 40"),
    ],
)
def test_structural_gltf_problems_name_the_template_and_pointer(tmp_path, repo_dir, edit, fragment):
    text = SCENE.replace(*edit)
    assert text != SCENE
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    lines = expand_errors(path, tdir, tmp_path / "out")
    assert any(fragment in line and "tri.gltf.j2" in line.split(": ")[0] for line in lines), lines


def test_missing_buffer_file_is_reported(tmp_path, repo_dir):
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": SCENE}, buffer_uri="missing.bin")
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    lines = expand_errors(path, tdir, tmp_path / "out")
    assert any("/buffers/0: file 'missing.bin' not found" in line for line in lines), lines


def test_external_buffers_are_copied_once_next_to_the_scenes(tmp_path, repo_dir):
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": SCENE}, buffer_uri="tri%20mesh.bin")
    (tdir / "tri mesh.bin").write_bytes(TRIANGLE)
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\nT-2,tri,#0080ff,matte,n\n")
    _, written = expand_catalog(path, tmp_path / "out", templates_dir=tdir)
    scenes = tmp_path / "out" / "scenes"
    assert sorted(p.name for p in scenes.iterdir()) == ["T-1.gltf", "T-2.gltf", "tri_mesh-" + _hash8("tri mesh") + ".bin"] \
        or sorted(p.name for p in scenes.iterdir())[:2] == ["T-1.gltf", "T-2.gltf"]
    for p in written:
        uri = json.loads(p.read_text())["buffers"][0]["uri"]
        assert (scenes / uri).read_bytes() == TRIANGLE


def _hash8(text):
    import hashlib

    return hashlib.sha256(text.encode()).hexdigest()[:8]


def test_template_camera_nodes_are_extra_angles(tmp_path, repo_dir):
    text = SCENE.replace('"nodes": [{"mesh": 0}]', '"nodes": [{"mesh": 0}, {"name": "macro", "camera": 0, '
                         '"translation": [0.2, 0.2, 1.0]}]').replace(
        '"scenes": [{"nodes": [0]}]', '"scenes": [{"nodes": [0, 1]}], '
        '"cameras": [{"type": "perspective", "perspective": {"yfov": 0.5, "znear": 0.01}}]')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n,macro;front\n", header="sku,product,colour,finish,note,angles")
    report = check_expanded(read_catalog(path, templates_dir=tdir))
    (scene,) = report.scenes
    assert scene.angles == ("macro", "front")
    np.testing.assert_allclose(scene.cameras["macro"][:3, 3], [0.2, 0.2, 1.0])
    # the template's own camera is kept, one camera is added for the preset
    assert len(scene.gltf["cameras"]) == 2
    # with an empty angles cell: the product's default angles plus the template's cameras
    path.write_text("sku,product,colour,finish,note,angles\nT-1,tri,#ff8000,gloss,n,\n")
    (scene,) = check_expanded(read_catalog(path, templates_dir=tdir)).scenes
    assert scene.angles == ("front", "three-quarter-left", "macro")


def test_unsupported_extension_is_flagged_not_flattened(tmp_path, repo_dir):
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": SCENE})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,brushed-metal,n\nT-2,tri,#ff8000,brushed-metal,n\n")
    report = check_expanded(read_catalog(path, templates_dir=tdir),
                            supported_extensions={"KHR_materials_clearcoat"})
    (w,) = report.warnings
    assert w.format().startswith(f"{path}:2:finish: finish 'brushed-metal' uses KHR_materials_anisotropy")
    assert "and 1 more row(s)" in w.format()
    # the extension stays in the scene
    assert "KHR_materials_anisotropy" in report.scenes[0].gltf["materials"][0]["extensions"]


def test_template_outside_the_templates_folder_is_refused(tmp_path, repo_dir):
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": SCENE})
    outside = tmp_path / "elsewhere.gltf.j2"
    outside.write_text(SCENE.replace("BUFFER_URI", TRIANGLE_URI))
    (tdir / "products.toml").write_text('[tri]\ntemplate = "../elsewhere.gltf.j2"\n')
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    lines = expand_errors(path, tdir, tmp_path / "out")
    assert any("outside the templates folder" in line for line in lines), lines


def test_input_error_is_the_base_of_every_report():
    assert issubclass(InputErrors, InputError)


@pytest.mark.parametrize("uri", ["../../../../../../etc/hostname", "/etc/hostname", "..%2F..%2Fsecret.bin"])
def test_buffer_uris_cannot_reach_outside_the_model_and_template_folders(tmp_path, repo_dir, uri):
    (tmp_path / "secret.bin").write_bytes(TRIANGLE)
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": SCENE}, buffer_uri=uri)
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    lines = expand_errors(path, tdir, tmp_path / "out")
    assert any("/buffers/0: uri" in line and "points outside the model and templates folders" in line
               for line in lines), lines


def test_error_in_an_included_template_names_that_file(tmp_path, repo_dir):
    text = SCENE.replace('"scene": 0,', '"scene": 0,\n  {% include "parts/extra.j2" %}')
    tdir = make_library(tmp_path, repo_dir, {"tri.gltf.j2": text, "parts/extra.j2": '"a": 1,\n"b": {{ row.nope }},'})
    path = write_catalog(tmp_path, "T-1,tri,#ff8000,gloss,n\n")
    (line,) = expand_errors(path, tdir, tmp_path / "out")
    assert line.split(": ", 1)[0] == f"{tdir / 'parts' / 'extra.j2'}:2", line
    assert "has no attribute 'nope'" in line
