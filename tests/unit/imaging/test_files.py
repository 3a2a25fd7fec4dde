"""Tests for variantshot.imaging.files: PNG/JPEG/WebP with sRGB ICC, 16-bit PNG, PFM, NPY, Radiance HDR.

Outside references: Pillow and pypng (an independent pure-Python PNG decoder that also verifies
chunk CRCs) read our files back; Radiance RGBE bytes are built by hand from Ward (1991), "Real
Pixels", Graphics Gems II; PFM bytes by hand from the Netpbm PFM description (from memory).
"""

from __future__ import annotations

import io
import struct

import numpy as np
import pytest
from PIL import Image, ImageCms

from variantshot.errors import InputError
from variantshot.imaging import files, tone

RNG = np.random.default_rng(15948)


def _ramp(h=6, w=9):
    y, x = np.mgrid[0:h, 0:w]
    return np.stack([x / (w - 1), y / (h - 1), 0.5 * np.ones_like(x, float)], axis=2) * 0.9


def _open(data: bytes) -> Image.Image:
    img = Image.open(io.BytesIO(data))
    img.load()
    return img


# --- ICC -------------------------------------------------------------------------------------
def test_icc_profile_is_srgb_and_reproducible():
    icc = files.srgb_icc_profile()
    assert icc[36:40] == b"acsp"  # ICC.1 header signature
    assert struct.unpack(">I", icc[:4])[0] == len(icc)  # header size field
    prof = ImageCms.ImageCmsProfile(io.BytesIO(icc))
    assert "sRGB" in ImageCms.getProfileDescription(prof)
    # LittleCMS agrees it is RGB with a PCS of XYZ
    assert prof.profile.xcolor_space.strip() == "RGB" and prof.profile.connection_space.strip() == "XYZ"


@pytest.mark.parametrize("fmt, pil_format", [("png", "PNG"), ("jpg", "JPEG"), ("webp", "WEBP")])
def test_display_formats_embed_icc_and_read_back(fmt, pil_format):
    data = files.encode_image(_ramp(), fmt)
    img = _open(data)
    assert img.format == pil_format and img.size == (9, 6) and img.mode == "RGB"
    assert img.info["icc_profile"] == files.srgb_icc_profile()
    assert files.encode_image(_ramp(), fmt) == data  # byte-identical on re-encode


def test_png_8bit_pixels_are_the_display_transform():
    rgb = _ramp()
    img = np.asarray(_open(files.encode_image(rgb, "png", dither=False)))
    want = np.rint(tone.display_from_linear(rgb) * 255).astype(np.uint8)
    np.testing.assert_array_equal(img, want)


def test_lossy_formats_close_to_png():
    rgb = _ramp(32, 48)
    ref = np.asarray(_open(files.encode_image(rgb, "png", dither=False))).astype(int)
    for fmt in ("jpg", "webp"):
        got = np.asarray(_open(files.encode_image(rgb, fmt, quality=95, dither=False))).astype(int)
        assert np.abs(got - ref).mean() < 2.0, fmt


def test_white_background_and_black_survive_every_display_format():
    rgb = np.zeros((16, 16, 3))
    rgb[:, 8:] = 1.0
    for fmt in ("png", "webp"):
        codes = np.asarray(_open(files.encode_image(rgb, fmt, quality=100, seed=5)))
        if fmt == "png":  # lossless: exact
            assert np.all(codes[:, 8:] == 255) and np.all(codes[:, :8] == 0)
    codes16 = _png16_pixels(files.encode_image(rgb, "png", bit_depth=16))
    assert np.all(codes16[:, 8:] == 65535) and np.all(codes16[:, :8] == 0)


def test_png_rgba_straight_alpha():
    rgb = np.full((4, 4, 3), 0.18)
    alpha = np.linspace(0, 1, 16).reshape(4, 4)
    img = _open(files.encode_image(rgb, "png", alpha=alpha, dither=False))
    assert img.mode == "RGBA"
    arr = np.asarray(img)
    assert np.all(arr[..., :3] == 118)  # straight alpha: colour not multiplied (REFERENCES.md s.4)
    np.testing.assert_array_equal(arr[..., 3], np.rint(alpha * 255).astype(np.uint8))
    webp = _open(files.encode_image(rgb, "webp", alpha=alpha, quality=100))
    assert webp.mode == "RGBA"


# --- 16-bit PNG (written by hand) ---------------------------------------------------------------
def _png16_pixels(data: bytes) -> np.ndarray:
    png = pytest.importorskip("png")  # pypng verifies every chunk CRC while reading
    w, h, rows, info = png.Reader(bytes=data).asDirect()
    assert info["bitdepth"] == 16
    return np.vstack([np.asarray(r, dtype=np.uint16) for r in rows]).reshape(h, w, info["planes"])


@pytest.mark.parametrize("with_alpha", [False, True])
def test_png16_reads_back_with_pypng_and_pillow(with_alpha):
    rgb = RNG.random((5, 7, 3)) * 1.2
    alpha = RNG.random((5, 7)) if with_alpha else None
    data = files.encode_image(rgb, "png", bit_depth=16, alpha=alpha)
    display = tone.display_from_linear(rgb)
    if with_alpha:
        display = np.concatenate([display, alpha[..., None]], axis=2)
    want = np.rint(display * 65535).astype(np.uint16)
    got = _png16_pixels(data)
    np.testing.assert_array_equal(got, want)
    # pypng sees the iCCP chunk (PNG spec 11.3.3.3): profile name + zlib data
    png = pytest.importorskip("png")
    chunks = dict((k, v) for k, v in png.Reader(bytes=data).chunks())
    assert chunks[b"IHDR"][8:10] == bytes([16, 6 if with_alpha else 2])
    # Pillow: opens it (it reduces 16-bit colour to 8-bit), reads the same ICC profile
    img = _open(data)
    assert img.mode == ("RGBA" if with_alpha else "RGB") and img.size == (7, 5)
    assert img.info["icc_profile"] == files.srgb_icc_profile()
    np.testing.assert_array_equal(np.asarray(img), (want >> 8).astype(np.uint8))


def test_bit_depth_rules():
    with pytest.raises(InputError, match="bit depth"):
        files.encode_image(_ramp(), "jpg", bit_depth=16)
    with pytest.raises(InputError, match="alpha"):
        files.encode_image(_ramp(), "jpg", alpha=np.ones((6, 9)))
    with pytest.raises(InputError, match="accepted: png"):
        files.encode_image(_ramp(), "tiff")
    with pytest.raises(TypeError):
        files.encode_image(np.zeros((2, 2, 3), np.uint8), "png")


# --- PFM / NPY: linear and untouched ------------------------------------------------------------
def _special_values():
    rgb = (RNG.standard_normal((5, 4, 3)) * 100).astype(np.float32)
    rgb[0, 0] = [np.inf, -np.inf, np.nan]
    rgb[1, 1] = [0.0, -0.0, np.finfo(np.float32).tiny]
    return rgb


def test_pfm_round_trip_bit_exact(tmp_path):
    rgb = _special_values()
    path = files.write_image(tmp_path / "a.pfm", rgb, exposure_ev=3.0, tone="neutral")
    back = files.read_pfm(path)
    assert back.dtype == np.float32 and back.shape == rgb.shape
    np.testing.assert_array_equal(back.view(np.uint32), rgb.view(np.uint32))


def test_pfm_layout_is_little_endian_bottom_to_top():
    rgb = np.arange(2 * 3 * 3, dtype=np.float32).reshape(2, 3, 3)
    data = files.encode_image(rgb, "pfm")
    header = b"PF\n3 2\n-1.0\n"
    assert data.startswith(header)
    first = np.frombuffer(data[len(header):len(header) + 36], "<f4").reshape(3, 3)
    np.testing.assert_array_equal(first, rgb[1])  # the bottom row comes first


def test_read_pfm_big_endian_and_grey(tmp_path):
    # hand-built: grey "Pf", positive scale = big-endian, rows bottom to top
    body = np.array([[1.0, 2.0], [3.0, 4.0]], ">f4")  # file row 0 is the image's bottom row
    path = tmp_path / "g.pfm"
    path.write_bytes(b"Pf\n2 2\n1.0\n" + body.tobytes())
    img = files.read_pfm(path)
    np.testing.assert_array_equal(img[..., 0], [[3.0, 4.0], [1.0, 2.0]])
    np.testing.assert_array_equal(img[..., 2], img[..., 0])


def test_npy_round_trip_bit_exact(tmp_path):
    rgb = _special_values()
    alpha = RNG.random((5, 4)).astype(np.float32)
    back = np.load(files.write_image(tmp_path / "a.npy", rgb, exposure_ev=-1.0))
    assert back.dtype == np.float32 and back.shape == (5, 4, 3)
    np.testing.assert_array_equal(back.view(np.uint32), rgb.view(np.uint32))
    back4 = np.load(io.BytesIO(files.encode_image(rgb, "npy", alpha=alpha)))
    assert back4.shape == (5, 4, 4)
    np.testing.assert_array_equal(back4[..., 3], alpha)


def test_write_image_suffix_and_atomic(tmp_path):
    path = files.write_image(tmp_path / "sub" / "shot.PNG", _ramp())
    assert _open(path.read_bytes()).format == "PNG"
    assert [p.name for p in path.parent.iterdir()] == ["shot.PNG"]  # no temporary left over
    with pytest.raises(InputError, match=r"shot\.tif"):
        files.write_image(tmp_path / "shot.tif", _ramp())


# --- Radiance HDR -------------------------------------------------------------------------------
def _hdr_header(h, w):
    return f"#?RADIANCE\nFORMAT=32-bit_rle_rgbe\n\n-Y {h} +X {w}\n".encode()


def test_read_hdr_flat_pixels_per_ward(tmp_path):
    # Ward 1991: value = (mantissa + 0.5) / 256 * 2**(e - 128); e = 0 is black
    path = tmp_path / "flat.hdr"
    path.write_bytes(_hdr_header(1, 2) + bytes([128, 64, 32, 129, 10, 20, 30, 0]))
    img = files.read_hdr(path)
    np.testing.assert_allclose(img[0, 0], np.array([128.5, 64.5, 32.5]) / 256 * 2.0, rtol=1e-7)
    np.testing.assert_array_equal(img[0, 1], 0.0)


def test_read_hdr_rle_scanline_by_hand(tmp_path):
    w = 8
    scan = bytes([2, 2, 0, w])
    scan += bytes([128 + 8, 200])  # R: a run of 8 x 200
    scan += bytes([8, 0, 1, 2, 3, 4, 5, 6, 7])  # G: 8 literal bytes
    scan += bytes([3, 9, 9, 9, 128 + 5, 50])  # B: 3 literals then a run of 5
    scan += bytes([128 + 8, 128])  # E: 128 -> scale 2**-8
    path = tmp_path / "rle.hdr"
    path.write_bytes(_hdr_header(1, w) + scan)
    img = files.read_hdr(path)[0]
    np.testing.assert_allclose(img[:, 0], 200.5 / 256)
    np.testing.assert_allclose(img[:, 1], (np.arange(8) + 0.5) / 256)
    np.testing.assert_allclose(img[:, 2], (np.array([9, 9, 9, 50, 50, 50, 50, 50]) + 0.5) / 256)


@pytest.mark.parametrize("rle", [True, False])
def test_hdr_round_trip_within_rgbe_precision(tmp_path, rle):
    rgb = np.exp(RNG.normal(0, 3, (9, 40, 3))).astype(np.float32)
    rgb[2, 5:30] = [4.0, 2.0, 1.0]  # long runs for the encoder
    rgb[3] = 0.0
    path = files.write_hdr(tmp_path / "env.hdr", rgb, rle=rle)
    back = files.read_environment_image(path)
    assert back.shape == rgb.shape and back.dtype == np.float32
    # RGBE keeps 8 bits of mantissa relative to the largest channel (Ward 1991)
    tol = rgb.max(axis=2, keepdims=True) / 128
    assert np.all(np.abs(back - rgb) <= tol)
    np.testing.assert_array_equal(back[3], 0.0)


def test_bad_files_raise_input_error_naming_the_file(tmp_path):
    bad = tmp_path / "broken.hdr"
    bad.write_bytes(b"not an image")
    with pytest.raises(InputError, match="broken.hdr"):
        files.read_environment_image(bad)
    trunc = tmp_path / "short.hdr"
    trunc.write_bytes(_hdr_header(4, 16) + bytes([2, 2, 0, 16, 136]))
    with pytest.raises(InputError, match="short.hdr.*truncated|short.hdr.*bad run"):
        files.read_hdr(trunc)
    pfm = tmp_path / "cut.pfm"
    pfm.write_bytes(b"PF\n4 4\n-1.0\n" + bytes(10))
    with pytest.raises(InputError, match="cut.pfm.*truncated"):
        files.read_pfm(pfm)
    with pytest.raises(InputError, match="missing.pfm"):
        files.read_pfm(tmp_path / "missing.pfm")
    exr = tmp_path / "studio.exr"
    exr.write_bytes(b"\x76\x2f\x31\x01")
    with pytest.raises(InputError, match=r"studio\.exr.*accepted: \.hdr"):
        files.read_environment_image(exr)


def test_environment_from_png_is_decoded_srgb(tmp_path):
    codes = np.array([[[64, 124, 231], [255, 255, 255]]], np.uint8)
    path = tmp_path / "env.png"
    Image.fromarray(codes).save(path)
    env = files.read_environment_image(path)
    # glTF 2.0 spec example: [64, 124, 231] -> [0.051, 0.202, 0.799]
    np.testing.assert_allclose(env[0, 0], [0.051, 0.202, 0.799], atol=1e-3)
    np.testing.assert_array_equal(env[0, 1], 1.0)
    npy = tmp_path / "env.npy"
    np.save(npy, np.ones((2, 4, 4), np.float64))
    assert files.read_environment_image(npy).shape == (2, 4, 3)
