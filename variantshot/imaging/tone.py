"""Display transform: exposure in EV, the neutral highlight shoulder, sRGB encoding and quantisation.

Pipeline (scene-referred linear sRGB in, display-referred values out), in this order:

1. **Exposure**: multiply by ``2 ** exposure_ev``.  Non-finite samples become 0 (NaN) or
   display white (+inf); negatives are clipped to 0.
2. **Tone** (``tone``):

   * ``"none"``: clip to [0, 1].  Linear 1.0 becomes code 255 exactly.
   * ``"neutral"``: our own highlight roll-off applied to the *largest channel* of each pixel,
     with all three channels scaled by the same factor (hue and the channel ratios are kept;
     nothing ever exceeds 1).  The curve is the identity up to the knee ``k = 0.8`` of display
     white and an exponential shoulder above it::

         s(m) = m                                           m <= k
         s(m) = k + (1 - k) * (1 - exp(-(m - k) / (1 - k)))  m >  k

     It is C1-continuous at the knee (slope 1) and tends to 1 as m grows, so every colour whose
     channels are all at most 0.8 is passed through bit-for-bit (catalog colour checks are not
     affected), and highlights compress smoothly instead of clipping.  Linear 1.0 maps to
     0.926 (code 247).  Under ``"neutral"`` a background rounds to 255 without dither from a
     linear 1.57 on, and is exactly display white (so never dithered) only from about 8 on,
     where the shoulder rounds to 1.0 in float64; composite white backgrounds with
     ``tone="none"`` when they must be exactly 255.
3. **sRGB encoding** (IEC 61966-2-1, :func:`variantshot.imaging.colour.srgb_encode`).
4. **Quantisation** (:func:`quantise`): 8-bit with an optional deterministic triangular dither
   (two uniform ±0.5 LSB terms summed) whose noise comes from a hash of (element index, seed);
   exact 0 and exact 1 are never dithered, so black stays 0 and white backgrounds stay 255.
   16-bit is rounded without dither.

References
----------
IEC 61966-2-1:1999 (sRGB encoding).  The shoulder is our own design (common practice, no source:
identity below a knee, asymptotic above).
"""

from __future__ import annotations

import numpy as np

from .colour import srgb_encode

__all__ = ["TONES", "NEUTRAL_KNEE", "apply_exposure", "tone_curve", "display_from_linear", "quantise"]

TONES = ("none", "neutral")
# Knee of the neutral shoulder, as a fraction of display white (linear).
NEUTRAL_KNEE = 0.8

_U64_MASK = np.uint64(0xFFFFFFFFFFFFFFFF)


def _check_rgb(rgb_linear, name: str = "rgb_linear") -> np.ndarray:
    arr = np.asarray(rgb_linear)
    if arr.dtype.kind not in "f":
        raise TypeError(f"{name}: expected a float array of linear light, got dtype {arr.dtype}")
    if arr.ndim != 3 or arr.shape[-1] != 3:
        raise ValueError(f"{name}: expected shape (H, W, 3), got {arr.shape}")
    return arr.astype(np.float64, copy=False)


def apply_exposure(rgb_linear, exposure_ev: float = 0.0) -> np.ndarray:
    """Scale linear light by ``2 ** exposure_ev`` and sanitise it.

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray
        Scene-referred linear sRGB.
    exposure_ev : float
        Exposure change in stops (+1 doubles).

    Returns
    -------
    rgb : (H, W, 3) float64 ndarray
        Non-negative and finite except for +inf (kept so that the tone step maps it to white).
    """
    rgb = _check_rgb(rgb_linear) * (2.0 ** float(exposure_ev))
    rgb = np.where(np.isnan(rgb), 0.0, rgb)
    return np.maximum(rgb, 0.0)


def _shoulder(m: np.ndarray, knee: float) -> np.ndarray:
    span = 1.0 - knee
    over = np.maximum(m - knee, 0.0)
    return np.where(m <= knee, m, knee + span * -np.expm1(-over / span))


def tone_curve(rgb_linear, tone: str = "none") -> np.ndarray:
    """Map exposed linear light into display range [0, 1] (still linear).

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray
        Exposed, non-negative linear sRGB (see :func:`apply_exposure`).
    tone : {"none", "neutral"}
        ``"none"`` clips; ``"neutral"`` applies the module's highlight shoulder to the largest
        channel and scales the pixel by the same factor.

    Returns
    -------
    rgb_display_linear : (H, W, 3) float64 ndarray in [0, 1]

    Raises
    ------
    ValueError
        For an unknown tone name.
    """
    if tone not in TONES:
        raise ValueError(f"tone {tone!r} is not one of {', '.join(TONES)}")
    rgb = np.asarray(rgb_linear, dtype=np.float64)
    if tone == "none":
        return np.clip(rgb, 0.0, 1.0)
    m = np.max(rgb, axis=-1, keepdims=True)
    s = _shoulder(m, NEUTRAL_KNEE)
    with np.errstate(invalid="ignore", divide="ignore"):
        scale = np.where(m > NEUTRAL_KNEE, s / m, 1.0)
        # the largest channel gets the curve value itself (exact for greys, monotonic)
        out = np.where(rgb == m, s, rgb * scale)
    # +inf channels: the shoulder tends to 1
    out = np.where(np.isposinf(rgb), 1.0, np.where(np.isnan(out), 0.0, out))
    return np.clip(out, 0.0, 1.0)


def display_from_linear(rgb_linear, exposure_ev: float = 0.0, tone: str = "none") -> np.ndarray:
    """sRGB-encoded display values from scene-referred linear light.

    Parameters
    ----------
    rgb_linear : (H, W, 3) float ndarray
        Scene-referred linear sRGB (Rec. 709 primaries, D65).
    exposure_ev : float
        Exposure in stops, applied as ``2 ** exposure_ev``.
    tone : {"none", "neutral"}
        Highlight handling, see the module notes.

    Returns
    -------
    srgb : (H, W, 3) float64 ndarray in [0, 1]
        IEC 61966-2-1 encoded values, ready for :func:`quantise`.

    References
    ----------
    IEC 61966-2-1:1999.
    """
    return srgb_encode(tone_curve(apply_exposure(rgb_linear, exposure_ev), tone))


def _hash_uniform_pair(shape: tuple[int, ...], seed: int) -> tuple[np.ndarray, np.ndarray]:
    # splitmix64 finaliser over (flat element index, seed): deterministic, platform independent.
    idx = np.arange(int(np.prod(shape)), dtype=np.uint64)
    with np.errstate(over="ignore"):
        z = idx * np.uint64(0x9E3779B97F4A7C15) + (np.uint64(int(seed) & 0xFFFFFFFFFFFFFFFF)
                                                   ^ np.uint64(0xD1B54A32D192ED03))
        z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
        z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
        z = (z ^ (z >> np.uint64(31))) & _U64_MASK
    hi = (z >> np.uint64(32)).astype(np.float64)
    lo = (z & np.uint64(0xFFFFFFFF)).astype(np.float64)
    scale = 1.0 / 4294967296.0
    return ((hi + 0.5) * scale).reshape(shape), ((lo + 0.5) * scale).reshape(shape)


def quantise(values, bit_depth: int = 8, *, dither: bool = True, seed: int = 0) -> np.ndarray:
    """Quantise display values in [0, 1] to integer codes.

    Parameters
    ----------
    values : (H, W, C) float ndarray
        Display values (sRGB-encoded colour, or straight alpha) in [0, 1]; clipped first.
    bit_depth : {8, 16}
    dither : bool
        8-bit only: before rounding, add the sum of two independent hashed uniforms of ±0.5 LSB
        each (triangular noise on ±1 LSB, the usual TPDF).  This width makes the mean code equal
        the input exactly (a triangle only ±0.5 LSB wide would leave a bias of up to 0.18 LSB,
        e.g. 100.18 for 100.3).  Values that are exactly 0 or 1 are never dithered, so black stays
        0 and white 255; other values may land one code further than plain rounding.
    seed : int
        Dither seed; the same seed gives the same codes on every machine.

    Returns
    -------
    codes : (H, W, C) uint8 or uint16 ndarray
    """
    if bit_depth not in (8, 16):
        raise ValueError(f"bit_depth {bit_depth!r} is not 8 or 16")
    v = np.clip(np.asarray(values, dtype=np.float64), 0.0, 1.0)
    top = 255.0 if bit_depth == 8 else 65535.0
    scaled = v * top
    if bit_depth == 8 and dither:
        u0, u1 = _hash_uniform_pair(v.shape, seed)
        noise = u0 + u1 - 1.0  # sum of two uniform +-0.5 LSB: triangular on (-1, 1) LSB
        exact = (v == 0.0) | (v == 1.0)
        scaled = np.where(exact, scaled, scaled + noise)
    codes = np.clip(np.floor(scaled + 0.5), 0.0, top)
    return codes.astype(np.uint8 if bit_depth == 8 else np.uint16)
