"""Image files: encode renders to PNG/JPEG/WebP (sRGB + ICC) or PFM/NPY (linear), read environment maps.

Display formats (``png``, ``jpg``, ``webp``) go through
:func:`variantshot.imaging.tone.display_from_linear` (exposure, tone, sRGB encoding), are quantised
by :func:`variantshot.imaging.tone.quantise` and carry an embedded sRGB ICC profile (made by
LittleCMS through Pillow, with its creation date pinned so that the bytes are reproducible).
8-bit files are written by Pillow; 16-bit RGB/RGBA PNG, which Pillow cannot write, is written
here chunk by chunk (IHDR bit depth 16, colour type 2 or 6, iCCP, IDAT, IEND).  Alpha is straight
(not premultiplied) coverage, stored linearly.

Linear formats (``pfm``, ``npy``) hold the float32 radiance exactly as given: exposure, tone and
dither do not apply.  PFM is little-endian with rows stored bottom to top, as the format says;
NPY is ``np.save`` of a float32 ``(H, W, 3)`` array, or ``(H, W, 4)`` with alpha as the last channel.

Readers: :func:`read_pfm`, :func:`read_hdr` (Radiance RGBE, flat or run-length encoded scanlines)
and :func:`read_environment_image`, which dispatches on the suffix.

References
----------
PNG (Portable Network Graphics) Specification, 2nd edition, W3C Recommendation / ISO/IEC 15948:2003:
chunk layout, CRC-32, filter type 0, iCCP.
G. Ward (1991), "Real Pixels", Graphics Gems II, pp. 80-83 (RGBE), and the Radiance file format
notes for the run-length encoded scanlines (from memory).
The PFM layout: "PF"/"Pf" line, "W H" line, scale line (negative = little-endian), float32 rows
from bottom to top (common practice, no source beyond the Netpbm documentation, from memory).
IEC 61966-2-1:1999 (sRGB).
"""

from __future__ import annotations

import functools
import io
import struct
import zlib
from pathlib import Path

import numpy as np

from .._atomic import atomic_write
from ..errors import InputError
from .colour import linear_srgb_from_srgb8
from .tone import TONES, display_from_linear, quantise

__all__ = [
    "FORMATS",
    "ENVIRONMENT_SUFFIXES",
    "srgb_icc_profile",
    "encode_image",
    "write_image",
    "read_pfm",
    "write_pfm_bytes",
    "read_hdr",
    "encode_hdr",
    "write_hdr",
    "read_environment_image",
]

FORMATS = ("png", "jpg", "webp", "pfm", "npy")
_SUFFIX_FORMATS = {".png": "png", ".jpg": "jpg", ".jpeg": "jpg", ".webp": "webp", ".pfm": "pfm",
                   ".npy": "npy"}
ENVIRONMENT_SUFFIXES = (".hdr", ".pic", ".pfm", ".npy", ".png", ".jpg", ".jpeg")

# ICC header dateTimeNumber (bytes 24-35): pinned to 2000-01-01 00:00:00 for reproducible files.
_ICC_DATE = struct.pack(">6H", 2000, 1, 1, 0, 0, 0)


@functools.lru_cache(maxsize=1)
def srgb_icc_profile() -> bytes:
    """The sRGB ICC profile embedded in every display image.

    Returns
    -------
    profile : bytes
        LittleCMS's built-in sRGB profile (``ImageCms.createProfile("sRGB")``) with the header's
        creation date pinned, so the same Pillow build gives byte-identical images.
    """
    from PIL import ImageCms

    data = bytearray(ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes())
    data[24:36] = _ICC_DATE
    data[84:100] = bytes(16)  # profile ID (MD5) covers the date: mark it "not computed"
    return bytes(data)


# --- encoding ----------------------------------------------------------------------------------
def _check_inputs(rgb_linear, alpha):
    rgb = np.asarray(rgb_linear)
    if rgb.dtype.kind != "f":
        raise TypeError(f"rgb_linear: expected a float array, got dtype {rgb.dtype}")
    if rgb.ndim != 3 or rgb.shape[2] != 3 or rgb.shape[0] < 1 or rgb.shape[1] < 1:
        raise ValueError(f"rgb_linear: expected shape (H, W, 3), got {rgb.shape}")
    if alpha is not None:
        alpha = np.asarray(alpha)
        if alpha.dtype.kind != "f":
            raise TypeError(f"alpha: expected a float array, got dtype {alpha.dtype}")
        if alpha.shape != rgb.shape[:2]:
            raise ValueError(f"alpha: expected shape {rgb.shape[:2]}, got {alpha.shape}")
    return rgb, alpha


def _png_chunk(kind: bytes, payload: bytes) -> bytes:
    return (struct.pack(">I", len(payload)) + kind + payload
            + struct.pack(">I", zlib.crc32(kind + payload) & 0xFFFFFFFF))


def _png16_bytes(codes: np.ndarray, icc: bytes) -> bytes:
    """PNG of (H, W, 3|4) uint16 codes, per the PNG specification (filter 0 on every row)."""
    h, w, c = codes.shape
    colour_type = 2 if c == 3 else 6
    ihdr = struct.pack(">IIBBBBB", w, h, 16, colour_type, 0, 0, 0)
    iccp = b"sRGB\x00\x00" + zlib.compress(icc, 9)  # name, NUL, compression method 0
    rows = codes.astype(">u2").reshape(h, w * c).view(np.uint8)
    raw = np.concatenate([np.zeros((h, 1), np.uint8), rows], axis=1).tobytes()
    return (b"\x89PNG\r\n\x1a\n" + _png_chunk(b"IHDR", ihdr) + _png_chunk(b"iCCP", iccp)
            + _png_chunk(b"IDAT", zlib.compress(raw, 6)) + _png_chunk(b"IEND", b""))


def write_pfm_bytes(rgb_linear) -> bytes:
    """PFM bytes of linear RGB: little-endian float32, rows bottom to top.

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray

    Returns
    -------
    data : bytes
    """
    rgb = np.asarray(rgb_linear, dtype="<f4")
    h, w, _ = rgb.shape
    header = f"PF\n{w} {h}\n-1.0\n".encode("ascii")
    return header + np.ascontiguousarray(rgb[::-1]).tobytes()


def encode_image(
    rgb_linear,
    fmt: str,
    *,
    alpha=None,
    exposure_ev: float = 0.0,
    tone: str = "none",
    bit_depth: int = 8,
    quality: int = 92,
    dither: bool = True,
    seed: int = 0,
) -> bytes:
    """Encode a linear render as the bytes of an image file.

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray
        Scene-referred linear sRGB radiance.
    fmt : {"png", "jpg", "webp", "pfm", "npy"}
    alpha : (H, W) float ndarray, optional
        Straight alpha (coverage) in [0, 1]; gives RGBA for png/webp/npy.  jpg and pfm have no
        alpha channel and refuse it.
    exposure_ev : float
        Display formats only: exposure in stops.
    tone : {"none", "neutral"}
        Display formats only: see :mod:`variantshot.imaging.tone`.
    bit_depth : {8, 16}
        16 is accepted for png only.
    quality : int
        jpg/webp quality, 1-100.
    dither : bool
        8-bit only: deterministic ±0.5 LSB triangular dither (never moves exact 0 or 255).
    seed : int
        Dither seed.

    Returns
    -------
    data : bytes
        The whole file.  Identical inputs give identical bytes.

    Raises
    ------
    InputError
        For an unknown format or tone, an unsupported bit depth, or alpha with jpg/pfm.
    """
    fmt = str(fmt).lower().lstrip(".")
    fmt = "jpg" if fmt == "jpeg" else fmt
    if fmt not in FORMATS:
        raise InputError(f"image format {fmt!r} is not supported", accepted=", ".join(FORMATS))
    if tone not in TONES:
        raise InputError(f"tone {tone!r} is not supported", accepted=", ".join(TONES))
    if bit_depth not in (8, 16) or (bit_depth == 16 and fmt not in ("png", "pfm", "npy")):
        raise InputError(f"bit depth {bit_depth!r} is not supported for {fmt}",
                         accepted="8 for jpg/webp; 8 or 16 for png")
    rgb, alpha = _check_inputs(rgb_linear, alpha)
    if alpha is not None and fmt in ("jpg", "pfm"):
        raise InputError(f"{fmt} has no alpha channel", accepted="png, webp or npy for alpha")

    if fmt == "pfm":
        return write_pfm_bytes(rgb)
    if fmt == "npy":
        arr = rgb.astype(np.float32)
        if alpha is not None:
            arr = np.concatenate([arr, alpha.astype(np.float32)[..., None]], axis=2)
        buf = io.BytesIO()
        np.save(buf, np.ascontiguousarray(arr), allow_pickle=False)
        return buf.getvalue()

    display = display_from_linear(rgb, exposure_ev, tone)
    if alpha is not None:
        a = np.clip(np.where(np.isfinite(alpha), alpha, 0.0), 0.0, 1.0)
        display = np.concatenate([display, a[..., None]], axis=2)
    icc = srgb_icc_profile()
    if bit_depth == 16:
        return _png16_bytes(quantise(display, 16), icc)

    from PIL import Image

    codes = quantise(display, 8, dither=dither, seed=seed)
    if alpha is not None:
        # dither only the colour; alpha is rounded
        codes[..., 3] = quantise(display[..., 3:], 8, dither=False)[..., 0]
    img = Image.fromarray(np.ascontiguousarray(codes))  # uint8 (H,W,3) -> RGB, (H,W,4) -> RGBA
    buf = io.BytesIO()
    if fmt == "png":
        img.save(buf, format="PNG", icc_profile=icc, optimize=False, compress_level=6)
    elif fmt == "jpg":
        img.save(buf, format="JPEG", icc_profile=icc, quality=int(quality), subsampling=0)
    else:
        img.save(buf, format="WEBP", icc_profile=icc, quality=int(quality), method=4)
    return buf.getvalue()


def write_image(path, rgb_linear, **options) -> Path:
    """Encode a render and write it atomically; the format comes from the suffix.

    Parameters
    ----------
    path : str or Path
        Destination ending in .png, .jpg/.jpeg, .webp, .pfm or .npy.
    rgb_linear : (H, W, 3) float ndarray
        Scene-referred linear sRGB.
    **options
        The keyword options of :func:`encode_image`.

    Returns
    -------
    path : Path

    Raises
    ------
    InputError
        Naming the file when its suffix is not an image format we write.
    """
    path = Path(path)
    fmt = _SUFFIX_FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise InputError(f"cannot tell the image format from suffix {path.suffix!r}", file=path,
                         accepted=", ".join(_SUFFIX_FORMATS))
    return atomic_write(path, encode_image(rgb_linear, fmt, **options))


# --- readers -----------------------------------------------------------------------------------
def _read_bytes(path) -> bytes:
    try:
        return Path(path).read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the file ({exc.strerror or exc})", file=path) from exc


def _parse_pfm(data: bytes, path) -> np.ndarray:
    fields = []
    pos = 0
    # three whitespace-separated header tokens: kind, "W H", scale; one whitespace byte after scale
    while len(fields) < 4:
        while pos < len(data) and data[pos : pos + 1].isspace():
            pos += 1
        start = pos
        while pos < len(data) and not data[pos : pos + 1].isspace():
            pos += 1
        if start == pos or pos >= len(data):
            raise InputError("not a PFM file (truncated header)", file=path,
                             accepted="'PF' or 'Pf', width height, scale")
        fields.append(data[start:pos])
    pos += 1
    kind = fields[0]
    if kind not in (b"PF", b"Pf"):
        raise InputError("not a PFM file (it must start with 'PF' or 'Pf')", file=path)
    try:
        w, h, scale = int(fields[1]), int(fields[2]), float(fields[3])
    except ValueError as exc:
        raise InputError("not a PFM file (bad width, height or scale)", file=path) from exc
    if w <= 0 or h <= 0 or scale == 0.0 or not np.isfinite(scale):
        raise InputError(f"PFM header has bad size {w}x{h} or scale {scale}", file=path)
    channels = 3 if kind == b"PF" else 1
    count = w * h * channels
    body = data[pos : pos + 4 * count]
    if len(body) != 4 * count:
        raise InputError(f"PFM data is truncated: {len(body)} of {4 * count} bytes", file=path)
    arr = np.frombuffer(body, dtype="<f4" if scale < 0 else ">f4").reshape(h, w, channels)
    arr = arr[::-1].astype(np.float32)
    if channels == 1:
        arr = np.repeat(arr, 3, axis=2)
    return np.ascontiguousarray(arr)


def read_pfm(path) -> np.ndarray:
    """Read a PFM file (colour "PF" or grey "Pf", either byte order).

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    rgb_linear : (H, W, 3) float32 ndarray
        Top row first (the file's bottom-to-top order is undone); grey is copied to 3 channels.
        The absolute value of the scale line is not applied (it is not a calibrated unit).

    Raises
    ------
    InputError
        Naming the file when it is missing, not a PFM or truncated.
    """
    return _parse_pfm(_read_bytes(path), path)


def _rgbe_from_linear(rgb: np.ndarray) -> np.ndarray:
    # Ward (1991): shared exponent from the largest channel; mantissa = c * 256 / 2**e
    m = np.max(rgb, axis=-1)
    frac, exp = np.frexp(m)
    ok = m >= 1e-32
    scale = np.where(ok, frac * 256.0 / np.where(ok, m, 1.0), 0.0)
    out = np.zeros(rgb.shape[:-1] + (4,), np.uint8)
    out[..., :3] = np.clip(np.floor(rgb * scale[..., None]), 0, 255).astype(np.uint8)
    out[..., 3] = np.where(ok, exp + 128, 0).astype(np.uint8)
    return out


def _rle_encode_channel(values: bytes) -> bytes:
    out = bytearray()
    n = len(values)
    i = 0
    while i < n:
        # find a run of >= 3 identical bytes starting at or after i
        j = i
        while j < n:
            run = 1
            while j + run < n and run < 127 and values[j + run] == values[j]:
                run += 1
            if run >= 3:
                break
            j += run
        while i < j:  # literal bytes before the run
            k = min(j - i, 128)
            out.append(k)
            out += values[i : i + k]
            i += k
        if j < n:
            out.append(128 + run)
            out.append(values[j])
            i = j + run
    return bytes(out)


def encode_hdr(rgb_linear, *, rle: bool = True) -> bytes:
    """Radiance RGBE (.hdr) bytes of linear RGB.

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray, non-negative
    rle : bool
        Write the run-length encoded scanlines (widths 8-32767), else flat RGBE pixels.

    Returns
    -------
    data : bytes
        Header ``#?RADIANCE``, ``FORMAT=32-bit_rle_rgbe``, resolution line ``-Y H +X W``.
    """
    rgb = np.maximum(np.asarray(rgb_linear, dtype=np.float64), 0.0)
    h, w, _ = rgb.shape
    rgbe = _rgbe_from_linear(rgb)
    head = f"#?RADIANCE\nFORMAT=32-bit_rle_rgbe\n\n-Y {h} +X {w}\n".encode("ascii")
    if not rle or not 8 <= w < 32768:
        return head + rgbe.tobytes()
    parts = [head]
    for y in range(h):
        parts.append(bytes([2, 2, w >> 8, w & 0xFF]))
        for c in range(4):
            parts.append(_rle_encode_channel(rgbe[y, :, c].tobytes()))
    return b"".join(parts)


def write_hdr(path, rgb_linear, *, rle: bool = True) -> Path:
    """Write a Radiance RGBE file atomically (see :func:`encode_hdr`); return the path."""
    return atomic_write(path, encode_hdr(rgb_linear, rle=rle))


def _parse_hdr(data: bytes, path) -> np.ndarray:
    if not (data.startswith(b"#?RADIANCE") or data.startswith(b"#?RGBE")):
        raise InputError("not a Radiance HDR file (no '#?RADIANCE' line)", file=path,
                         accepted="Radiance RGBE .hdr with FORMAT=32-bit_rle_rgbe")
    end = data.find(b"\n\n")
    if end < 0:
        raise InputError("Radiance header has no blank line before the resolution", file=path)
    for line in data[:end].split(b"\n")[1:]:
        if line.startswith(b"FORMAT=") and line.strip() != b"FORMAT=32-bit_rle_rgbe":
            raise InputError(f"Radiance pixel format {line[7:].decode(errors='replace')!r} is not "
                             "supported", file=path, accepted="32-bit_rle_rgbe")
    res_end = data.find(b"\n", end + 2)
    if res_end < 0:
        raise InputError("Radiance file has no resolution line", file=path)
    res = data[end + 2 : res_end].split()
    if len(res) != 4 or res[0] not in (b"-Y", b"+Y") or res[2] != b"+X":
        raise InputError(f"Radiance resolution line {b' '.join(res).decode(errors='replace')!r} is "
                         "not supported", file=path, accepted="'-Y H +X W' or '+Y H +X W'")
    try:
        h, w = int(res[1]), int(res[3])
    except ValueError as exc:
        raise InputError("Radiance resolution line has bad numbers", file=path) from exc
    if h <= 0 or w <= 0:
        raise InputError(f"Radiance image size {w}x{h} is empty", file=path)
    body = memoryview(data)[res_end + 1 :]
    rgbe = np.empty((h, w, 4), np.uint8)
    pos = 0
    n = len(body)
    for y in range(h):
        if pos + 4 <= n and body[pos] == 2 and body[pos + 1] == 2 and not (body[pos + 2] & 0x80):
            if (body[pos + 2] << 8 | body[pos + 3]) != w:
                raise InputError(f"scanline {y} has the wrong length", file=path)
            pos += 4
            for c in range(4):
                x = 0
                row = rgbe[y, :, c]
                while x < w:
                    if pos >= n:
                        raise InputError(f"Radiance data is truncated at scanline {y}", file=path)
                    count = body[pos]
                    pos += 1
                    if count > 128:
                        count -= 128
                        if x + count > w or pos >= n:
                            raise InputError(f"bad run in scanline {y}", file=path)
                        row[x : x + count] = body[pos]
                        pos += 1
                    else:
                        if count == 0 or x + count > w or pos + count > n:
                            raise InputError(f"bad run in scanline {y}", file=path)
                        row[x : x + count] = np.frombuffer(body[pos : pos + count], np.uint8)
                        pos += count
                    x += count
        else:  # flat pixels (old-style run-length codes are not supported)
            if pos + 4 * w > n:
                raise InputError(f"Radiance data is truncated at scanline {y}", file=path)
            px = np.frombuffer(body[pos : pos + 4 * w], np.uint8).reshape(w, 4)
            if np.any((px[:, 0] == 1) & (px[:, 1] == 1) & (px[:, 2] == 1)):
                raise InputError("old-style Radiance run-length encoding is not supported",
                                 file=path, accepted="flat or new-style RLE scanlines")
            rgbe[y] = px
            pos += 4 * w
    e = rgbe[..., 3].astype(np.int32)
    # Radiance's colr_color: (mantissa + 0.5) * 2**(e - 136); e = 0 is black
    f = np.where(e == 0, 0.0, np.ldexp(1.0, e - 136))
    rgb = ((rgbe[..., :3].astype(np.float64) + 0.5) * f[..., None]).astype(np.float32)
    if res[0] == b"+Y":
        rgb = rgb[::-1]
    return np.ascontiguousarray(rgb)


def read_hdr(path) -> np.ndarray:
    """Read a Radiance RGBE (.hdr / .pic) file.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    rgb_linear : (H, W, 3) float32 ndarray
        Top row first.  Decoded as Radiance does, ``(m + 0.5) * 2 ** (e - 136)`` and 0 for e = 0.
        The header's EXPOSURE lines are not applied.

    Raises
    ------
    InputError
        Naming the file when it is missing, not RGBE, uses an unsupported orientation or
        old-style run-length codes, or is truncated.

    References
    ----------
    G. Ward (1991), "Real Pixels", Graphics Gems II.
    """
    return _parse_hdr(_read_bytes(path), path)


def read_environment_image(path) -> np.ndarray:
    """Read an equirectangular environment image as linear radiance.

    Parameters
    ----------
    path : str or Path
        ``.hdr``/``.pic`` (Radiance RGBE), ``.pfm``, ``.npy`` (float (H, W, 3) or (H, W, 4), alpha
        dropped), or 8-bit ``.png``/``.jpg`` (decoded from sRGB to linear; low dynamic range).

    Returns
    -------
    rgb_linear : (H, W, 3) float32 ndarray
        Top row first.

    Raises
    ------
    InputError
        Naming the file when the suffix is not accepted (OpenEXR is not read: convert it to .hdr
        or .pfm) or the content is bad.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".hdr", ".pic"):
        return read_hdr(path)
    if suffix == ".pfm":
        return read_pfm(path)
    if suffix == ".npy":
        data = _read_bytes(path)
        try:
            arr = np.load(io.BytesIO(data), allow_pickle=False)
        except ValueError as exc:
            raise InputError(f"not a readable .npy array ({exc})", file=path) from exc
        if arr.ndim != 3 or arr.shape[2] not in (3, 4) or arr.dtype.kind != "f":
            raise InputError(f"environment array has shape {arr.shape} and dtype {arr.dtype}",
                             file=path, accepted="float (H, W, 3) or (H, W, 4)")
        return np.ascontiguousarray(arr[..., :3], dtype=np.float32)
    if suffix in (".png", ".jpg", ".jpeg"):
        from PIL import Image, UnidentifiedImageError

        try:
            with Image.open(io.BytesIO(_read_bytes(path))) as img:
                if img.mode not in ("RGB", "RGBA", "L", "P", "LA"):
                    raise InputError(f"image mode {img.mode} is not supported", file=path,
                                     accepted="8-bit RGB, RGBA or grey")
                codes = np.asarray(img.convert("RGB"))
        except (UnidentifiedImageError, OSError) as exc:
            raise InputError(f"not a readable image ({exc})", file=path) from exc
        return linear_srgb_from_srgb8(codes).astype(np.float32)
    raise InputError(f"environment images with suffix {suffix or '(none)'!r} are not supported",
                     file=path, accepted=", ".join(ENVIRONMENT_SUFFIXES)
                     + " (convert OpenEXR to .hdr or .pfm)")
