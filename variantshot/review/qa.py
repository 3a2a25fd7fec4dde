"""Shot QA: colour, framing and image checks, each passing, warning or failing with its figure.

:func:`run_qa` turns one shot's image (and, when the batch has it, the film and the variant's
swatch) into a :class:`QAResult` whose :meth:`QAResult.to_dict` is the manifest's ``"qa"`` value
(BRIEF section 7): ``{"status", "checks": [{"name", "status", "value", "limit", "message"}]}``
plus, by extension, ``"product_colour"`` (the product's mean rendered colour).  :data:`CAUTION`
is the line every QA report and sheet shows.

The limits are in :class:`QASettings`.  Except the colour limit (the issue's default of 2.0
ΔE2000), they are trade practice for marketplace main images with no written authority behind
them (common practice, no source): the product's longest side fills about 85 % of the frame,
the product is centred and not cut by an edge, the background is pure white (255, 255, 255),
highlights are not blown out.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import metrics

__all__ = [
    "CAUTION",
    "PASS",
    "WARN",
    "FAIL",
    "QASettings",
    "Check",
    "QAResult",
    "run_qa",
    "run_qa_on_file",
    "swatch_delta_e",
    "worst_status",
]

CAUTION = (
    "Rendered colours are a visual guide: check physical samples before publishing, "
    "and follow local advertising rules."
)

PASS, WARN, FAIL = "pass", "warn", "fail"
_RANK = {PASS: 0, WARN: 1, FAIL: 2}


def worst_status(statuses) -> str:
    """The most severe of a sequence of ``"pass" | "warn" | "fail"`` (``"pass"`` when empty)."""
    worst = PASS
    for s in statuses:
        if _RANK.get(s, 2) > _RANK[worst]:
            worst = s if s in _RANK else FAIL
    return worst


@dataclass(frozen=True)
class QASettings:
    """QA limits; every figure is a fraction of 1 unless its name says otherwise.

    Attributes
    ----------
    delta_e_max : float
        Swatch ΔE2000 above which colour fails (default 2.0: about the limit of a just-noticeable
        difference on screen; common practice, no source).
    delta_e_warn : float
        Swatch ΔE2000 above which colour warns (default 1.0: what the calibrated chain keeps
        mid-tone swatches within).
    fill_target : float
        Target share of the frame taken by the product's longest side (0.85; common practice,
        no source).
    fill_pass_tol, fill_warn_tol : float
        Pass within ``target ± fill_pass_tol`` (0.05, i.e. 0.80-0.90), warn within
        ``target ± fill_warn_tol`` (0.10, i.e. 0.75-0.95), fail outside.
    centring_pass, centring_warn : float
        Largest offset of the product's box centre from the frame centre, as a share of the
        frame side: pass up to 0.02, warn up to 0.05.
    edge_clip_warn : float
        Share of border pixels the product may cover before failing; 0 (any contact fails).
    purity_pass, purity_warn : float
        Share of exactly-white background pixels outside the product's shadow zone, white
        background only: pass from 0.999, warn from 0.99.
    shadow_margin_frac : float
        How far the shadow zone reaches beyond the product's box (share of the frame).
    highlights_pass, highlights_warn : float
        Share of product pixels blown out to (255, 255, 255): pass up to 0.005, warn up to 0.02.
    noise_target : float
        Default relative standard error target when the quality preset gives none (0.05).
    noise_warn_factor : float
        Noise warns up to ``factor * target`` (2.0) and fails above.
    coverage_threshold : float
        Alpha from which a pixel counts as product (0.5).
    """

    delta_e_max: float = 2.0
    delta_e_warn: float = 1.0
    fill_target: float = 0.85
    fill_pass_tol: float = 0.05
    fill_warn_tol: float = 0.10
    centring_pass: float = 0.02
    centring_warn: float = 0.05
    edge_clip_warn: float = 0.0
    purity_pass: float = 0.999
    purity_warn: float = 0.99
    shadow_margin_frac: float = 0.08
    highlights_pass: float = 0.005
    highlights_warn: float = 0.02
    noise_target: float = 0.05
    noise_warn_factor: float = 2.0
    coverage_threshold: float = 0.5

    def __post_init__(self):
        if not 0.0 <= self.delta_e_warn <= self.delta_e_max:
            raise ValueError(
                f"QASettings: need 0 <= delta_e_warn ({self.delta_e_warn}) <= delta_e_max "
                f"({self.delta_e_max})"
            )
        if self.noise_target <= 0:
            raise ValueError(f"QASettings: noise_target must be > 0, got {self.noise_target}")


def _grow(mask: np.ndarray) -> np.ndarray:
    """``mask`` dilated by one pixel (8-neighbourhood)."""
    padded = np.pad(mask, 1)
    h, w = mask.shape
    out = np.zeros_like(mask)
    for dy in (0, 1, 2):
        for dx in (0, 1, 2):
            out |= padded[dy:dy + h, dx:dx + w]
    return out


@dataclass(frozen=True)
class Check:
    """One QA check: its name, verdict, measured figure, the limit it was judged by, a message."""

    name: str
    status: str
    value: float | None
    limit: Any
    message: str

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class QAResult:
    """Every check of one shot and the overall verdict (the worst check)."""

    checks: tuple[Check, ...]
    product_colour: dict | None = None
    status: str = field(init=False)

    def __post_init__(self):
        object.__setattr__(self, "status", worst_status(c.status for c in self.checks))

    def check(self, name: str) -> Check | None:
        return next((c for c in self.checks if c.name == name), None)

    def to_dict(self) -> dict:
        """The manifest's ``"qa"`` value (JSON-ready)."""
        out = {"status": self.status, "checks": [c.to_dict() for c in self.checks]}
        if self.product_colour is not None:
            out["product_colour"] = self.product_colour
        return out


def _r(x: float, nd: int = 4) -> float | None:
    if x is None or not np.isfinite(x):
        return None
    return round(float(x), nd)


def _upper(name, value, pass_max, warn_max, fmt, what) -> Check:
    """A check where smaller is better."""
    if value <= pass_max:
        status = PASS
    elif value <= warn_max:
        status = WARN
    else:
        status = FAIL
    limit = warn_max
    message = f"{what} {fmt(value)} (pass <= {fmt(pass_max)}, fail > {fmt(warn_max)})"
    return Check(name, status, _r(value), _r(limit), message)


def _hex(code) -> str:
    c = np.clip(np.rint(np.asarray(code, dtype=np.float64)), 0, 255).astype(int)
    return "#{:02X}{:02X}{:02X}".format(*c)


def swatch_delta_e(swatch_srgb8, colour_lab_d65) -> float:
    """ΔE2000 between a rendered swatch and the catalog colour.

    Parameters
    ----------
    swatch_srgb8 : (3,) float, or (h, w, 3) uint8 ndarray
        The swatch's 8-bit sRGB code (a mean may be fractional), or the swatch image, whose
        central half (in each direction) is averaged in linear light.
    colour_lab_d65 : (3,) float
        The catalog colour in CIELAB, D65 white.

    Returns
    -------
    delta_e : float
    """
    from ..imaging.colour import delta_e_2000, lab_from_srgb8

    code = np.asarray(swatch_srgb8)
    if code.ndim == 3:
        h, w = code.shape[:2]
        centre = code[h // 4 : h - h // 4, w // 4 : w - w // 4, :3]
        code = metrics.mean_srgb8(centre, np.ones(centre.shape[:2], bool))
    lab = lab_from_srgb8(np.asarray(code, dtype=np.float64).reshape(3))
    return float(delta_e_2000(lab, np.asarray(colour_lab_d65, dtype=np.float64).reshape(3)))


def run_qa(
    rgb_srgb8,
    *,
    coverage=None,
    film=None,
    background: str = "white",
    shadow=None,
    colour_lab_d65=None,
    swatch_srgb8=None,
    noise_target: float | None = None,
    settings: QASettings | None = None,
) -> QAResult:
    """Run every QA check that the given data allows on one shot.

    Parameters
    ----------
    rgb_srgb8 : (H, W, 3) or (H, W, 4) uint8 ndarray
        The shot as written (8-bit sRGB); a 4th channel is taken as the product's coverage when
        ``coverage`` and ``film`` give none.
    coverage : (H, W) float ndarray in [0, 1], optional
        The product's coverage (the film's alpha pass).  Without it (and without an alpha
        channel) the product is taken to be every non-white pixel, which includes its shadow.
    film : Film, optional
        The shot's film (``radiance``, ``variance``, ``alpha``, same (H, W) as the image); gives
        the coverage and the residual-noise check.
    background : {"white", "transparent", "backdrop"}
        Background purity is judged on ``"white"`` only.
    shadow : (H, W) float ndarray, optional
        The product's shadow on the background as the compositing step found it
        (:func:`variantshot.imaging.background.shadow_ratio`: 1.0 = unshadowed).  Purity is then
        judged on every non-product pixel with ``shadow >= 1``; without it, outside a geometric
        shadow zone around the product's box (:func:`.metrics.shadow_zone`).
    colour_lab_d65 : (3,) float, optional
        The variant's catalog colour, CIELAB D65.  With ``swatch_srgb8`` it gives the colour check.
    swatch_srgb8 : (3,) float or (h, w, 3) uint8 ndarray, optional
        The variant's swatch as rendered through the same chain (see :mod:`.swatch`).
    noise_target : float, optional
        Relative standard error the quality preset aims for; ``settings.noise_target`` if None.
    settings : QASettings, optional

    Returns
    -------
    QAResult
        Checks, in order, as the data allows: ``colour_delta_e``, ``fill``, ``centring``,
        ``edge_clipping``, ``background_purity``, ``clipped_highlights``, ``noise``.
        ``product_colour`` holds the product's mean rendered colour (hex, 8-bit mean, Lab) and,
        with a catalog colour, its ΔE2000 (a report: lighting and shading make it differ from
        the swatch's; it is not judged).
    """
    s = settings or QASettings()
    rgba = np.asarray(rgb_srgb8)
    if rgba.ndim != 3 or rgba.shape[2] not in (3, 4):
        raise ValueError(f"run_qa: image must be (H, W, 3) or (H, W, 4), got {rgba.shape}")
    if rgba.dtype != np.uint8:
        raise TypeError(f"run_qa: image must be uint8 (8-bit codes), got {rgba.dtype}")
    rgb = rgba[:, :, :3]
    hw = rgb.shape[:2]

    if coverage is None and film is not None:
        coverage = getattr(film, "alpha", None)
    if coverage is None and rgba.shape[2] == 4:
        coverage = rgba[:, :, 3].astype(np.float64) / 255.0
    if coverage is not None:
        coverage = np.asarray(coverage)
        if coverage.shape != hw:
            raise ValueError(f"run_qa: coverage {coverage.shape} does not match the image {hw}")
        mask = metrics.mask_from_coverage(coverage, s.coverage_threshold)
        mask_note = ""
    else:
        mask = metrics.mask_from_non_white(rgb)
        mask_note = " (product taken as every non-white pixel: no coverage pass)"

    checks: list[Check] = []
    product_colour = None
    lab_ref = None if colour_lab_d65 is None else np.asarray(colour_lab_d65, np.float64).reshape(3)

    # 1. colour: the swatch through the same chain, against the catalog colour
    if lab_ref is not None and swatch_srgb8 is not None:
        de = swatch_delta_e(swatch_srgb8, lab_ref)
        c = _upper("colour_delta_e", de, s.delta_e_warn, s.delta_e_max, lambda v: f"{v:.2f}",
                   "swatch ΔE2000")
        checks.append(c)

    # 2. framing
    fill = metrics.fill_ratio(mask)
    lo_p, hi_p = s.fill_target - s.fill_pass_tol, s.fill_target + s.fill_pass_tol
    lo_w, hi_w = s.fill_target - s.fill_warn_tol, s.fill_target + s.fill_warn_tol
    if lo_p <= fill <= hi_p:
        st = PASS
    elif lo_w <= fill <= hi_w:
        st = WARN
    else:
        st = FAIL
    if not mask.any():
        msg = "no product pixels found" + mask_note
    else:
        msg = (f"longest side fills {fill:.0%} of the frame (target {s.fill_target:.0%}, "
               f"pass {lo_p:.0%}-{hi_p:.0%}, warn {lo_w:.0%}-{hi_w:.0%})" + mask_note)
    checks.append(Check("fill", st, _r(fill), [_r(lo_w), _r(hi_w)], msg))

    dx, dy = metrics.centring_offset(mask)
    if np.isfinite(dx):
        off = max(abs(dx), abs(dy))
        c = _upper("centring", off, s.centring_pass, s.centring_warn, lambda v: f"{v:.1%}",
                   "box centre off the frame centre by")
        checks.append(Check(c.name, c.status, c.value, c.limit,
                            c.message + f"; dx {dx:+.1%}, dy {dy:+.1%}"))
    else:
        checks.append(Check("centring", FAIL, None, _r(s.centring_warn), "no product to centre"))

    edge = metrics.edge_clipping(mask)
    checks.append(Check(
        "edge_clipping",
        PASS if edge == 0 else (WARN if edge <= s.edge_clip_warn else FAIL),
        _r(edge, 5),
        _r(s.edge_clip_warn, 5),
        "product clear of the frame edges" if edge == 0
        else f"product touches the frame edge on {edge:.2%} of the border pixels (likely cut)",
    ))

    # 3. background purity, white background only
    if background == "white":
        if shadow is not None:
            shadow = np.asarray(shadow, dtype=np.float64)
            if shadow.shape != hw:
                raise ValueError(f"run_qa: shadow {shadow.shape} does not match the image {hw}")
            # the product (any coverage, with a 1-pixel guard band for its anti-aliased edge)
            # and the shadow the compositor applied; everything else must be exactly white
            touched = mask if coverage is None else np.asarray(coverage, dtype=np.float64) > 0
            zone = _grow(touched | mask) | (shadow < 1.0)
        else:
            zone = metrics.shadow_zone(mask, s.shadow_margin_frac) | mask
        purity = metrics.white_purity(rgb, zone)
        st = PASS if purity >= s.purity_pass else (WARN if purity >= s.purity_warn else FAIL)
        checks.append(Check(
            "background_purity", st, _r(purity, 5), _r(s.purity_warn, 5),
            f"{purity:.2%} of the background outside the shadow zone is exactly (255, 255, 255) "
            f"(pass >= {s.purity_pass:.1%}, fail < {s.purity_warn:.0%})",
        ))

    # 4. clipped highlights on the product
    if mask.any():
        hl = metrics.clipped_highlights(rgb, mask)
        checks.append(_upper("clipped_highlights", hl, s.highlights_pass, s.highlights_warn,
                             lambda v: f"{v:.2%}", "product pixels blown out to white:"))

    # 5. residual noise, from the film's variance
    if film is not None and getattr(film, "variance", None) is not None and mask.any():
        target = float(noise_target if noise_target is not None else s.noise_target)
        rse = metrics.relative_standard_error(film.radiance, film.variance, mask)
        if np.isfinite(rse):
            checks.append(_upper("noise", rse, target, s.noise_warn_factor * target,
                                 lambda v: f"{v:.3f}",
                                 "median relative standard error of the film (before denoising)"))

    # report: the product's mean rendered colour
    mean = metrics.mean_srgb8(rgb, mask) if coverage is not None else None
    if mean is not None:
        from ..imaging.colour import delta_e_2000, lab_from_srgb8

        lab = lab_from_srgb8(mean)
        product_colour = {
            "hex": _hex(mean),
            "srgb8": [_r(v, 2) for v in mean],
            "lab_d65": [_r(v, 2) for v in lab],
        }
        if lab_ref is not None:
            product_colour["delta_e_2000"] = _r(float(delta_e_2000(lab, lab_ref)), 2)
    return QAResult(tuple(checks), product_colour)


def run_qa_on_file(path, *, background: str = "white", settings: QASettings | None = None) -> QAResult:
    """Image-only QA of a written shot (no film, no swatch): framing, purity, highlights.

    A PNG with an alpha channel gives the coverage; otherwise non-white pixels are the product.
    """
    from PIL import Image

    path = Path(path)
    with Image.open(path) as im:
        im.load()
        mode = "RGBA" if ("A" in im.getbands() or "transparency" in im.info) else "RGB"
        arr = np.asarray(im.convert(mode))
    return run_qa(arr, background=background, settings=settings)
