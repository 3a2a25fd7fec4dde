"""Quality presets (``draft``, ``proof``, ``final``) and output-format settings of a batch.

A preset says how big and how clean a shot is rendered; :class:`OutputSpec` says which files are
made from that one render (formats and extra sizes).  Both are frozen, hashable dataclasses that
enter every shot's cache key.

========= ========================= =========== ============ ========
preset    longer side (px)          spp         noise target denoise
========= ========================= =========== ============ ========
draft     384                       12 .. 24    0.35         yes
proof     1024                      12 .. 128   0.22         yes
final     2048                      12 .. 256   0.165        yes
========= ========================= =========== ============ ========

Sampling is adaptive: every pixel takes the first count, then each 8 x 8 tile stops as soon as
its relative standard error (raw film, before denoising) is at or below 0.9 x the noise target
(``ADAPTIVE_TARGET_FRACTION``; final: 0.1485, proof: 0.198); the second count is the cap.  QA's ``noise`` check measures the same raw film against the same
target (``review.qa``: warn above it, fail above twice it), so a shot that converged passes and
only tiles that hit the cap can make it warn.

``final`` is at least 2000 px on the longer side: marketplaces ask for 1000-1600 px or more so
that zoom works, and 2000 px masters are usual (common practice, no source).  ``draft`` is sized
so that the bundled demo catalog renders in under three minutes on two cores.  The noise targets
are for the raw film of a denoised shot: on the first demo shot (``tests/benchmarks/bench_quality.py``,
256 px) a raw tile target of 0.15 gave about 2 % relative RMSE after the denoiser against a
1024-spp reference (0.30: 3.2 %, 0.08: 0.8 %), at a mean of about 30 samples per sampled pixel.
Turn the denoiser off (``--no-denoise``) and the same targets leave visible grain: lower them.
"""

from __future__ import annotations

import dataclasses
import fnmatch
from dataclasses import dataclass

from ..errors import InputError

__all__ = ["Quality", "QUALITY_PRESETS", "quality_preset", "OutputSpec", "BACKGROUNDS", "IMAGE_FORMATS", "parse_formats", "parse_sizes"]

BACKGROUNDS = ("white", "transparent", "backdrop")

#: Adaptive renders stop tiles at this fraction of the preset's noise target: QA's statistic
#: (median over product pixels of each pixel's relative standard error) can come out a few
#: per cent above the pooled 8 x 8 tile figure the render stops on, and a converged shot must
#: pass QA's check at the full target.
ADAPTIVE_TARGET_FRACTION = 0.9
IMAGE_FORMATS = ("png", "jpg", "webp")


@dataclass(frozen=True)
class Quality:
    """How one shot is rendered.

    Parameters
    ----------
    name : str
    long_side_px : int
        Pixels on the longer side of the frame.
    aspect_ratio : float
        Width / height (1.0: the square frame marketplaces use).
    spp : int
        Samples per pixel of the shot render (the product-free render for the shadow catcher
        uses the same count and seed, so their noise is correlated).
    noise_target : float
        Relative standard error of the raw film (before denoising) the preset aims at.  With
        ``adaptive`` it sets the render's stopping target (``RenderSettings.noise_target`` =
        ``ADAPTIVE_TARGET_FRACTION`` x this: 8 x 8 tiles stop once their luminance's relative
        standard error is at or below it, and
        ``spp`` is only the cap); QA's ``noise`` check measures the same film against the same
        number, so a shot that converged passes and one that hit the cap warns.
    adaptive : bool
        Adaptive sampling (see ``noise_target``); False: every pixel takes ``spp`` samples.
    min_spp : int
        Samples every pixel takes before the first stopping test (adaptive only).
    denoise : bool
        Run the denoiser when one is available.
    max_depth : int
        Path length cap.
    seed : int
        Sample seed (same seed, same image, any thread count).
    """

    name: str
    long_side_px: int
    spp: int
    noise_target: float
    denoise: bool = True
    max_depth: int = 8
    aspect_ratio: float = 1.0
    seed: int = 0
    adaptive: bool = False
    min_spp: int = 16

    @property
    def width(self) -> int:
        return self.long_side_px if self.aspect_ratio >= 1 else max(1, round(self.long_side_px * self.aspect_ratio))

    @property
    def height(self) -> int:
        return self.long_side_px if self.aspect_ratio <= 1 else max(1, round(self.long_side_px / self.aspect_ratio))

    def replace(self, **changes) -> Quality:
        return dataclasses.replace(self, **changes)


QUALITY_PRESETS: dict[str, Quality] = {
    "draft": Quality("draft", long_side_px=384, spp=24, noise_target=0.35, max_depth=4, adaptive=True, min_spp=12),
    "proof": Quality("proof", long_side_px=1024, spp=128, noise_target=0.22, max_depth=8, adaptive=True, min_spp=12),
    "final": Quality("final", long_side_px=2048, spp=256, noise_target=0.165, max_depth=12, adaptive=True,
                     min_spp=12),
}


def quality_preset(name_or_quality) -> Quality:
    """The preset called ``name`` (or a :class:`Quality` passed through).

    Raises
    ------
    InputError
        Unknown name; the message lists the presets.
    """
    if isinstance(name_or_quality, Quality):
        return name_or_quality
    try:
        return QUALITY_PRESETS[str(name_or_quality)]
    except KeyError:
        raise InputError(f"unknown quality {name_or_quality!r}", accepted=", ".join(QUALITY_PRESETS)) from None


@dataclass(frozen=True)
class OutputSpec:
    """Which image files a shot becomes, all from one render.

    Parameters
    ----------
    background : {"white", "transparent", "backdrop"}
    formats : tuple of str
        ``png``, ``jpg``, ``webp``; the first is the primary image ``shots/<id>.<fmt>``.
        ``transparent`` needs an alpha channel, so ``jpg`` is refused with it.
    sizes : tuple of int
        Extra sizes (longer side, px) written as ``shots/<id>@<size>.<fmt>`` for every format,
        downsampled from the full-size render with an area filter.
    jpeg_quality : int
    """

    background: str = "white"
    formats: tuple[str, ...] = ("png",)
    sizes: tuple[int, ...] = ()
    jpeg_quality: int = 92

    def __post_init__(self):
        if self.background not in BACKGROUNDS:
            raise InputError(f"unknown background {self.background!r}", accepted=", ".join(BACKGROUNDS))
        if not self.formats:
            raise InputError("no output format given", accepted=", ".join(IMAGE_FORMATS))
        for f in self.formats:
            if f not in IMAGE_FORMATS:
                raise InputError(f"unknown output format {f!r}", accepted=", ".join(IMAGE_FORMATS))
        if self.background == "transparent" and "jpg" in self.formats:
            raise InputError("jpg has no alpha channel, so it cannot carry a transparent background",
                             accepted="png or webp with --background transparent")
        for s in self.sizes:
            if not isinstance(s, int) or s < 16:
                raise InputError(f"output size {s!r} is not accepted", accepted="whole numbers >= 16 (pixels, longer side)")

    def replace(self, **changes) -> OutputSpec:
        return dataclasses.replace(self, **changes)


def parse_formats(text: str) -> tuple[str, ...]:
    """``"png,jpg"`` (or ``"png;jpg"``) -> ``("png", "jpg")`` (``jpeg`` is accepted for ``jpg``)."""
    out = []
    for part in str(text).replace(";", ",").split(","):
        p = part.strip().lower().lstrip(".")
        if not p:
            continue
        p = "jpg" if p == "jpeg" else p
        if p not in IMAGE_FORMATS:
            raise InputError(f"unknown output format {part.strip()!r}", accepted=", ".join(IMAGE_FORMATS))
        if p not in out:
            out.append(p)
    if not out:
        raise InputError("no output format given", accepted=", ".join(IMAGE_FORMATS))
    return tuple(out)


def parse_sizes(text: str) -> tuple[int, ...]:
    """``"1600,1000"`` -> ``(1600, 1000)``."""
    out = []
    for part in str(text).split(","):
        p = part.strip()
        if not p:
            continue
        if not p.isdigit() or int(p) < 16:
            raise InputError(f"output size {p!r} is not accepted", accepted="whole numbers >= 16 (pixels, longer side)")
        out.append(int(p))
    return tuple(dict.fromkeys(out))


def match_only(shot_id: str, patterns) -> bool:
    """``--only GLOB``: whether a shot id matches any of the (case-sensitive) glob patterns."""
    return any(fnmatch.fnmatchcase(shot_id, p) for p in patterns)
