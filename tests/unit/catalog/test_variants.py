"""KHR_materials_variants, against the Khronos validator's own test file and facts.json.

facts.json: variants ``variant0``, ``variant1``; the primitive maps material 0 -> variant 1 and
material 1 -> variant 0 (KHR_materials_variants specification: a mapping lists the variants in
which its material is used).
"""

from __future__ import annotations

import json

import pytest

from variantshot.catalog.variants import apply_variant, strip_variants, variant_names


@pytest.fixture()
def doc(gltf_samples):
    return json.loads((gltf_samples / "Validator_KHR_materials_variants.gltf").read_text())


def test_names_in_file_order(doc, gltf_samples):
    facts = json.loads((gltf_samples / "facts.json").read_text())["files"]["Validator_KHR_materials_variants.gltf"]
    assert variant_names(doc) == facts["material_variants"] == ["variant0", "variant1"]


@pytest.mark.parametrize("name, material", [("variant1", 0), ("variant0", 1)])
def test_baking_a_variant_sets_the_mapped_material(doc, name, material):
    baked = apply_variant(doc, name)
    prim = baked["meshes"][0]["primitives"][0]
    assert prim["material"] == material
    assert "KHR_materials_variants" not in (prim.get("extensions") or {})
    assert "KHR_materials_variants" not in baked.get("extensionsUsed", [])
    assert "KHR_materials_sheen" in baked["extensionsUsed"]  # other extensions stay declared
    assert variant_names(baked) == []
    assert "KHR_materials_variants" in doc["extensionsUsed"], "the input is not modified"


def test_unknown_variant_raises(doc):
    with pytest.raises(KeyError):
        apply_variant(doc, "variant2")


def test_strip_keeps_default_materials(doc):
    stripped = strip_variants(doc)
    assert stripped["meshes"][0]["primitives"][0].get("material") == doc["meshes"][0]["primitives"][0].get("material")
    assert variant_names(stripped) == []


def test_catalog_star_gives_one_scene_per_entry(tmp_path, repo_dir):
    from variantshot.catalog.expand import check_expanded
    from variantshot.catalog.validate import read_catalog

    path = tmp_path / "c.csv"
    path.write_text("sku,product,colour,finish,material_variant\nS-1,speaker,#445566,matte,*\n"
                    "S-2,speaker,#445566,matte,sand-grille\n")
    report = check_expanded(read_catalog(path, templates_dir=repo_dir / "templates"))
    assert [(s.sku, s.material_variant) for s in report.scenes] == [
        ("S-1-charcoal-grille", "charcoal-grille"), ("S-1-sand-grille", "sand-grille"), ("S-2", "sand-grille")]
    for s in report.scenes:
        grille = next(m for m in s.gltf["meshes"] if m["name"] == "grille")["primitives"][0]
        assert s.gltf["materials"][grille["material"]]["name"] == "grille-" + s.material_variant.split("-")[0]
