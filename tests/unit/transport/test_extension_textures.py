"""The KHR_materials_* extensions' own textures: value = factor x texture channel, as each
extension's README defines it (KHR_materials_transmission, _volume, _clearcoat, _sheen, _specular,
_anisotropy; glTF 2.0 §3.9.2 for sRGB colour textures; REFERENCES §5)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from variantshot.errors import RenderError
from variantshot.geometry.scene import CLAMP_TO_EDGE, NEAREST, Material, Texture, make_scene
from variantshot.transport import bsdf_kernels as bk
from variantshot.transport.materials import pack_materials, resolve_params, resolve_textured

TRI = ([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]])
# four different stored values per texel so that reading the wrong channel gives a wrong value
TEXEL = (0.25, 0.5, 0.75, 0.125)


def texture(pixels) -> Texture:
    """Nearest-filtered, clamped texture (each lookup returns one texel exactly)."""
    px = np.asarray(pixels, np.float32)
    if px.ndim == 1:
        px = px.reshape(1, 1, 4)
    return Texture(pixels=px, mag_filter=NEAREST, wrap_s=CLAMP_TO_EDGE, wrap_t=CLAMP_TO_EDGE)


def srgb_to_linear(c):
    """IEC 61966-2-1:1999 decoding (glTF 2.0 §3.9.2), written out here."""
    c = np.asarray(c, np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def packed(materials, textures=()):
    scene = make_scene(*TRI, materials=list(materials), textures=list(textures), source="part.gltf")
    return pack_materials(scene)


# (extension, texture key, factors of the extension object, the factor key(s) the texture
#  multiplies, channel indices, sRGB)
SLOTS = [
    ("KHR_materials_transmission", "transmissionTexture", {"transmissionFactor": 0.5},
     "transmissionFactor", (0,), False),
    ("KHR_materials_clearcoat", "clearcoatTexture", {"clearcoatFactor": 0.5, "clearcoatRoughnessFactor": 0.5},
     "clearcoatFactor", (0,), False),
    ("KHR_materials_clearcoat", "clearcoatRoughnessTexture", {"clearcoatFactor": 1.0, "clearcoatRoughnessFactor": 0.5},
     "clearcoatRoughnessFactor", (1,), False),
    ("KHR_materials_sheen", "sheenColorTexture", {"sheenColorFactor": [0.5, 1.0, 0.25], "sheenRoughnessFactor": 0.5},
     "sheenColorFactor", (0, 1, 2), True),
    ("KHR_materials_sheen", "sheenRoughnessTexture", {"sheenColorFactor": [1, 1, 1], "sheenRoughnessFactor": 0.5},
     "sheenRoughnessFactor", (3,), False),
    ("KHR_materials_specular", "specularTexture", {"specularFactor": 0.5}, "specularFactor", (3,), False),
    ("KHR_materials_specular", "specularColorTexture", {"specularColorFactor": [0.5, 1.0, 2.0]},
     "specularColorFactor", (0, 1, 2), True),
    ("KHR_materials_anisotropy", "anisotropyTexture", {"anisotropyStrength": 0.5}, "anisotropyStrength", (2,), False),
]
IDS = [s[1] for s in SLOTS]


def _materials(ext, key, factors, factor_key, channels, srgb, texel=TEXEL):
    """The textured material and the untextured one whose factor is factor x channel."""
    stored = np.asarray(texel, np.float32)
    value = stored.astype(np.float64)
    if srgb:  # the atlas holds the decoded texel (float32)
        value[:3] = srgb_to_linear(value[:3]).astype(np.float32)
    f = factors[factor_key]
    if isinstance(f, list):
        prod = [f[i] * float(np.float32(value[c])) for i, c in enumerate(channels)]
    else:
        prod = f * float(np.float32(value[channels[0]]))
    base = dict(base_colour_factor=(0.5, 0.5, 0.5, 1), metallic_factor=0.0, roughness_factor=0.5)
    textured = Material(name="textured", extensions={ext: dict(factors, **{key: {"index": 0}})}, **base)
    plain = Material(name="plain", extensions={ext: dict(factors, **{factor_key: prod})}, **base)
    return textured, plain, stored


@pytest.mark.parametrize("ext, key, factors, factor_key, channels, srgb", SLOTS, ids=IDS)
def test_factor_times_texture_channel_equals_the_product_factor(ext, key, factors, factor_key, channels, srgb):
    # each README: "If both factors and textures are present, the factor value acts as a linear
    # multiplier for the corresponding texture values" (e.g. clearcoat = clearcoatFactor x
    # clearcoatTexture.r); the channel of each texture as the README's property table names it.
    # Factors are powers of two, so factor x texel is exact in float32 and the records must be equal.
    textured, plain, stored = _materials(ext, key, factors, factor_key, channels, srgb)
    table, atlas = packed([textured, plain], [texture(stored)])
    got = resolve_textured(table, atlas, 0, [[0.5, 0.5]])[0, :bk.N_BSDF]
    want = resolve_params(table[1])
    np.testing.assert_array_equal(got, want)
    # and it differs from the factor alone (the texture is really read)
    assert not np.array_equal(resolve_params(table[0]), want)


@pytest.mark.parametrize("ext, key, factors, factor_key, channels, srgb", SLOTS, ids=IDS)
def test_another_channel_would_give_another_value(ext, key, factors, factor_key, channels, srgb):
    # the channel mapping: with the channels' values permuted, the result follows the named channel
    textured, plain, stored = _materials(ext, key, factors, factor_key, channels, srgb,
                                         texel=(0.125, 0.75, 0.5, 0.25))
    table, atlas = packed([textured, plain], [texture(stored)])
    np.testing.assert_array_equal(resolve_textured(table, atlas, 0, [[0.5, 0.5]])[0, :bk.N_BSDF],
                                  resolve_params(table[1]))


def test_two_halves_give_two_values_and_transform_and_texcoord_apply():
    # a 2 x 1 texture, nearest: u < 0.5 reads the left texel, u > 0.5 the right (glTF 2.0 §3.8.4.1);
    # KHR_texture_transform offset (0.5, 0) and texCoord 1 on the extension's textureInfo
    left, right = (0.25, 0.5, 0.5, 1.0), (0.75, 0.5, 0.5, 1.0)
    tex = texture(np.array([[left, right]]))
    m = Material(name="split", extensions={"KHR_materials_transmission": {
        "transmissionFactor": 0.5, "transmissionTexture": {"index": 0}}})
    moved = Material(name="moved", extensions={"KHR_materials_transmission": {
        "transmissionFactor": 0.5, "transmissionTexture": {
            "index": 0, "texCoord": 1, "extensions": {"KHR_texture_transform": {"offset": [0.5, 0.0]}}}}})
    table, atlas = packed([m, moved], [tex])
    got = resolve_textured(table, atlas, 0, [[0.25, 0.5], [0.75, 0.5]])
    assert got[0, 11] == 0.5 * 0.25 and got[1, 11] == 0.5 * 0.75
    # set 0 at the left half, set 1 at u = 0.25, shifted by 0.5 -> the right texel
    got = resolve_textured(table, atlas, 1, [[0.25, 0.5]], [[0.25, 0.5]])
    assert got[0, 11] == 0.5 * 0.75
    got = resolve_textured(table, atlas, 1, [[0.75, 0.5]], [[-0.25, 0.5]])
    assert got[0, 11] == 0.5 * 0.25


def test_colour_textures_are_srgb_decoded():
    # KHR_materials_sheen / _specular: sheenColorTexture and specularColorTexture are sRGB
    # (IEC 61966-2-1 decoding, written out above); the data textures are linear
    stored = np.array([0.02, 0.5, 0.9, 0.6], np.float32)
    m = Material(name="velvet", extensions={
        "KHR_materials_sheen": {"sheenColorFactor": [1, 1, 1], "sheenRoughnessFactor": 1.0,
                                "sheenColorTexture": {"index": 0}, "sheenRoughnessTexture": {"index": 0}},
        "KHR_materials_specular": {"specularColorTexture": {"index": 0}, "specularTexture": {"index": 0}}})
    table, atlas = packed([m], [texture(stored)])
    r = resolve_textured(table, atlas, 0, [[0.5, 0.5]])[0]
    lin = srgb_to_linear(stored[:3])
    np.testing.assert_allclose(r[16:19], lin, rtol=1e-6)  # sheen colour
    assert r[19] == pytest.approx(0.6, rel=1e-7)  # sheen roughness: alpha channel, linear
    # specular: f0 = min(0.04 x colour, 1) x specular (A, linear), f90 = specular
    np.testing.assert_allclose(r[8:11], 0.04 * lin * 0.6, rtol=1e-6)
    assert r[7] == pytest.approx(0.6, rel=1e-7)
    # one texture used as colour and as data: two atlas entries
    assert atlas.table.shape[0] == 2


def test_anisotropy_texture_direction_and_strength():
    # KHR_materials_anisotropy: red/green [0, 1] -> [-1, 1] direction in (tangent, bitangent)
    # space, normalised, then rotated counter-clockwise by anisotropyRotation; blue x strength
    tex = texture(np.array([[(0.5, 1.0, 0.5, 1.0), (1.0, 1.0, 1.0, 1.0)]]))
    m = Material(name="brushed", metallic_factor=1.0, roughness_factor=0.5, extensions={"KHR_materials_anisotropy": {
        "anisotropyStrength": 0.8, "anisotropyRotation": math.pi / 2, "anisotropyTexture": {"index": 0}}})
    table, atlas = packed([m], [tex])
    r = resolve_textured(table, atlas, 0, [[0.25, 0.5], [0.75, 0.5]])
    # texel (0.5, 1) -> (0, 1), rotated by pi/2 -> (-1, 0); strength 0.8 x 0.5
    np.testing.assert_allclose(r[0, -2:], [-1.0, 0.0], atol=1e-7)
    s = 0.8 * 0.5
    assert r[0, 20] == pytest.approx(0.25 + 0.75 * s * s) and r[0, 21] == pytest.approx(0.25)
    # texel (1, 1) -> (1, 1)/sqrt 2, rotated by pi/2 -> (-1, 1)/sqrt 2; strength 0.8
    np.testing.assert_allclose(r[1, -2:], [-math.sqrt(0.5), math.sqrt(0.5)], atol=1e-7)
    assert r[1, 20] == pytest.approx(0.25 + 0.75 * 0.64)
    # without a texture: the README's default texel (1, 0.5, 1) = the tangent rotated, strength 1
    plain = Material(name="plain", metallic_factor=1.0, roughness_factor=0.5,
                     extensions={"KHR_materials_anisotropy": {"anisotropyStrength": 0.8, "anisotropyRotation": 0.3}})
    table, atlas = packed([plain])
    r = resolve_textured(table, atlas, 0, [[0.5, 0.5]])[0]
    np.testing.assert_allclose(r[-2:], [math.cos(0.3), math.sin(0.3)], rtol=1e-7)


def test_clearcoat_normal_slot_and_scale_and_thickness_recorded():
    # KHR_materials_clearcoat: clearcoatNormalTexture is a normalTextureInfo (its own scale);
    # KHR_materials_volume thicknessTexture is packed but a path tracer does not use thickness
    m = Material(name="lacquer", extensions={
        "KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatNormalTexture": {"index": 1, "scale": 0.5}},
        "KHR_materials_volume": {"thicknessFactor": 0.1, "thicknessTexture": {"index": 0}}})
    thick_only = Material(name="thick", extensions={
        "KHR_materials_volume": {"thicknessFactor": 0.1, "thicknessTexture": {"index": 0}}})
    table, atlas = packed([m, thick_only], [texture(TEXEL), texture(TEXEL)])
    assert table[0, 96] >= 0 and table[0, 144] == 0.5 and table[0, 145] == 1.0
    assert table[1, 72] >= 0 and table[1, 145] == 0.0  # thickness alone: nothing to sample


@pytest.mark.parametrize("info, match", [
    ({"index": 3}, r"KHR_materials_clearcoat.clearcoatTexture names texture 3, which does not exist .*0\.\.0"),
    ({"index": -1}, r"KHR_materials_clearcoat.clearcoatTexture: index -1 is not accepted \(an integer >= 0\)"),
    ({"texCoord": 0}, r"KHR_materials_clearcoat.clearcoatTexture: index is missing"),
    ("tex0", r"KHR_materials_clearcoat.clearcoatTexture: 'tex0' is not accepted \(a textureInfo object"),
])
def test_bad_extension_texture_names_material_and_extension(info, match):
    m = Material(name="paint", extensions={"KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatTexture": info}})
    with pytest.raises(RenderError, match=r"part.gltf -> material 0 \('paint'\): " + match):
        packed([m], [texture(TEXEL)])


def test_loader_parses_extension_textures(tmp_path):
    # the loader parses textureInfo inside KHR_materials_* like the core ones (index, texCoord,
    # KHR_texture_transform, normalTextureInfo.scale) and checks the index
    import json

    from variantshot.errors import SceneError
    from variantshot.geometry.gltf import load_gltf

    doc = {"asset": {"version": "2.0"}, "textures": [{}, {}],
           "materials": [{"extensions": {"KHR_materials_clearcoat": {
               "clearcoatFactor": 1.0,
               "clearcoatTexture": {"index": 1, "extensions": {"KHR_texture_transform": {"texCoord": 1}}},
               "clearcoatNormalTexture": {"index": 0, "scale": 0.25}}}}]}
    path = tmp_path / "coat.gltf"
    path.write_text(json.dumps(doc))
    (m,) = load_gltf(path).materials
    cc = m.extension_textures[("KHR_materials_clearcoat", "clearcoatTexture")]
    assert cc.index == 1 and cc.tex_coord == 1
    assert m.extension_textures[("KHR_materials_clearcoat", "clearcoatNormalTexture")].scale == 0.25
    doc["materials"][0]["extensions"]["KHR_materials_clearcoat"]["clearcoatTexture"]["index"] = 7
    path.write_text(json.dumps(doc))
    with pytest.raises(SceneError, match=r"materials\[0\]\.extensions\.KHR_materials_clearcoat\.clearcoatTexture"):
        load_gltf(path)
