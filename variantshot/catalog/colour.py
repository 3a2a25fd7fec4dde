"""Catalog colour specs: parse ``#RRGGBB``, ``lab(L, a, b)`` and ``lab50(L, a, b)`` cells.

The maths (sRGB transfer curve, XYZ, CIELAB, Bradford adaptation, CIEDE2000) lives in
:mod:`variantshot.imaging.colour`; this module only parses the text, range-checks it and maps
out-of-gamut CIELAB colours into the sRGB gamut.

Accepted forms (case-insensitive, spaces allowed around numbers)
----------------------------------------------------------------
``#RRGGBB``
    An 8-bit sRGB colour (IEC 61966-2-1), decoded to linear light for ``baseColorFactor``.
``lab(L, a, b)``
    CIELAB with the D65 white and the CIE 1931 2-degree observer (the sRGB white).
``lab50(L, a, b)``
    CIELAB with the D50 white (the print and ICC profile-connection white), adapted to D65 with
    the Bradford transform before conversion to sRGB.

L* must lie in [0, 100]; a* and b* in [-128, 127] (the signed 8-bit range of the ICC Lab
encoding; (from memory)).

Gamut mapping
-------------
A CIELAB colour whose linear sRGB value leaves [0, 1] in any channel (beyond 1e-6) is *out of
gamut*.  It is mapped by reducing its CIELAB chroma C*ab at constant L* and hue angle h_ab
(D65), by bisection to 1e-6 in chroma, until every channel lies in [0, 1]; any residual below
1e-6 is clipped.  A neutral grey of the same L* is always inside the gamut, so the bisection
always ends.  Keeping lightness and hue is the usual choice for product colours (common
practice, no source).  The mapped colour is what goes into the scene; ``lab`` still reports the
requested value, and ``delta_e_mapping`` the CIEDE2000 difference between the two, so QA and
``variantshot check`` can name the row (a warning, not an error).
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass

import numpy as np

from ..imaging import colour as cs

ACCEPTED = "#RRGGBB, lab(L, a, b) with the D65 white, lab50(L, a, b) with the D50 white"
L_RANGE = (0.0, 100.0)
AB_RANGE = (-128.0, 127.0)
GAMUT_TOLERANCE = 1e-6

_HEX_RE = re.compile(r"#([0-9a-fA-F]{6})")
_NUM = r"\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*"
_LAB_RE = re.compile(r"(lab|lab50)\s*\(" + _NUM + r"[,\s]" + _NUM + r"[,\s]" + _NUM + r"\)", re.IGNORECASE)


class ColourSyntaxError(ValueError):
    """A colour cell that cannot be read; ``str(exc)`` says why, ``accepted`` what would do."""

    def __init__(self, message: str, accepted: str = ACCEPTED):
        super().__init__(message)
        self.accepted = accepted


@dataclass(frozen=True)
class ColourSpec:
    """A parsed catalog colour, as the template sees it (``colour`` in the template context).

    Attributes
    ----------
    text : str
        The cell as written.
    space : str
        ``"srgb8"``, ``"lab-d65"`` or ``"lab-d50"``: how it was written.
    linear : tuple of 3 float
        Linear sRGB (Rec. 709 primaries, D65) in [0, 1], gamut-mapped: use it for
        ``baseColorFactor``.
    srgb : tuple of 3 float
        The same colour IEC 61966-2-1 encoded, in [0, 1].
    lab : tuple of 3 float
        The *requested* colour as CIELAB D65 (a ``lab50`` colour after Bradford adaptation).
    in_gamut : bool
        False when ``linear`` had to be mapped.
    delta_e_mapping : float
        CIEDE2000 between the requested colour and the mapped one (0 when in gamut).
    """

    text: str
    space: str
    linear: tuple[float, float, float]
    srgb: tuple[float, float, float]
    lab: tuple[float, float, float]
    in_gamut: bool = True
    delta_e_mapping: float = 0.0

    @property
    def factor(self) -> list[float]:
        """``[r, g, b, 1.0]`` linear, ready for ``baseColorFactor``."""
        return [*self.linear, 1.0]

    @property
    def hex(self) -> str:
        """The (mapped) colour as ``#rrggbb`` sRGB."""
        codes = np.clip(np.round(np.asarray(self.srgb) * 255.0), 0, 255).astype(int)
        return "#" + "".join(f"{c:02x}" for c in codes)

    def as_dict(self) -> dict:
        return {
            "text": self.text,
            "space": self.space,
            "linear": list(self.linear),
            "srgb": list(self.srgb),
            "lab": list(self.lab),
            "in_gamut": self.in_gamut,
            "delta_e_mapping": self.delta_e_mapping,
        }


def _in_gamut(rgb_linear: np.ndarray) -> bool:
    return bool(np.all(rgb_linear >= -GAMUT_TOLERANCE) and np.all(rgb_linear <= 1.0 + GAMUT_TOLERANCE))


def map_lab_into_srgb_gamut(lab_d65) -> tuple[np.ndarray, bool]:
    """Linear sRGB of a CIELAB D65 colour, mapped into the gamut at constant L* and hue.

    Parameters
    ----------
    lab_d65 : (3,) array_like
        CIELAB (D65) with L* in [0, 100].

    Returns
    -------
    rgb_linear : (3,) float64 ndarray
        In [0, 1].
    in_gamut : bool
        True when no mapping was needed.
    """
    lab = np.asarray(lab_d65, dtype=np.float64)
    rgb = cs.linear_srgb_from_lab(lab)
    if _in_gamut(rgb):
        return np.clip(rgb, 0.0, 1.0), True
    chroma = float(np.hypot(lab[1], lab[2]))
    hue = float(np.arctan2(lab[2], lab[1]))
    lo, hi = 0.0, chroma  # lo is in gamut (neutral), hi is not
    while hi - lo > 1e-6:
        mid = 0.5 * (lo + hi)
        trial = np.array([lab[0], mid * np.cos(hue), mid * np.sin(hue)])
        if _in_gamut(cs.linear_srgb_from_lab(trial)):
            lo = mid
        else:
            hi = mid
    mapped = cs.linear_srgb_from_lab(np.array([lab[0], lo * np.cos(hue), lo * np.sin(hue)]))
    return np.clip(mapped, 0.0, 1.0), False


def _tuple3(x) -> tuple[float, float, float]:
    return (float(x[0]), float(x[1]), float(x[2]))


@functools.lru_cache(maxsize=65536)
def parse_colour(text: str) -> ColourSpec:
    """Parse a catalog colour cell.

    Parameters
    ----------
    text : str
        ``#RRGGBB``, ``lab(L, a, b)`` or ``lab50(L, a, b)``.

    Returns
    -------
    ColourSpec

    Raises
    ------
    ColourSyntaxError
        For anything else, or numbers out of range; the message says which.

    Examples
    --------
    >>> parse_colour("#ffffff").linear
    (1.0, 1.0, 1.0)
    """
    s = text.strip()
    if not s:
        raise ColourSyntaxError("colour is empty")
    m = _HEX_RE.fullmatch(s)
    if m:
        codes = np.array([int(m.group(1)[i : i + 2], 16) for i in (0, 2, 4)], dtype=np.float64)
        srgb = codes / 255.0
        linear = cs.srgb_decode(srgb)
        lab = cs.lab_from_linear_srgb(linear)
        return ColourSpec(text, "srgb8", _tuple3(linear), _tuple3(srgb), _tuple3(lab))
    if s.startswith("#"):
        raise ColourSyntaxError(f"{s!r} is not a #RRGGBB colour (six hexadecimal digits)")
    m = _LAB_RE.fullmatch(s)
    if not m:
        if s.lower().startswith(("lab", "lab50")):
            raise ColourSyntaxError(f"{s!r} is not lab(L, a, b) / lab50(L, a, b) with three numbers")
        raise ColourSyntaxError(f"{s!r} is not a colour")
    kind = m.group(1).lower()
    values = np.array([float(m.group(i)) for i in (2, 3, 4)], dtype=np.float64)
    L, a, b = values
    if not (L_RANGE[0] <= L <= L_RANGE[1]):
        raise ColourSyntaxError(f"{s!r}: L* = {L:g} is outside [0, 100]")
    for name, v in (("a*", a), ("b*", b)):
        if not (AB_RANGE[0] <= v <= AB_RANGE[1]):
            raise ColourSyntaxError(f"{s!r}: {name} = {v:g} is outside [-128, 127]")
    if kind == "lab50":
        xyz_d50 = cs.xyz_from_lab(values, cs.WHITE_D50_XYZ)
        xyz_d65 = cs.bradford_adapt(xyz_d50, cs.WHITE_D50_XYZ, cs.WHITE_D65_XYZ)
        lab_d65 = cs.lab_from_xyz(xyz_d65, cs.WHITE_D65_XYZ)
        space = "lab-d50"
    else:
        lab_d65 = values
        space = "lab-d65"
    linear, in_gamut = map_lab_into_srgb_gamut(lab_d65)
    delta_e = 0.0
    if not in_gamut:
        delta_e = float(cs.delta_e_2000(lab_d65, cs.lab_from_linear_srgb(linear)))
    srgb = cs.srgb_encode(linear)
    return ColourSpec(text, space, _tuple3(linear), _tuple3(srgb), _tuple3(lab_d65), in_gamut, delta_e)


def _map_many_into_gamut(lab_d65: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised :func:`map_lab_into_srgb_gamut` for ``(N, 3)`` CIELAB D65 (same bisection)."""
    rgb = cs.linear_srgb_from_lab(lab_d65)
    ok = np.all((rgb >= -GAMUT_TOLERANCE) & (rgb <= 1.0 + GAMUT_TOLERANCE), axis=-1)
    bad = np.nonzero(~ok)[0]
    if bad.size:
        lab = lab_d65[bad]
        chroma = np.hypot(lab[:, 1], lab[:, 2])
        hue = np.arctan2(lab[:, 2], lab[:, 1])
        lo, hi = np.zeros_like(chroma), chroma.copy()
        while np.any(hi - lo > 1e-6):
            mid = 0.5 * (lo + hi)
            trial = np.stack([lab[:, 0], mid * np.cos(hue), mid * np.sin(hue)], axis=-1)
            t = cs.linear_srgb_from_lab(trial)
            inside = np.all((t >= -GAMUT_TOLERANCE) & (t <= 1.0 + GAMUT_TOLERANCE), axis=-1)
            active = hi - lo > 1e-6
            lo = np.where(active & inside, mid, lo)
            hi = np.where(active & ~inside, mid, hi)
        rgb[bad] = cs.linear_srgb_from_lab(np.stack([lab[:, 0], lo * np.cos(hue), lo * np.sin(hue)], axis=-1))
    return np.clip(rgb, 0.0, 1.0), ok


def parse_colours(texts) -> dict:
    """Parse many colour cells at once (vectorised); same results as :func:`parse_colour`.

    Parameters
    ----------
    texts : iterable of str

    Returns
    -------
    dict
        ``{text: ColourSpec or ColourSyntaxError}`` for every distinct text.
    """
    out: dict = {}
    hex_texts, hex_codes, lab_texts, lab_values, lab_kinds = [], [], [], [], []
    for text in dict.fromkeys(texts):
        s = text.strip()
        m = _HEX_RE.fullmatch(s)
        if m:
            h = m.group(1)
            hex_texts.append(text)
            hex_codes.append((int(h[0:2], 16), int(h[2:4], 16), int(h[4:6], 16)))
            continue
        m = _LAB_RE.fullmatch(s)
        if m:
            values = (float(m.group(2)), float(m.group(3)), float(m.group(4)))
            if L_RANGE[0] <= values[0] <= L_RANGE[1] and all(AB_RANGE[0] <= v <= AB_RANGE[1] for v in values[1:]):
                lab_texts.append(text)
                lab_values.append(values)
                lab_kinds.append(m.group(1).lower() == "lab50")
                continue
        try:  # the slow path gives the exact error message
            out[text] = parse_colour(text)
        except ColourSyntaxError as exc:
            out[text] = exc
    if hex_texts:
        srgb = np.asarray(hex_codes, dtype=np.float64) / 255.0
        linear = cs.srgb_decode(srgb)
        lab = cs.lab_from_linear_srgb(linear)
        for i, text in enumerate(hex_texts):
            out[text] = ColourSpec(text, "srgb8", _tuple3(linear[i]), _tuple3(srgb[i]), _tuple3(lab[i]))
    if lab_texts:
        values = np.asarray(lab_values, dtype=np.float64)
        d50 = np.asarray(lab_kinds)
        lab_d65 = values.copy()
        if d50.any():
            xyz_d50 = cs.xyz_from_lab(values[d50], cs.WHITE_D50_XYZ)
            xyz_d65 = cs.bradford_adapt(xyz_d50, cs.WHITE_D50_XYZ, cs.WHITE_D65_XYZ)
            lab_d65[d50] = cs.lab_from_xyz(xyz_d65, cs.WHITE_D65_XYZ)
        linear, ok = _map_many_into_gamut(lab_d65)
        delta_e = np.zeros(len(lab_texts))
        if not ok.all():
            delta_e[~ok] = cs.delta_e_2000(lab_d65[~ok], cs.lab_from_linear_srgb(linear[~ok]))
        srgb = cs.srgb_encode(linear)
        for i, text in enumerate(lab_texts):
            out[text] = ColourSpec(text, "lab-d50" if d50[i] else "lab-d65", _tuple3(linear[i]), _tuple3(srgb[i]),
                                   _tuple3(lab_d65[i]), bool(ok[i]), float(delta_e[i]))
    return out
