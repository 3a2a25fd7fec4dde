"""Render settings: frozen dataclasses that say how a render is made (not what is rendered).

A :class:`RenderSettings` is plain data, hashable and picklable, so that batch cache keys and
Dask tasks can carry it.  Validation happens in ``__post_init__`` and raises
:class:`~variantshot.errors.RenderError` naming the field and what is accepted.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import RenderError

MODES = ("full", "baseline")


@dataclass(frozen=True)
class RenderSettings:
    """How to render one image.

    Parameters
    ----------
    width, height : int
        Image size in pixels.
    spp : int
        Samples per pixel.
    seed : int
        Seed of the sample hash; the same seed gives the same image bit for bit on any
        thread count.
    max_depth : int
        Safety net on the path length, in path segments from the camera (1: emitters seen
        directly, 2: direct lighting, 3: one indirect bounce, ...).  Russian roulette ends
        paths; the cap only stops pathological scenes such as a closed white mirror box.  Its
        bias is below ``albedo**max_depth``, invisible at the default 256.
    threads : int or None
        numba threads for this render (None: all cores).  Never changes the image.
    camera_name : str or None
        Name of the glTF camera to use (None: the first camera, or a framed front view).
    aperture_f_number : float or None
        Thin-lens f-number for depth of field (None: pinhole).  The lens focal length follows
        from the camera's vertical field of view on a 24 mm tall sensor (full-frame, common
        practice, no source).
    focus_distance_m : float or None
        Distance of the plane in focus, metres along the view axis (None: the distance to
        the centre of the scene's bounding box).
    mode : {"full", "baseline"}
        ``"full"``: next-event estimation to every light with multiple importance sampling;
        ``"baseline"``: BSDF sampling only (plain path tracing), for comparisons.
    wave_spp : int
        Samples per pixel per pass; ``progress`` is called between passes.
    noise_target : float or None
        Adaptive sampling: after ``adaptive_min_spp`` samples, and after every pass from then
        on, each ``noise_tile_px`` square tile whose relative standard error of the luminance
        (``sqrt(mean var_Y) / max(mean Y, noise_floor x image mean Y)``, from the film's own
        variance) is at or below this target stops taking samples; ``spp`` becomes the cap.
        None: every pixel takes ``spp`` samples (fixed-spp render).
    adaptive_min_spp : int
        Samples every pixel takes before the first stopping test.
    noise_tile_px : int
        Side of the tiles the stopping test pools (8: 64 pixels, so the variance estimate of
        a tile is steady after a few samples).
    noise_floor : float
        Darkest luminance the relative error is taken against, as a fraction of the image's
        mean luminance (keeps near-black tiles from sampling for ever).
    """

    width: int = 512
    height: int = 512
    spp: int = 64
    seed: int = 0
    max_depth: int = 256
    threads: int | None = None
    camera_name: str | None = None
    aperture_f_number: float | None = None
    focus_distance_m: float | None = None
    mode: str = "full"
    wave_spp: int = 8
    noise_target: float | None = None
    adaptive_min_spp: int = 16
    noise_tile_px: int = 8
    noise_floor: float = 0.05

    def __post_init__(self) -> None:
        for name in ("width", "height", "spp", "max_depth", "wave_spp", "noise_tile_px"):
            value = getattr(self, name)
            if not isinstance(value, int) or isinstance(value, bool) or value < 1:
                raise RenderError(f"RenderSettings.{name}: {value!r} is not accepted (a whole number >= 1)")
        if not isinstance(self.seed, int) or not (0 <= self.seed < 2**32):
            raise RenderError(f"RenderSettings.seed: {self.seed!r} is not accepted (a whole number 0 .. 2**32-1)")
        if self.threads is not None and (not isinstance(self.threads, int) or self.threads < 1):
            raise RenderError(f"RenderSettings.threads: {self.threads!r} is not accepted (None or >= 1)")
        if self.noise_target is not None and not (isinstance(self.noise_target, (int, float))
                                                  and not isinstance(self.noise_target, bool)
                                                  and self.noise_target > 0):
            raise RenderError(f"RenderSettings.noise_target: {self.noise_target!r} is not accepted "
                              "(a number > 0, e.g. 0.05, or None for a fixed spp)")
        if (not isinstance(self.adaptive_min_spp, int) or isinstance(self.adaptive_min_spp, bool)
                or self.adaptive_min_spp < 2):
            raise RenderError(f"RenderSettings.adaptive_min_spp: {self.adaptive_min_spp!r} is not accepted "
                              "(a whole number >= 2)")
        if not (isinstance(self.noise_floor, (int, float)) and 0 <= self.noise_floor):
            raise RenderError(f"RenderSettings.noise_floor: {self.noise_floor!r} is not accepted (a number >= 0)")
        if self.mode not in MODES:
            raise RenderError(f"RenderSettings.mode: {self.mode!r} is not accepted ({', '.join(MODES)})")
        if self.aperture_f_number is not None and not self.aperture_f_number > 0:
            raise RenderError(
                f"RenderSettings.aperture_f_number: {self.aperture_f_number!r} is not accepted (a number > 0 or None)"
            )
        if self.focus_distance_m is not None and not self.focus_distance_m > 0:
            raise RenderError(
                f"RenderSettings.focus_distance_m: {self.focus_distance_m!r} is not accepted (a number > 0 or None)"
            )
