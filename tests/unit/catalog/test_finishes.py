"""The finish library: data files, their glTF material blocks, user extension and bad files."""

from __future__ import annotations

import pytest

from variantshot.catalog.colour import parse_colour
from variantshot.catalog.finishes import load_finishes, unsupported_extensions
from variantshot.errors import InputErrors

REQUIRED = ["matte", "satin", "gloss", "soft-touch", "metallic", "brushed-metal", "chrome", "clear-glass",
            "frosted-glass", "fabric"]

# glTF 2.0 material properties and the KHR extension each finish needs (extension READMEs in
# KhronosGroup/glTF/extensions/2.0/Khronos)
EXPECTED_EXTENSIONS = {
    "gloss": "KHR_materials_clearcoat",
    "metallic": "KHR_materials_clearcoat",
    "clear-glass": "KHR_materials_transmission",
    "frosted-glass": "KHR_materials_transmission",
    "fabric": "KHR_materials_sheen",
    "brushed-metal": "KHR_materials_anisotropy",
    "soft-touch": "KHR_materials_specular",
}


@pytest.fixture(scope="module")
def library(repo_dir):
    return load_finishes(repo_dir / "templates" / "finishes")


def test_library_has_the_required_finishes(library):
    assert set(REQUIRED) <= set(library)


@pytest.mark.parametrize("name, ext", sorted(EXPECTED_EXTENSIONS.items()))
def test_finishes_use_their_khr_extension(library, name, ext):
    assert ext in library[name].extensions


def test_metals_are_metallic_and_glass_transmits(library):
    for name in ("chrome", "brushed-metal"):
        assert library[name].material["pbrMetallicRoughness"]["metallicFactor"] == 1.0
    assert library["chrome"].material["pbrMetallicRoughness"]["roughnessFactor"] < \
        library["brushed-metal"].material["pbrMetallicRoughness"]["roughnessFactor"]
    for name in ("clear-glass", "frosted-glass"):
        assert library[name].material["extensions"]["KHR_materials_transmission"]["transmissionFactor"] == 1.0
    assert library["matte"].material["pbrMetallicRoughness"]["roughnessFactor"] > \
        library["satin"].material["pbrMetallicRoughness"]["roughnessFactor"] > \
        library["gloss"].material["pbrMetallicRoughness"]["roughnessFactor"]


def test_colour_goes_to_its_targets(library):
    c = parse_colour("#336699")
    fabric = library["fabric"].material_for(c, "grille")
    assert fabric["name"] == "grille"
    assert fabric["pbrMetallicRoughness"]["baseColorFactor"] == [*c.linear, 1.0]
    assert fabric["extensions"]["KHR_materials_sheen"]["sheenColorFactor"] == list(c.linear)
    glass = library["clear-glass"].material_for(c)
    assert glass["extensions"]["KHR_materials_volume"]["attenuationColor"] == list(c.linear)
    assert glass["pbrMetallicRoughness"]["baseColorFactor"] == [1.0, 1.0, 1.0, 1.0]
    assert "name" not in library["matte"].material, "the library entry itself is not modified"


def test_unsupported_extension_is_named(library):
    supported = {"KHR_materials_clearcoat", "KHR_materials_sheen"}
    assert unsupported_extensions(library["brushed-metal"], supported) == ["KHR_materials_anisotropy"]
    assert unsupported_extensions(library["gloss"], supported) == []


def test_user_folder_extends_and_overrides(tmp_path, repo_dir):
    user = tmp_path / "mine"
    user.mkdir()
    (user / "velvet.toml").write_text('[material.pbrMetallicRoughness]\nroughnessFactor = 1.0\n')
    (user / "matte.toml").write_text('description = "ours"\n[material.pbrMetallicRoughness]\nroughnessFactor = 0.95\n')
    lib = load_finishes(repo_dir / "templates" / "finishes", user)
    assert lib["velvet"].material["pbrMetallicRoughness"]["roughnessFactor"] == 1.0
    assert lib["matte"].description == "ours"


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("[material\n", "is not valid TOML"),
        ("description = 1\n", "has no [material] table"),
        ("[material]\nshininess = 3\n", "material.shininess is not a glTF material property"),
        ("[material.pbrMetallicRoughness]\nroughnessFactor = 1.5\n", "roughnessFactor = 1.5 is not in [0, 1]"),
        ('colour_targets = ["KHR_materials_sheen.sheenColorFactor"]\n[material]\n', "names no property"),
    ],
)
def test_bad_finish_files_name_the_file(tmp_path, text, fragment):
    (tmp_path / "broken.toml").write_text(text)
    with pytest.raises(InputErrors) as info:
        load_finishes(tmp_path)
    (err,) = info.value.errors
    assert err.file == str(tmp_path / "broken.toml") and fragment in err.format()
