"""Tests for variantshot.imaging.colour against IEC 61966-2-1, CIE 015, glTF 2.0 and colour-science."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from variantshot.imaging import colour as vc

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # colour-science warns that matplotlib is absent
    colour = pytest.importorskip("colour")

# IEC 61966-2-1:1999 printed 4-dp matrices (as reproduced in REFERENCES.md section 1, [read]).
IEC_XYZ_FROM_RGB_4DP = np.array(
    [[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]
)
IEC_RGB_FROM_XYZ_4DP = np.array(
    [[3.2406, -1.5372, -0.4986], [-0.9689, 1.8758, 0.0415], [0.0557, -0.2040, 1.0570]]
)

RNG = np.random.default_rng(20050101)


# --- sRGB transfer ----------------------------------------------------------------------------
def test_every_8bit_code_round_trips():
    # REFERENCES.md section 1 "Test use": decode -> encode -> x255 -> round gives the code back.
    codes = np.arange(256)
    linear = vc.linear_srgb_from_srgb8(codes)
    back = np.rint(vc.srgb_encode(linear) * 255.0).astype(int)
    np.testing.assert_array_equal(back, codes)
    assert np.all(np.diff(linear) > 0)
    assert linear[0] == 0.0 and linear[255] == 1.0


@pytest.mark.parametrize(
    "code, linear",
    # REFERENCES.md section 1 worked values (computed there with colour.cctf_decoding).
    [(1, 0.000304), (10, 0.003035), (64, 0.051269), (118, 0.181164), (124, 0.201556),
     (128, 0.215861), (188, 0.502886), (231, 0.799103)],
)
def test_decode_worked_values(code, linear):
    assert vc.linear_srgb_from_srgb8(code) == pytest.approx(linear, abs=1e-6)


@pytest.mark.parametrize(
    "linear, encoded, tol",
    # REFERENCES.md section 1 worked values; 0.4613561 is also colour-science's own docstring value.
    [(0.0031308, 0.040450, 1e-6), (0.18, 0.4613561, 1e-7), (0.184187, 0.4663, 1e-4),
     (0.2, 0.484529, 1e-6), (0.5, 0.735357, 1e-6), (1.0, 1.0, 1e-12)],
)
def test_encode_worked_values(linear, encoded, tol):
    assert vc.srgb_encode(linear) == pytest.approx(encoded, abs=tol)


def test_transfer_curve_constants_iec():
    # IEC 61966-2-1: the two pieces meet at L = 0.0031308 / V = 0.04045 (continuity to ~1e-8).
    assert vc.srgb_encode(0.0031308) == pytest.approx(12.92 * 0.0031308, abs=1e-12)
    assert vc.srgb_decode(0.04045) == pytest.approx(0.04045 / 12.92, abs=1e-12)
    above = 1.055 * 0.0031308 ** (1 / 2.4) - 0.055
    assert above == pytest.approx(12.92 * 0.0031308, abs=1e-7)


def test_gltf_spec_base_colour_example():
    # glTF 2.0 spec, "Metallic-Roughness Material": texel [64,124,231] -> [0.051, 0.202, 0.799];
    # with baseColorFactor [0.2, 1.0, 0.7] -> [0.0102, 0.202, 0.5593].
    lin = vc.linear_srgb_from_srgb8(np.array([64, 124, 231]))
    np.testing.assert_allclose(lin, [0.051, 0.202, 0.799], atol=1e-3)
    np.testing.assert_allclose(lin * [0.2, 1.0, 0.7], [0.0102, 0.202, 0.5593], atol=1e-3)


def test_transfer_matches_colour_science():
    v = np.concatenate([np.linspace(0.0, 1.0, 1001), RNG.random(1000)])
    np.testing.assert_allclose(vc.srgb_decode(v), colour.cctf_decoding(v, function="sRGB"),
                               rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(vc.srgb_encode(v), colour.cctf_encoding(v, function="sRGB"),
                               rtol=1e-12, atol=1e-15)


def test_integer_arrays_rejected_by_decode():
    # stumpy-style contract: integer input where floats are needed raises TypeError.
    with pytest.raises(TypeError, match="srgb8"):
        vc.srgb_decode(np.array([0, 128, 255]))


def test_out_of_range_8bit_codes_rejected():
    with pytest.raises(ValueError, match=r"\[0, 255\]"):
        vc.linear_srgb_from_srgb8(np.array([0, 256]))


def test_middle_grey():
    # REFERENCES.md section 4: 18 % linear -> 8-bit 118; L* = 50 -> Y = 18.419 % -> 119 (#777777);
    # L*(Y = 0.18) = 49.496.
    assert int(np.rint(vc.srgb_encode(0.18) * 255)) == 118
    y50 = vc.xyz_from_lab(np.array([50.0, 0.0, 0.0]))[1]
    assert y50 == pytest.approx(0.18419, abs=1e-5)
    assert int(np.rint(vc.srgb_encode(y50) * 255)) == 119
    grey = vc.lab_from_linear_srgb(np.array([0.18, 0.18, 0.18]))
    assert grey[0] == pytest.approx(49.496, abs=1e-3)
    np.testing.assert_allclose(grey[1:], 0.0, atol=1e-9)  # a neutral stays neutral under D65


# --- matrices ---------------------------------------------------------------------------------
def test_matrix_agrees_with_iec_4dp_table():
    # IEC 61966-2-1 printed matrix (4 dp); ours is derived from the primaries (REFERENCES.md note:
    # they differ by up to ~1e-4).
    np.testing.assert_allclose(vc.XYZ_FROM_LINEAR_SRGB, IEC_XYZ_FROM_RGB_4DP, atol=2e-4)
    # The printed inverse was rounded from a slightly different matrix; its largest entry
    # (3.2406 vs 3.24097) is 1.1e-4 relative.
    np.testing.assert_allclose(vc.LINEAR_SRGB_FROM_XYZ, IEC_RGB_FROM_XYZ_4DP, rtol=2e-4, atol=2e-4)
    np.testing.assert_allclose(vc.LINEAR_SRGB_FROM_XYZ @ vc.XYZ_FROM_LINEAR_SRGB, np.eye(3),
                               atol=1e-12)


def test_matrix_matches_colour_science_derivation():
    # colour-science derives the normalised primary matrix from the same primaries and white.
    npm = colour.normalised_primary_matrix(
        colour.RGB_COLOURSPACES["sRGB"].primaries, colour.RGB_COLOURSPACES["sRGB"].whitepoint
    )
    np.testing.assert_allclose(vc.XYZ_FROM_LINEAR_SRGB, npm, atol=1e-12)
    # REFERENCES.md section 1, "Matrix derived from primaries (computed here)".
    np.testing.assert_allclose(
        vc.XYZ_FROM_LINEAR_SRGB,
        [[0.4123908, 0.35758434, 0.18048079], [0.21263901, 0.71516868, 0.07219232],
         [0.01933082, 0.11919478, 0.95053215]],
        atol=1e-8,
    )


def test_white_points():
    # RGB (1,1,1) maps to the D65 white; whites match colour-science's xy -> XYZ.
    np.testing.assert_allclose(vc.xyz_from_linear_srgb(np.ones(3)), vc.WHITE_D65_XYZ, atol=1e-12)
    ill = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]
    np.testing.assert_allclose(vc.WHITE_D65_XYZ, colour.xy_to_XYZ(ill["D65"]), atol=1e-12)
    np.testing.assert_allclose(vc.WHITE_D50_XYZ, colour.xy_to_XYZ(ill["D50"]), atol=1e-12)


def test_luminance_weights_rec709():
    # Y row = 0.2126, 0.7152, 0.0722 (IEC 61966-2-1 / ITU-R BT.709, 4 dp).
    np.testing.assert_allclose(vc.luminance(np.eye(3)), [0.2126, 0.7152, 0.0722], atol=1e-4)
    rgb = RNG.random((5, 4, 3))
    np.testing.assert_allclose(vc.luminance(rgb), vc.xyz_from_linear_srgb(rgb)[..., 1], atol=1e-14)


def test_xyz_round_trip_and_shapes():
    rgb = RNG.random((7, 5, 3))
    xyz = vc.xyz_from_linear_srgb(rgb)
    assert xyz.shape == (7, 5, 3) and xyz.dtype == np.float64
    np.testing.assert_allclose(vc.linear_srgb_from_xyz(xyz), rgb, atol=1e-12)
    with pytest.raises(ValueError, match="3 components"):
        vc.xyz_from_linear_srgb(np.ones((4, 2)))


# --- CIELAB -----------------------------------------------------------------------------------
def test_lab_colour_science_doctest_value():
    # colour-science XYZ_to_Lab docstring (REFERENCES.md section 2, [read]).
    lab = vc.lab_from_xyz(np.array([0.20654008, 0.12197225, 0.05136952]))
    np.testing.assert_allclose(lab, [41.5278752, 52.6385830, 26.9231792], atol=1e-5)


def test_lab_matches_colour_science_both_ways():
    xyz = RNG.random((500, 3)) * vc.WHITE_D65_XYZ
    xyz[:50] *= 0.005  # exercise the linear segment below (6/29)^3
    lab = vc.lab_from_xyz(xyz)
    np.testing.assert_allclose(lab, colour.XYZ_to_Lab(xyz), atol=1e-9)
    np.testing.assert_allclose(vc.xyz_from_lab(lab), colour.Lab_to_XYZ(lab), atol=1e-12)
    d50 = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D50"]
    np.testing.assert_allclose(vc.lab_from_xyz(xyz, vc.WHITE_D50_XYZ),
                               colour.XYZ_to_Lab(xyz, d50), atol=1e-9)
    np.testing.assert_allclose(vc.xyz_from_lab(lab, vc.WHITE_D50_XYZ),
                               colour.Lab_to_XYZ(lab, d50), atol=1e-12)


def test_lab_from_srgb8_matches_colour_science():
    codes = RNG.integers(0, 256, size=(200, 3))
    ours = vc.lab_from_srgb8(codes)
    rgb_cs = colour.RGB_COLOURSPACES["sRGB"].copy()
    rgb_cs.use_derived_transformation_matrices(True)
    xyz = colour.RGB_to_XYZ(codes / 255.0, rgb_cs, apply_cctf_decoding=True)
    np.testing.assert_allclose(ours, colour.XYZ_to_Lab(xyz), atol=1e-8)
    np.testing.assert_allclose(vc.linear_srgb_from_lab(ours), vc.linear_srgb_from_srgb8(codes),
                               atol=1e-12)


# --- Bradford ---------------------------------------------------------------------------------
def test_bradford_matrix_matches_colour_science():
    np.testing.assert_array_equal(vc.BRADFORD_LMS_FROM_XYZ, colour.adaptation.CAT_BRADFORD)


def test_bradford_adapt_matches_colour_science():
    xyz = RNG.random((100, 3))
    ours = vc.bradford_adapt(xyz, vc.WHITE_D65_XYZ, vc.WHITE_D50_XYZ)
    ref = colour.adaptation.chromatic_adaptation_VonKries(
        xyz, vc.WHITE_D65_XYZ, vc.WHITE_D50_XYZ, transform="Bradford"
    )
    np.testing.assert_allclose(ours, ref, atol=1e-12)
    # Whites map onto each other and the transform inverts.
    np.testing.assert_allclose(vc.bradford_adapt(vc.WHITE_D65_XYZ, vc.WHITE_D65_XYZ,
                                                 vc.WHITE_D50_XYZ), vc.WHITE_D50_XYZ, atol=1e-12)
    np.testing.assert_allclose(vc.bradford_adapt(ours, vc.WHITE_D50_XYZ, vc.WHITE_D65_XYZ), xyz,
                               atol=1e-12)


def test_lab_d50_to_d65_via_bradford_matches_colour_science():
    ill = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]
    lab_d50 = np.column_stack([RNG.uniform(5, 95, 50), RNG.uniform(-60, 60, 50),
                               RNG.uniform(-60, 60, 50)])
    ours = vc.lab_from_xyz(
        vc.bradford_adapt(vc.xyz_from_lab(lab_d50, vc.WHITE_D50_XYZ), vc.WHITE_D50_XYZ,
                          vc.WHITE_D65_XYZ)
    )
    xyz = colour.Lab_to_XYZ(lab_d50, ill["D50"])
    xyz = colour.chromatic_adaptation(xyz, colour.xy_to_XYZ(ill["D50"]),
                                      colour.xy_to_XYZ(ill["D65"]), method="Von Kries",
                                      transform="Bradford")
    np.testing.assert_allclose(ours, colour.XYZ_to_Lab(xyz, ill["D65"]), atol=1e-9)


def test_chart_patch_1976_vs_published_srgb():
    # McCamy et al. 1976 xyY under illuminant C vs Pascale 2006 8-bit sRGB (REFERENCES.md section 3):
    # different data sets, so compare in dE00 with the ~2-3 tolerance REFERENCES.md recommends.
    ill = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]
    patches = {  # name: (x, y, Y), (R, G, B)
        "dark skin": ((0.4002, 0.3504, 0.1005), (115, 82, 68)),
        "white 9.5": ((0.3101, 0.3163, 0.9001), (243, 243, 242)),
        "neutral 5": ((0.3101, 0.3163, 0.1977), (122, 122, 121)),
        "black 2": ((0.3101, 0.3163, 0.0313), (52, 52, 52)),
        "red": ((0.5385, 0.3129, 0.1200), (175, 54, 60)),
    }
    white_c = colour.xy_to_XYZ(ill["C"])
    for name, (xyY, rgb8) in patches.items():
        xyz_c = colour.xyY_to_XYZ(np.array(xyY))
        lab = vc.lab_from_xyz(vc.bradford_adapt(xyz_c, white_c, vc.WHITE_D65_XYZ))
        de = vc.delta_e_2000(lab, vc.lab_from_srgb8(np.array(rgb8)))
        assert de < 3.0, name


# --- CIEDE2000 against colour-science on random pairs -------------------------------------------
def test_delta_e_2000_matches_colour_science_random():
    lab1 = np.column_stack([RNG.uniform(0, 100, 2000), RNG.uniform(-100, 100, 2000),
                            RNG.uniform(-100, 100, 2000)])
    lab2 = lab1 + RNG.normal(0, 8, (2000, 3))
    ref = colour.difference.delta_E_CIE2000(lab1, lab2)
    ours = vc.delta_e_2000(lab1, lab2)
    # Pairs whose hue difference is within 1e-9 deg of 180 may legitimately land either side.
    np.testing.assert_allclose(ours, ref, atol=1e-9)
    np.testing.assert_allclose(vc.delta_e_2000(lab2, lab1), ours, atol=1e-12)
    np.testing.assert_allclose(vc.delta_e_2000(lab1, lab2, k_l=2.0),
                               colour.difference.delta_E_CIE2000(lab1, lab2, textiles=True),
                               atol=1e-9)


def test_delta_e_2000_broadcasts_and_zero():
    lab = RNG.uniform(-50, 50, (4, 3))
    d = vc.delta_e_2000(lab, lab[0])
    assert d.shape == (4,) and d[0] == 0.0 and np.all(d[1:] > 0)
    assert vc.delta_e_2000([50, 0, 0], [50, 0, 0]) == 0.0  # zero chroma: h' = 0 branch
