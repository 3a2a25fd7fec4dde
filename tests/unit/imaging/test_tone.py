"""Tests for variantshot.imaging.tone: exposure, tone curves, sRGB encoding (IEC 61966-2-1) and dither."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from variantshot.imaging import tone
from variantshot.imaging.colour import srgb_encode

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # colour-science warns that matplotlib is absent
    colour = pytest.importorskip("colour")

RNG = np.random.default_rng(61966)


def test_exposure_and_encoding_match_colour_science():
    rgb = RNG.random((8, 9, 3)) * 0.6
    for ev in (-2.0, -0.5, 0.0, 0.5):
        # IEC 61966-2-1 encoding of (rgb * 2**ev), computed by colour-science
        want = colour.cctf_encoding(np.clip(rgb * 2.0**ev, 0, 1), function="sRGB")
        np.testing.assert_allclose(tone.display_from_linear(rgb, ev, "none"), want, atol=1e-12)


def test_none_clips_and_white_is_one():
    rgb = np.array([[[1.0, 1.0, 1.0], [2.0, 0.5, -0.1], [np.nan, np.inf, 0.0]]])
    out = tone.display_from_linear(rgb, 0.0, "none")
    np.testing.assert_array_equal(out[0, 0], [1.0, 1.0, 1.0])
    assert out[0, 1, 0] == 1.0 and out[0, 1, 2] == 0.0
    np.testing.assert_array_equal(out[0, 2], [0.0, 1.0, 0.0])


def test_neutral_is_identity_below_knee():
    rgb = RNG.random((16, 16, 3)) * tone.NEUTRAL_KNEE
    np.testing.assert_array_equal(tone.display_from_linear(rgb, 0.0, "neutral"),
                                  tone.display_from_linear(rgb, 0.0, "none"))


def test_neutral_shoulder_formula_and_shape():
    k = tone.NEUTRAL_KNEE
    m = np.linspace(0.0, 20.0, 20001)
    rgb = np.repeat(m[None, :, None], 3, axis=2)
    out = tone.tone_curve(rgb, "neutral")[0, :, 0]
    # the documented formula (module docstring)
    want = np.where(m <= k, m, k + (1 - k) * (1 - np.exp(-(m - k) / (1 - k))))
    np.testing.assert_allclose(out, want, atol=1e-15)
    assert np.all(np.diff(out[m <= 6.0]) > 0) and np.all(np.diff(out) >= 0) and out.max() <= 1.0
    assert out[m <= 6.0].max() < 1.0
    # C1 at the knee: one-sided slopes both ~1
    h = 1e-6
    above = tone.tone_curve(np.full((1, 1, 3), k + h), "neutral")[0, 0, 0]
    assert (above - k) / h == pytest.approx(1.0, abs=1e-5)
    assert tone.tone_curve(np.full((1, 1, 3), 1.0), "neutral")[0, 0, 0] == pytest.approx(
        k + (1 - k) * (1 - np.exp(-1.0)))
    # documented thresholds: 1.57 rounds to 255 undithered; from 8 on the value is exactly white
    v = tone.display_from_linear(np.array([[[1.57] * 3, [8.0] * 3, [1.0] * 3]]), 0.0, "neutral")
    np.testing.assert_array_equal(tone.quantise(v, 8, dither=False)[0, :, 0], [255, 255, 247])
    assert v[0, 1, 0] == 1.0


def test_neutral_keeps_channel_ratios():
    rgb = np.array([[[3.0, 1.5, 0.3], [np.inf, 0.5, 0.0]]])
    out = tone.tone_curve(rgb, "neutral")
    np.testing.assert_allclose(out[0, 0] / out[0, 0, 0], rgb[0, 0] / rgb[0, 0, 0], rtol=1e-12)
    np.testing.assert_array_equal(out[0, 1], [1.0, 0.0, 0.0])


def test_unknown_tone_and_int_input():
    with pytest.raises(ValueError, match="neutral"):
        tone.display_from_linear(np.zeros((1, 1, 3)), 0.0, "filmic")
    with pytest.raises(TypeError):
        tone.display_from_linear(np.zeros((1, 1, 3), dtype=np.int64))


@pytest.mark.parametrize("linear, code", [(0.18, 118), (0.184187, 119), (0.5, 188), (1.0, 255),
                                          (0.0, 0)])
def test_8bit_codes_reference_values(linear, code):
    # REFERENCES.md sections 1 and 4 (0.18 -> 117.65 -> 118; L* = 50 -> #777777; 0.5 -> 187.52)
    v = tone.display_from_linear(np.full((1, 1, 3), linear))
    assert np.all(tone.quantise(v, 8, dither=False) == code)


def test_dither_never_moves_black_or_white():
    img = np.zeros((64, 64, 3))
    img[:, 32:] = 1.0
    for seed in range(5):
        codes = tone.quantise(img, 8, dither=True, seed=seed)
        assert np.all(codes[:, :32] == 0) and np.all(codes[:, 32:] == 255)
    # the whole display path: a 255 background survives bit-exactly (REFERENCES.md section 1)
    bg = tone.display_from_linear(np.ones((32, 32, 3)), 0.0, "none")
    assert np.all(tone.quantise(bg, 8, dither=True, seed=7) == 255)


def test_dither_is_deterministic_bounded_and_unbiased():
    v = np.full((256, 256, 3), 100.3 / 255.0)
    a = tone.quantise(v, 8, dither=True, seed=3)
    np.testing.assert_array_equal(a, tone.quantise(v, 8, dither=True, seed=3))
    assert not np.array_equal(a, tone.quantise(v, 8, dither=True, seed=4))
    assert set(np.unique(a)) <= {99, 100, 101}
    # TPDF dither (+-1 LSB) keeps the mean: E[code] = 100.3 (Lipshitz, Wannamaker & Vanderkooy
    # 1992, "Quantization and dither: a theoretical survey", J. Audio Eng. Soc. 40(5), from
    # memory); MC error sigma ~ 0.5/sqrt(196608)
    assert a.mean() == pytest.approx(100.3, abs=0.01)
    assert np.all(tone.quantise(v, 8, dither=False) == 100)


def test_dither_noise_is_triangular():
    from scipy import stats

    u0, u1 = tone._hash_uniform_pair((200, 300), seed=11)
    # each hashed stream is uniform on (0, 1) (Kolmogorov-Smirnov, scipy)
    assert stats.kstest(u0.ravel(), "uniform").pvalue > 1e-3
    assert stats.kstest(u1.ravel(), "uniform").pvalue > 1e-3
    noise = u0 + u1 - 1.0
    # triangular on (-1, 1) with mode 0: scipy.stats.triang(c=0.5, loc=-1, scale=2)
    assert stats.kstest(noise.ravel(), stats.triang(0.5, loc=-1.0, scale=2.0).cdf).pvalue > 1e-3
    # the two streams are independent of each other (Pearson r ~ 0)
    assert abs(np.corrcoef(u0.ravel(), u1.ravel())[0, 1]) < 0.02


def test_16bit_rounds_without_dither():
    v = RNG.random((4, 5, 3))
    np.testing.assert_array_equal(tone.quantise(v, 16), np.rint(v * 65535).astype(np.uint16))
    assert tone.quantise(np.ones((1, 1, 3)), 16).dtype == np.uint16
    with pytest.raises(ValueError):
        tone.quantise(v, 12)


def test_srgb_encode_used_is_iec():
    # the encoder tone uses is the IEC piecewise curve (colour-science oracle)
    v = np.linspace(0, 1, 257)
    np.testing.assert_allclose(srgb_encode(v), colour.cctf_encoding(v, function="sRGB"), atol=1e-12)
