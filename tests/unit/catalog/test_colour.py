"""Catalog colour cells against colour-science (PyPI colour-science, the reference library).

Oracle calls (colour-science 0.4.x API, names checked in REFERENCES.md §2):
``colour.cctf_decoding(v, function="sRGB")`` (IEC 61966-2-1 decode), ``colour.Lab_to_XYZ``,
``colour.XYZ_to_RGB(..., "sRGB", illuminant=..., chromatic_adaptation_transform=...)``,
``colour.adaptation.chromatic_adaptation_VonKries(XYZ, XYZ_w, XYZ_wr, transform="Bradford")``,
``colour.Lab_to_LCHab``, ``colour.delta_E(..., method="CIE 2000")``.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from variantshot.catalog.colour import ColourSyntaxError, parse_colour

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    colour = pytest.importorskip("colour")

CMFS = "CIE 1931 2 Degree Standard Observer"
D65_XY = colour.CCS_ILLUMINANTS[CMFS]["D65"]
D50_XY = colour.CCS_ILLUMINANTS[CMFS]["D50"]


def _linear_srgb_from_xyz_d65(xyz):
    # no adaptation: the XYZ are already relative to D65, the sRGB white
    return colour.XYZ_to_RGB(xyz, colour.RGB_COLOURSPACES["sRGB"], illuminant=D65_XY,
                             chromatic_adaptation_transform=None, apply_cctf_encoding=False)


@pytest.mark.parametrize("text", ["#000000", "#ffffff", "#3A7BD5", "#808080", "#0a0b0c", "#ff0000", "#d9c7a7"])
def test_hex_decodes_to_linear_like_colour_science(text):
    codes = np.array([int(text[i:i + 2], 16) for i in (1, 3, 5)]) / 255.0
    expected = colour.cctf_decoding(codes, function="sRGB")  # IEC 61966-2-1 decode
    spec = parse_colour(text)
    np.testing.assert_allclose(spec.linear, expected, atol=1e-12)
    np.testing.assert_allclose(spec.srgb, codes, atol=1e-12)
    assert spec.hex == text.lower()
    assert spec.in_gamut


def test_hex_lab_matches_colour_science():
    spec = parse_colour("#3a7bd5")
    xyz = colour.RGB_to_XYZ(np.asarray(spec.linear), colour.RGB_COLOURSPACES["sRGB"], illuminant=D65_XY,
                            chromatic_adaptation_transform=None, apply_cctf_decoding=False)
    # 1e-2 in L*a*b* units: the two sides' sRGB matrices differ by ~1e-4 (REFERENCES §1: derived
    # vs printed), which moves a*/b* of a saturated blue by ~4e-3
    np.testing.assert_allclose(spec.lab, colour.XYZ_to_Lab(xyz, D65_XY), atol=1e-2)


@pytest.mark.parametrize("lab", [(50.0, 20.0, -30.0), (62.0, -14.0, 12.0), (45.0, -8.0, -24.0), (90.0, 0.0, 0.0),
                                 (20.0, 5.0, 5.0), (78.0, -1.0, -3.0)])
def test_lab_d65_to_linear_srgb_like_colour_science(lab):
    expected = _linear_srgb_from_xyz_d65(colour.Lab_to_XYZ(np.array(lab), D65_XY))
    assert np.all((expected >= 0) & (expected <= 1)), "the chosen colours are inside sRGB"
    spec = parse_colour(f"lab({lab[0]}, {lab[1]}, {lab[2]})")
    # 2e-4: our matrices are derived from the IEC primaries, colour-science's too; both agree
    # far better than that, the tolerance only covers the white-point rounding (REFERENCES §1)
    np.testing.assert_allclose(spec.linear, expected, atol=2e-4)
    np.testing.assert_allclose(spec.lab, lab, atol=1e-12)
    assert spec.space == "lab-d65" and spec.in_gamut


@pytest.mark.parametrize("lab50", [(52.0, 48.0, 38.0), (50.0, 20.0, -30.0), (70.0, -10.0, 25.0), (96.42, 0.0, 0.0)])
def test_lab_d50_is_bradford_adapted_to_d65_like_colour_science(lab50):
    xyz_d50 = colour.Lab_to_XYZ(np.array(lab50), D50_XY)
    xyz_d65 = colour.adaptation.chromatic_adaptation_VonKries(
        xyz_d50, colour.xy_to_XYZ(D50_XY), colour.xy_to_XYZ(D65_XY), transform="Bradford")
    spec = parse_colour(f"lab50({lab50[0]}, {lab50[1]}, {lab50[2]})")
    np.testing.assert_allclose(spec.lab, colour.XYZ_to_Lab(xyz_d65, D65_XY), atol=2e-3)
    expected = np.clip(_linear_srgb_from_xyz_d65(xyz_d65), 0, 1)
    np.testing.assert_allclose(spec.linear, expected, atol=2e-4)
    assert spec.space == "lab-d50"


def test_d50_white_maps_to_d65_white():
    # Bradford maps the source white onto the destination white exactly (von Kries property)
    spec = parse_colour("lab50(100, 0, 0)")
    np.testing.assert_allclose(spec.linear, (1.0, 1.0, 1.0), atol=1e-6)


@pytest.mark.parametrize("lab", [(60.0, 120.0, 0.0), (90.0, -100.0, 100.0), (30.0, 60.0, -110.0), (85.0, 0.0, 100.0)])
def test_out_of_gamut_lab_keeps_lightness_and_hue(lab):
    raw = _linear_srgb_from_xyz_d65(colour.Lab_to_XYZ(np.array(lab), D65_XY))
    assert np.any(raw < 0) or np.any(raw > 1), "chosen outside sRGB (colour-science says so)"
    spec = parse_colour(f"lab({lab[0]}, {lab[1]}, {lab[2]})")
    assert not spec.in_gamut
    lin = np.asarray(spec.linear)
    assert np.all(lin >= 0) and np.all(lin <= 1)
    xyz = colour.RGB_to_XYZ(lin, colour.RGB_COLOURSPACES["sRGB"], illuminant=D65_XY,
                            chromatic_adaptation_transform=None, apply_cctf_decoding=False)
    lch_mapped = colour.Lab_to_LCHab(colour.XYZ_to_Lab(xyz, D65_XY))
    lch_asked = colour.Lab_to_LCHab(np.array(lab))
    assert abs(lch_mapped[0] - lch_asked[0]) < 0.05  # same L*
    assert abs((lch_mapped[2] - lch_asked[2] + 180) % 360 - 180) < 0.2  # same hue angle
    assert lch_mapped[1] < lch_asked[1]  # less chroma
    # the mapped colour sits on the gamut boundary: one channel at 0 or 1
    assert np.min(np.minimum(lin, 1 - lin)) < 1e-4
    de = colour.delta_E(np.array(lab), colour.XYZ_to_Lab(xyz, D65_XY), method="CIE 2000")
    assert spec.delta_e_mapping == pytest.approx(float(de), abs=0.05)


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("#fff", "six hexadecimal digits"),
        ("#gg0000", "six hexadecimal digits"),
        ("lab(101, 0, 0)", "L* = 101 is outside [0, 100]"),
        ("lab(-1, 0, 0)", "L* = -1 is outside"),
        ("lab(50, 130, 0)", "a* = 130 is outside [-128, 127]"),
        ("lab50(50, 0, -129)", "b* = -129 is outside"),
        ("lab(50, 0)", "three numbers"),
        ("red", "is not a colour"),
        ("", "empty"),
        ("rgb(1, 2, 3)", "is not a colour"),
    ],
)
def test_bad_colours_say_why(text, fragment):
    with pytest.raises(ColourSyntaxError) as info:
        parse_colour(text)
    assert fragment in str(info.value)
    assert "#RRGGBB" in info.value.accepted


def test_lab_syntax_is_forgiving_about_spaces_and_case():
    a = parse_colour("lab(50, 20, -30)")
    for text in ("LAB(50,20,-30)", "lab( 50 , 20 , -30 )", "lab(50 20 -30)", "Lab(5e1, 20.0, -3e1)"):
        assert parse_colour(text).linear == a.linear


def test_batch_parser_agrees_with_the_single_parser():
    from variantshot.catalog.colour import parse_colours

    texts = ["#3a7bd5", "#ffffff", "lab(50, 20, -30)", "lab50(52, 48, 38)", "lab(60, 120, 0)", "lab50(90, -100, 100)",
             "#fff", "lab(101, 0, 0)", "red", " #00ff00 ", "LAB(5e1,0,0)"]
    batch = parse_colours(texts)
    for t in texts:
        try:
            single = parse_colour(t)
        except ColourSyntaxError as exc:
            assert isinstance(batch[t], ColourSyntaxError) and str(batch[t]) == str(exc)
            continue
        got = batch[t]
        assert got.space == single.space and got.in_gamut == single.in_gamut
        np.testing.assert_allclose(got.linear, single.linear, atol=1e-6)
        np.testing.assert_allclose(got.lab, single.lab, atol=1e-9)
        assert got.delta_e_mapping == pytest.approx(single.delta_e_mapping, abs=1e-4)
