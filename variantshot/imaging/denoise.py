"""Denoising of rendered radiance with Intel Open Image Denoise (OIDN, CPU device, "RT" filter).

Where it sits in a shot
-----------------------
``film -> denoise(film.radiance, albedo=film.albedo, normal=film.normal) -> background
compositing (exposure) -> tone / sRGB -> file``.  The denoiser sees scene-referred linear
HDR radiance (``hdr=True``), before any exposure, tone curve or background.  Background
compositing (:mod:`variantshot.imaging.background`) comes *after* it and writes unshadowed
white-background pixels as exactly 1.0 whatever the denoiser did there, so they stay code 255.
:func:`denoise_film` is the one-call form the batch uses; it also passes pixels whose camera
ray saw no surface (``film.alpha == 0``, e.g. a directly seen environment) through bit for bit.

Colour fidelity
---------------
OIDN's network leaves a small low-frequency bias on noisy input: on flat swatches at a
per-pixel relative noise of 0.3 (gamma-distributed, like Monte Carlo estimates) the denoised
mean moved by up to 0.7 ΔE2000 from the input's own mean, and by 1.4 with ``clean_aux``
(measured, see ``tests/benchmarks/bench_denoise.py``).  Unless ``preserve_local_mean=False``,
the result is therefore re-normalised per channel so that its local means (box mean over the
in-image part of a ``(2r+1)²`` window, ``r = mean_radius_px``) match the input's:

    out' = out * box(ref) / box(out),    ref = min(noisy, 8 * out)

``ref`` clamps the input at 8× the denoised value so that fireflies the denoiser removed are
not smeared back as bright squares (an exponential sample, the noisiest a one-sample pixel
gets, exceeds 8× its mean with probability e^-8 = 0.03 %), and the factor is clipped to
[0.8, 1.25] so that the correction can only undo a bias, never repaint an image.  The price is a
low-frequency noise of relative size ``noise / (2r + 1)`` (0.9 % at r = 16 and noise 0.3).

Non-finite input
----------------
NaN and -inf radiance become 0, +inf becomes the largest finite value of that channel, and
negative radiance is clipped to 0 (HDR input must be non-negative), with one logged warning
per call naming the count; ``nonfinite="raise"`` raises :class:`~variantshot.errors.RenderError`
instead.  Non-finite albedo / normal values become 0.  A NaN fed to the network would spread
over its whole receptive field, hence the guard.

Devices and processes
---------------------
Creating an OIDN device costs milliseconds and loads the network weights once, so devices are
cached per (process, thread count) and created lazily on first use.  The cache is keyed by the
process id and cleared in a forked child, so a Dask or multiprocessing worker never touches its
parent's device (whose thread pool did not survive the fork).  Calls on one device are
serialised with a lock.  Thread count: the ``threads`` argument, else numba's current setting
(:func:`variantshot._jit.set_threads`) when numba is loaded, else all cores.  Thread affinity is
left off so OIDN's pool shares the cores with numba's.

Availability
------------
``pyoidn`` is a runtime dependency wherever PyPI has a wheel for it (Linux x86_64, Windows
x86_64, macOS x86_64 and arm64; see ``pyproject.toml``).  Elsewhere (e.g. Linux aarch64) or when
the library cannot run on the CPU, :func:`denoise` logs one warning and returns the sanitised
input unchanged; :func:`is_available` tells callers which happened.

References
----------
Intel Open Image Denoise 2.x API documentation, "RT" filter: inputs ``color`` / ``albedo`` /
``normal``, HDR colour non-negative linear, albedo in [0, 1], normals in [-1, 1] world or view
space, parameters ``hdr``, ``cleanAux``, ``quality``; device parameters ``numThreads`` and
``setAffinity``.
"""

from __future__ import annotations

import logging
import os
import sys
import threading

import numpy as np

from ..errors import RenderError

__all__ = [
    "QUALITIES",
    "MEAN_RADIUS_PX",
    "is_available",
    "denoise",
    "denoise_film",
    "restore_local_means",
]

log = logging.getLogger(__name__)

#: OIDN filter qualities by name (OIDN_QUALITY_* values of the OIDN 2.x API).
QUALITIES = {"default": 0, "fast": 4, "balanced": 5, "high": 6}
#: Radius (pixels) of the box window whose means the colour correction restores.
MEAN_RADIUS_PX = 16
# The correction's reference clamps the input at this multiple of the denoised value.
_FIREFLY_CLAMP = 8.0
# Bounds of the per-pixel correction factor.
_FACTOR_MIN, _FACTOR_MAX = 0.8, 1.25
_OIDN_FORMAT_FLOAT3 = 3  # OIDN_FORMAT_FLOAT3

_lock = threading.Lock()
_state: dict = {"pid": None, "devices": {}, "unavailable": None, "warned": False}


def _forget_devices() -> None:
    """Drop (without releasing) every cached device and renew the lock: used in a forked child
    (the lock may have been held by a parent thread that does not exist in the child)."""
    global _lock
    _lock = threading.Lock()
    _state["pid"] = os.getpid()
    _state["devices"] = {}
    _state["unavailable"] = None


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_devices)


def _resolve_threads(threads) -> int:
    if threads is not None:
        n = int(threads)
        if n < 1:
            raise ValueError(f"denoise: threads must be a positive integer or None, got {threads!r}")
        return n
    numba = sys.modules.get("numba")
    if numba is not None:
        return int(numba.get_num_threads())
    env = os.environ.get("NUMBA_NUM_THREADS")
    if env and env.isdigit() and int(env) > 0:
        return int(env)
    return os.cpu_count() or 1


def _load_pyoidn():
    """The ``pyoidn`` module, or None with the reason recorded when it cannot run here."""
    if _state["unavailable"] is not None:
        return None
    try:
        import pyoidn

        if not pyoidn.Device.is_cpu_available():
            raise RuntimeError("the OIDN CPU device is not supported on this processor")
    except Exception as exc:  # ImportError, OSError from dlopen, unsupported CPU
        _state["unavailable"] = f"{type(exc).__name__}: {exc}"
        return None
    return pyoidn


def is_available() -> bool:
    """True when the OIDN CPU denoiser can run in this process (``pyoidn`` importable, CPU supported)."""
    return _load_pyoidn() is not None


def _device(pyoidn, n_threads: int):
    """The committed CPU device of this process for ``n_threads``, created on first use."""
    if _state["pid"] != os.getpid():
        _forget_devices()
    dev = _state["devices"].get(n_threads)
    if dev is None:
        dev = pyoidn.Device(pyoidn.OIDN_DEVICE_TYPE_CPU)
        dev.set_int("numThreads", int(n_threads))
        dev.set_bool("setAffinity", False)
        dev.commit()
        err = dev.get_error()
        if err is not None:
            dev.release()
            raise RenderError(f"denoise: could not create the OIDN CPU device: {err}")
        _state["devices"][n_threads] = dev
    return dev


def _check_image(arr, name: str, shape=None) -> np.ndarray:
    a = np.asarray(arr)
    if a.dtype.kind != "f":
        raise TypeError(f"denoise: {name} must be a float array, got dtype {a.dtype}")
    if a.ndim != 3 or a.shape[2] != 3 or a.shape[0] == 0 or a.shape[1] == 0:
        raise ValueError(f"denoise: {name} must have shape (H, W, 3) with H, W > 0, got {a.shape}")
    if shape is not None and a.shape != shape:
        raise ValueError(f"denoise: {name} has shape {a.shape}, the radiance has {shape}")
    return a


def _sanitise_radiance(rgb: np.ndarray, nonfinite: str) -> np.ndarray:
    """float64 copy with NaN/-inf -> 0, +inf -> the channel's largest finite value, negatives -> 0."""
    out = np.array(rgb, dtype=np.float64, copy=True)
    bad = ~np.isfinite(out)
    n_bad = int(np.count_nonzero(bad))
    if n_bad:
        if nonfinite == "raise":
            r, c, k = (int(v) for v in np.argwhere(bad)[0])
            raise RenderError(
                f"denoise: radiance has {n_bad} non-finite values (first at row {r}, column {c}, "
                f"channel {k}: {out[r, c, k]}); accepted: finite values, or nonfinite='sanitize'"
            )
        finite = np.where(bad, -np.inf, out)
        top = np.maximum(finite.max(axis=(0, 1)), 0.0)  # (3,) largest finite per channel
        pos_inf = np.isposinf(out)
        out[bad] = 0.0
        out = np.where(pos_inf, top[None, None, :], out)
        log.warning("denoise: %d non-finite radiance values replaced (NaN/-inf by 0, +inf by the channel maximum)", n_bad)
    np.maximum(out, 0.0, out=out)
    return out


def _box_mean(a: np.ndarray, radius: int) -> np.ndarray:
    """Mean of ``a`` (H, W) or (H, W, C) over the in-image part of the (2r+1)² window of each pixel.

    Windows are cut at the border rather than padded: edge padding would repeat the border
    row's noise ``r`` times and bias the correction there.  The window is a rectangle, so the
    mean is separable: a running-sum mean down the columns, then along the rows.
    """
    out = np.asarray(a, np.float64)
    if radius <= 0:
        return out.copy()
    for axis in (0, 1):
        n = out.shape[axis]
        moved = np.moveaxis(out, axis, 0)
        # e[j] = sum of moved[: j - r] (0 before the image, the full sum after it), so the
        # window [i - r, i + r] cut to the image sums to e[i + 2r + 1] - e[i]
        e = np.zeros((n + 2 * radius + 1,) + moved.shape[1:], np.float64)
        np.cumsum(moved, axis=0, out=e[radius + 1 : radius + 1 + n])
        e[radius + 1 + n :] = e[radius + n]
        idx = np.arange(n)
        count = (np.minimum(idx + radius + 1, n) - np.maximum(idx - radius, 0)).astype(np.float64)
        sums = e[2 * radius + 1 : 2 * radius + 1 + n] - e[:n]
        out = np.moveaxis(sums / count.reshape((n,) + (1,) * (moved.ndim - 1)), 0, axis)
    return np.ascontiguousarray(out)


def restore_local_means(rgb_noisy, rgb_denoised, radius_px: int = MEAN_RADIUS_PX) -> np.ndarray:
    """Scale a denoised image so that its local box means match the noisy input's.

    Parameters
    ----------
    rgb_noisy : (H, W, 3) float ndarray
        Linear radiance given to the denoiser (finite, non-negative).
    rgb_denoised : (H, W, 3) float ndarray
        The denoiser's output.
    radius_px : int
        Box radius r: means are taken over the in-image part of the (2r+1)² window.

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        ``out * clip(box(min(noisy, 8 out)) / box(out), 0.8, 1.25)`` per channel; 1 where the
        local denoised mean is 0.  See the module docstring for why.
    """
    noisy = np.asarray(rgb_noisy, np.float64)
    out = np.maximum(np.asarray(rgb_denoised, np.float64), 0.0)
    ref = np.minimum(noisy, _FIREFLY_CLAMP * out)
    b_ref = _box_mean(ref, int(radius_px))
    b_out = _box_mean(out, int(radius_px))
    # per channel: where the local denoised mean is (numerically) zero, leave the pixel alone
    tiny = 1e-12 * np.maximum(b_out.max(axis=(0, 1)), 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(b_out > tiny, b_ref / np.maximum(b_out, tiny), 1.0)
    return out * np.clip(factor, _FACTOR_MIN, _FACTOR_MAX)


def denoise(
    radiance,
    *,
    albedo=None,
    normal=None,
    hdr: bool = True,
    quality: str = "high",
    clean_aux: bool = False,
    threads: int | None = None,
    preserve_local_mean: bool = True,
    mean_radius_px: int = MEAN_RADIUS_PX,
    nonfinite: str = "sanitize",
) -> np.ndarray:
    """Denoise linear radiance with OIDN's "RT" filter on the CPU.

    Parameters
    ----------
    radiance : (H, W, 3) float ndarray
        Linear Rec.709/sRGB radiance, scene-referred (``hdr=True``) or display-referred in
        [0, 1] (``hdr=False``).  Not modified.
    albedo : (H, W, 3) float ndarray, optional
        First-hit base colour, linear, clipped to [0, 1] (:attr:`Film.albedo`).
    normal : (H, W, 3) float ndarray, optional
        First-hit shading normal in world or camera space, clipped to [-1, 1]
        (:attr:`Film.normal`).  Needs ``albedo`` (an OIDN rule).
    hdr : bool
        True for HDR radiance (non-negative, any range); False clips to [0, 1] first.
    quality : {"high", "balanced", "fast", "default"}
        OIDN filter quality.
    clean_aux : bool
        Tell OIDN the albedo/normal passes are noise-free (it then skips prefiltering them).
        Our passes are Monte Carlo averages (noisy at edges and through glass), so False.
    threads : int, optional
        OIDN worker threads (None: numba's current thread count, else all cores).
    preserve_local_mean : bool
        Restore the input's local means (:func:`restore_local_means`); see the module docstring.
    mean_radius_px : int
        Box radius of that correction.
    nonfinite : {"sanitize", "raise"}
        What to do with NaN / inf radiance (see the module docstring).

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        The denoised radiance (a new array), non-negative, and at most 1 when ``hdr=False``.  When OIDN cannot run here (see
        :func:`is_available`) a warning is logged once and the sanitised input is returned.

    Raises
    ------
    TypeError
        If an image is not a float array.
    ValueError
        On a wrong shape, a normal without albedo, or an unknown ``quality`` / ``nonfinite``.
    RenderError
        On non-finite radiance with ``nonfinite="raise"``, or when OIDN reports an error.
    """
    rgb = _check_image(radiance, "radiance")
    if quality not in QUALITIES:
        raise ValueError(f"denoise: quality {quality!r} is not one of {', '.join(QUALITIES)}")
    if nonfinite not in ("sanitize", "raise"):
        raise ValueError(f"denoise: nonfinite={nonfinite!r}; accepted: 'sanitize', 'raise'")
    if normal is not None and albedo is None:
        raise ValueError("denoise: a normal pass needs an albedo pass too (OIDN accepts albedo, or albedo + normal)")
    n_threads = _resolve_threads(threads)
    aux = {}
    if albedo is not None:
        a = _check_image(albedo, "albedo", rgb.shape)
        aux["albedo"] = np.ascontiguousarray(np.clip(np.nan_to_num(a, nan=0.0, posinf=1.0, neginf=0.0), 0.0, 1.0), np.float32)
    if normal is not None:
        nrm = _check_image(normal, "normal", rgb.shape)
        aux["normal"] = np.ascontiguousarray(np.clip(np.nan_to_num(nrm, nan=0.0, posinf=1.0, neginf=-1.0), -1.0, 1.0), np.float32)

    clean = _sanitise_radiance(rgb, nonfinite)
    if not hdr:
        np.minimum(clean, 1.0, out=clean)

    pyoidn = _load_pyoidn()
    if pyoidn is None:
        if not _state["warned"]:
            _state["warned"] = True
            log.warning("denoise: OIDN is not available (%s); images are left undenoised", _state["unavailable"])
        return clean

    colour_in = np.ascontiguousarray(clean, np.float32)
    output = np.empty_like(colour_in)
    with _lock:
        dev = _device(pyoidn, n_threads)
        flt = pyoidn.Filter(dev, "RT")
        try:
            flt.set_image("color", colour_in, _OIDN_FORMAT_FLOAT3)
            for name, image in aux.items():
                flt.set_image(name, image, _OIDN_FORMAT_FLOAT3)
            flt.set_image("output", output, _OIDN_FORMAT_FLOAT3)
            flt.set_bool("hdr", bool(hdr))
            flt.set_bool("cleanAux", bool(clean_aux))
            flt.set_int("quality", QUALITIES[quality])
            flt.commit()
            flt.execute()
            err = dev.get_error()
        finally:
            flt.release()
    if err is not None:
        raise RenderError(f"denoise: OIDN failed on a {rgb.shape[1]}x{rgb.shape[0]} image: {err}")

    result = output.astype(np.float64)
    np.maximum(result, 0.0, out=result)
    if preserve_local_mean:
        result = restore_local_means(clean, result, mean_radius_px)
    if not hdr:
        np.minimum(result, 1.0, out=result)
    return result


def denoise_film(film, *, threads: int | None = None, quality: str = "high", region=None,
                 **options) -> np.ndarray:
    """Denoise a :class:`~variantshot.imaging.film.Film` with its albedo and normal passes.

    Parameters
    ----------
    film : Film
        ``radiance``, ``albedo``, ``normal`` (H, W, 3) and ``alpha`` (H, W) are used.
    threads, quality, **options
        Passed to :func:`denoise`.
    region : (y0, y1, x0, x1), optional
        Denoise only this window (the rest keeps the raw radiance): the batch passes the box
        around the pixels a white or transparent composite can show, so the denoiser does not
        spend its time on backdrop pixels that are thrown away.

    Returns
    -------
    rgb_linear : (H, W, 3) float64 ndarray
        Denoised radiance; pixels whose camera rays all missed every surface (``alpha == 0``:
        a directly seen environment, noise-free up to anti-aliasing) keep their input value
        bit for bit.
    """
    if region is not None:
        y0, y1, x0, x1 = (int(v) for v in region)
        h, w = np.shape(film.alpha)[:2]
        y0, y1, x0, x1 = max(0, y0), min(h, y1), max(0, x0), min(w, x1)
        out = np.array(film.radiance, np.float64)
        if y1 > y0 and x1 > x0:
            out[y0:y1, x0:x1] = denoise(film.radiance[y0:y1, x0:x1], albedo=film.albedo[y0:y1, x0:x1],
                                        normal=film.normal[y0:y1, x0:x1], threads=threads, quality=quality,
                                        **options)
    else:
        out = denoise(film.radiance, albedo=film.albedo, normal=film.normal, threads=threads, quality=quality,
                      **options)
    alpha = np.asarray(film.alpha)
    if alpha.shape == out.shape[:2]:
        miss = alpha <= 0.0
        if np.any(miss):
            src = np.asarray(film.radiance, np.float64)
            keep = miss[..., None] & np.isfinite(src)
            out = np.where(keep, src, out)
    return out


def denoise_film_if_available(film, *, threads: int | None = None, region=None) -> np.ndarray:
    """:func:`denoise_film` where the denoiser can run here; the film's raw radiance otherwise.

    The one call the batch and ``trace`` make: a machine without a ``pyoidn`` wheel still
    renders, undenoised (``is_available`` has already logged why).
    """
    if not is_available():
        return film.radiance
    return denoise_film(film, threads=threads, region=region)
