"""Tests for variantshot.imaging.denoise: OIDN "RT" filter, colour fidelity, white backgrounds, contract.

Acceptance figures come from the denoising issue: swatch ΔE2000 between the denoised image and a
converged undenoised one at most 0.5, white-background pixels exactly 255, and a large noise
reduction (here: RMSE against the clean image down at least 3×).  ΔE2000 is CIE 142-2001 /
Sharma, Wu & Dalal (2005) as implemented by ``imaging.colour.delta_e_2000`` (itself checked
against the paper's 34 pairs in tests/reference/test_ciede2000.py), applied to CIELAB (D65) of
the unrounded 8-bit sRGB code of the mean colour (IEC 61966-2-1 encoding).

Synthetic noise: gamma-distributed pixel values with mean c and relative standard deviation
``rel`` (shape 1/rel², scale c·rel²): non-negative and right-skewed like Monte Carlo pixel
estimates, with a known variance (c·rel)² (gamma distribution moments, any statistics handbook).
"""

from __future__ import annotations

import logging
import multiprocessing
import sys

import numpy as np
import pytest

from variantshot.errors import RenderError
from variantshot.imaging import denoise as dn
from variantshot.imaging.colour import delta_e_2000, lab_from_srgb8, srgb_encode

pytestmark = pytest.mark.skipif(not dn.is_available(), reason="OIDN (pyoidn) cannot run on this platform")

# Mid-tones, near-black, near-white and saturated primaries/secondaries (linear sRGB).
COLOURS = [
    (0.18, 0.18, 0.18),  # photographic mid grey
    (0.80, 0.05, 0.05),  # saturated red
    (0.02, 0.30, 0.60),  # saturated blue
    (0.05, 0.60, 0.02),  # saturated green
    (0.50, 0.40, 0.10),  # ochre mid-tone
    (0.90, 0.90, 0.90),  # near white
    (0.01, 0.01, 0.01),  # near black
]


def _noisy(rng, clean, rel):
    k = 1.0 / rel**2
    return rng.gamma(k, 1.0 / k, clean.shape) * clean


def _lab_of_mean(rgb_linear):
    """CIELAB (D65) of the unrounded 8-bit sRGB code of the mean linear colour of an image."""
    mean = np.asarray(rgb_linear, np.float64).reshape(-1, 3).mean(axis=0)
    return lab_from_srgb8(srgb_encode(np.clip(mean, 0.0, 1.0)) * 255.0)


def _flat(c, size):
    return np.broadcast_to(np.asarray(c, np.float64), (size, size, 3)).copy()


def _normal_z(size):
    n = np.zeros((size, size, 3))
    n[..., 2] = 1.0
    return n


# ---------------------------------------------------------------- (1) colour fidelity, synthetic


@pytest.mark.parametrize("rel", [0.1, 0.3, 0.6])
def test_flat_swatch_colour_kept_synthetic(rel):
    """Denoised mean colour of a flat card vs the noise-free colour: ΔE2000 <= 0.5 (the issue)."""
    rng = np.random.default_rng(2005)
    size = 128
    for c in COLOURS:
        clean = _flat(c, size)
        noisy = _noisy(rng, clean, rel)
        out = dn.denoise(noisy, albedo=clean, normal=_normal_z(size), threads=2)
        inner = (slice(8, -8), slice(8, -8))
        de = float(delta_e_2000(_lab_of_mean(out[inner]), _lab_of_mean(clean[inner])))
        assert de <= 0.5, f"colour {c}, noise {rel}: ΔE2000 {de:.3f} > 0.5"
        # the correction restores the input's own mean closely (its purpose)
        de_in = float(delta_e_2000(_lab_of_mean(out[inner]), _lab_of_mean(noisy[inner])))
        assert de_in <= 0.25, f"colour {c}, noise {rel}: ΔE2000 to the input mean {de_in:.3f}"
        # and the card really was denoised
        assert np.std(out[inner] / clean[inner]) < 0.25 * rel


def test_box_mean_matches_brute_force():
    """The correction's window mean equals the plain mean over the in-image part of each window."""
    a = np.random.default_rng(3).random((13, 9))
    for r in (0, 1, 3, 30):
        want = np.array([[a[max(0, i - r): i + r + 1, max(0, j - r): j + r + 1].mean() for j in range(9)]
                         for i in range(13)])
        np.testing.assert_allclose(dn._box_mean(a, r), want, rtol=0, atol=1e-12)


def test_local_mean_correction_keeps_fireflies_local():
    """A firefly the denoiser removes is not smeared back as a bright square by the correction."""
    rng = np.random.default_rng(7)
    size = 96
    clean = _flat((0.3, 0.3, 0.3), size)
    noisy = _noisy(rng, clean, 0.2)
    noisy[48, 48] = 300.0  # 1000x the card: one sample of a caustic path (common practice, no source)
    out = dn.denoise(noisy, albedo=clean, normal=_normal_z(size), threads=2)
    ring = np.ones((size, size), bool)
    ring[44:53, 44:53] = False  # everything farther than 4 px from the firefly
    ratio = out[ring].mean(axis=0) / 0.3
    # the clamp at 8x the denoised value bounds the leak to ~8 * 0.3 / 33² per pixel (< 1 %)
    assert np.all(np.abs(ratio - 1.0) < 0.02), ratio


# ---------------------------------------------------------------- (1) colour fidelity, real renderer


@pytest.fixture(scope="module")
def studio_swatch():
    """``render(colour, spp, size_px, denoise) -> SwatchResult`` of a card in the soft-even rig."""
    from variantshot.geometry.rig import build_rig, load_rig
    from variantshot.geometry.scene import Camera
    from variantshot.review.swatch import render_swatch
    from variantshot.transport.environment import make_environment

    lo, hi = np.array([-0.5, 0.0, -0.5]), np.array([0.5, 1.0, 0.5])
    m = np.eye(4)
    m[:3, 3] = (0.0, 0.5, 6.0)
    front = Camera(name="front", kind="perspective", world_from_camera=m, yfov_rad=0.05)
    built = build_rig(load_rig("soft-even"), (lo, hi), camera=front)
    env = make_environment(tuple(built.environment_linear), rotation_rad=built.yaw_rad)

    def run(colour, spp, size_px, denoise):
        return render_swatch(colour, rig=built.scene, env=env, exposure_ev=-0.75, tone="none",
                             centre=(0.0, 0.5, 0.0), normal=(0.0, 0.0, 1.0), size_m=1.0,
                             size_px=size_px, spp=spp, seed=11, threads=2, denoise=denoise)

    return run


@pytest.mark.slow
def test_rendered_swatch_denoised_matches_converged(studio_swatch):
    """A 4-spp denoised studio swatch vs the same card at 512 spp undenoised: ΔE2000 <= 0.5."""
    for c in [(0.18, 0.18, 0.18), (0.80, 0.05, 0.05), (0.02, 0.30, 0.60), (0.90, 0.90, 0.90)]:
        converged = studio_swatch(c, 512, 24, None)
        noisy = studio_swatch(c, 4, 48, None)
        denoised = studio_swatch(c, 4, 48, dn.denoise_film)
        de = float(delta_e_2000(denoised.lab_d65, converged.lab_d65))
        assert de <= 0.5, f"colour {c}: ΔE2000 {de:.3f} (undenoised 4 spp: "\
                          f"{float(delta_e_2000(noisy.lab_d65, converged.lab_d65)):.3f})"
        # the denoised swatch is much smoother than the 4-spp one
        assert denoised.image_srgb8.astype(float).std(axis=(0, 1)).max() < \
            0.5 * noisy.image_srgb8.astype(float).std(axis=(0, 1)).max() + 1.0


# ---------------------------------------------------------------- (2) white background stays 255


def _product_scene(size=64, seed=3):
    """A noisy product disc on a noisy studio floor, with coverage and a snapped shadow map."""
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:size, 0:size]
    r = np.hypot(yy - size / 2 + 0.5, xx - size / 2 + 0.5)
    coverage = np.clip(size * 0.3 - r + 0.5, 0.0, 1.0)  # anti-aliased disc, 0 < α < 1 on its rim
    albedo = np.where(coverage[..., None] > 0, [0.6, 0.2, 0.1], [0.85, 0.85, 0.85])
    clean = albedo * 0.9
    radiance = _noisy(rng, clean, 0.4)
    shadow = np.ones((size, size))
    shadow[size // 2 + 12 : size // 2 + 20, 16:48] = 0.6  # a contact shadow below the disc
    return radiance, albedo, _normal_z(size), coverage, shadow


def test_white_background_exactly_255_after_denoise_and_compositing():
    """film -> denoise -> white compositing -> 8-bit PNG: unshadowed background is code 255."""
    import io

    from PIL import Image

    from variantshot.imaging.background import composite_white
    from variantshot.imaging.files import encode_image

    radiance, albedo, normal, coverage, shadow = _product_scene()
    out = dn.denoise(radiance, albedo=albedo, normal=normal, threads=2)
    rgb = composite_white(out, coverage, 1.0, shadow)
    # background compositing writes unshadowed background as exactly 1.0 (imaging.background)
    bg = (coverage <= 0.0) & (shadow >= 1.0)
    assert np.all(rgb[bg] == 1.0)
    data = encode_image(rgb, "png", exposure_ev=0.0, tone="none", dither=True, seed=5)
    codes = np.asarray(Image.open(io.BytesIO(data)).convert("RGB"))
    # sRGB encodes linear 1.0 as 1.0, code 255 (IEC 61966-2-1); dither never touches exact 1
    assert np.all(codes[bg] == 255)
    assert np.all(codes[coverage >= 1.0] < 255)  # the product itself is not washed out
    assert np.all(codes[(coverage <= 0.0) & (shadow < 1.0)] < 255)  # the shadow is kept


def test_denoise_film_keeps_directly_seen_background_bit_for_bit():
    """Pixels whose camera rays saw no surface (α = 0), e.g. a white environment of exactly 1.0."""
    from types import SimpleNamespace

    radiance, albedo, normal, coverage, _ = _product_scene()
    radiance = np.where(coverage[..., None] > 0, radiance, 1.0)
    albedo = np.where(coverage[..., None] > 0, albedo, 0.0)  # the film's passes are 0 on a miss
    film = SimpleNamespace(radiance=radiance, albedo=albedo, normal=normal * (coverage[..., None] > 0),
                           alpha=coverage)
    out = dn.denoise_film(film, threads=2)
    miss = coverage <= 0.0
    assert np.all(out[miss] == 1.0)
    assert not np.array_equal(out[~miss], radiance[~miss])  # the product was denoised


def test_denoising_a_window_keeps_the_rest_raw_and_the_window_as_full_frame():
    """``region`` (the batch's box around a white shot's sampled pixels): outside it the raw
    radiance bit for bit; inside, away from the window's edge, what full-frame denoising gives
    (the RT filter's neighbourhood is local; agreement within 1 % of the mean, common practice,
    no source)."""
    from types import SimpleNamespace

    rng = np.random.default_rng(5)
    clean, albedo, normal = _edge_image(192)
    noisy = _noisy(rng, clean, 0.4)
    film = SimpleNamespace(radiance=noisy, albedo=albedo, normal=normal, alpha=np.ones(clean.shape[:2]))
    full = dn.denoise_film(film, threads=2)
    part = dn.denoise_film(film, threads=2, region=(40, 160, 24, 176))
    inside = np.zeros(clean.shape[:2], bool)
    inside[40:160, 24:176] = True
    assert np.array_equal(part[~inside], noisy[~inside])
    core = (slice(72, 128), slice(56, 144))  # 32 px inside the window's edge
    assert np.abs(part[core] - full[core]).mean() <= 0.01 * full[core].mean()
    assert not np.array_equal(part[inside], noisy[inside])


# ---------------------------------------------------------------- (3) noise reduction


def _edge_image(size=128):
    """Clean image with hard edges: four colour blocks, a disc, and a smooth shading ramp."""
    yy, xx = np.mgrid[0:size, 0:size] / size
    albedo = np.empty((size, size, 3))
    albedo[:] = (0.7, 0.7, 0.7)
    albedo[(xx < 0.5) & (yy < 0.5)] = (0.8, 0.1, 0.1)
    albedo[(xx >= 0.5) & (yy >= 0.5)] = (0.1, 0.2, 0.7)
    albedo[np.hypot(xx - 0.5, yy - 0.5) < 0.2] = (0.9, 0.8, 0.2)
    normal = np.zeros((size, size, 3))
    normal[..., 2] = 1.0
    normal[xx >= 0.5] = (0.6, 0.0, 0.8)  # a crease down the middle
    shading = 0.4 + 0.6 * yy[..., None]
    return albedo * shading, albedo, normal


@pytest.mark.parametrize("aux", [True, False])
def test_rmse_drops_at_least_three_times(aux):
    rng = np.random.default_rng(42)
    clean, albedo, normal = _edge_image()
    noisy = _noisy(rng, clean, 0.5)
    kw = dict(albedo=albedo, normal=normal) if aux else {}
    out = dn.denoise(noisy, threads=2, **kw)

    def rmse(a):
        return float(np.sqrt(np.mean((a - clean) ** 2)))

    factor = rmse(noisy) / rmse(out)
    assert factor >= 3.0, f"RMSE reduction {factor:.2f}x (aux={aux})"
    # the edges survive: on the pixels next to a colour edge the error also drops
    grad = np.abs(np.diff(albedo, axis=1)).sum(axis=2)
    edge = np.zeros(clean.shape[:2], bool)
    edge[:, 1:] |= grad > 0.1
    edge[:, :-1] |= grad > 0.1
    e_noisy = np.sqrt(np.mean((noisy[edge] - clean[edge]) ** 2))
    e_out = np.sqrt(np.mean((out[edge] - clean[edge]) ** 2))
    assert e_out < 0.5 * e_noisy


# ---------------------------------------------------------------- (4) contract


def test_shape_dtype_and_input_untouched():
    rng = np.random.default_rng(0)
    clean, albedo, normal = _edge_image(40)
    noisy = _noisy(rng, clean, 0.3).astype(np.float32)
    before = noisy.copy()
    out = dn.denoise(noisy, albedo=albedo, normal=normal, threads=1)
    assert out.shape == (40, 40, 3) and out.dtype == np.float64
    assert np.all(np.isfinite(out)) and out.min() >= 0.0
    np.testing.assert_array_equal(noisy, before)
    # non-contiguous views give the same result as contiguous copies
    view = np.ascontiguousarray(noisy.transpose(1, 0, 2)).transpose(1, 0, 2)
    assert not view.flags.c_contiguous
    np.testing.assert_array_equal(dn.denoise(view, albedo=albedo, normal=normal, threads=1), out)
    # odd sizes and tiny images work
    assert dn.denoise(rng.random((7, 5, 3))).shape == (7, 5, 3)
    assert dn.denoise(rng.random((1, 1, 3))).shape == (1, 1, 3)


def test_bad_input_is_refused_with_clear_errors():
    img = np.random.default_rng(1).random((8, 8, 3))
    with pytest.raises(TypeError, match="float"):
        dn.denoise((img * 255).astype(np.uint8))
    with pytest.raises(ValueError, match=r"\(H, W, 3\)"):
        dn.denoise(img[..., 0])
    with pytest.raises(ValueError, match="albedo"):
        dn.denoise(img, albedo=img[:4])
    with pytest.raises(ValueError, match="albedo"):
        dn.denoise(img, normal=img)
    with pytest.raises(ValueError, match="quality"):
        dn.denoise(img, quality="best")
    with pytest.raises(ValueError, match="threads"):
        dn.denoise(img, threads=0)
    with pytest.raises(ValueError, match="nonfinite"):
        dn.denoise(img, nonfinite="ignore")


def test_non_finite_radiance_sanitised_or_refused(caplog):
    img = np.full((16, 16, 3), 0.5)
    img[3, 4, 0] = np.nan
    img[5, 6, 1] = np.inf
    img[7, 8, 2] = -np.inf
    with caplog.at_level(logging.WARNING, logger="variantshot.imaging.denoise"):
        out = dn.denoise(img, threads=1)
    assert np.all(np.isfinite(out))
    assert "3 non-finite" in caplog.text
    with pytest.raises(RenderError, match="row 3, column 4"):
        dn.denoise(img, nonfinite="raise")


def test_qualities_and_ldr_mode():
    rng = np.random.default_rng(5)
    clean, albedo, normal = _edge_image(48)
    noisy = _noisy(rng, clean, 0.4)
    for q in dn.QUALITIES:
        out = dn.denoise(noisy, albedo=albedo, normal=normal, quality=q, threads=1)
        assert np.sqrt(np.mean((out - clean) ** 2)) < np.sqrt(np.mean((noisy - clean) ** 2))
    ldr = dn.denoise(noisy * 3.0, hdr=False, threads=1)
    assert ldr.max() <= 1.0 + 1e-6


def test_fallback_when_oidn_is_unavailable(monkeypatch, caplog):
    img = np.full((8, 8, 3), 0.25)
    img[0, 0, 0] = np.nan
    monkeypatch.setitem(dn._state, "unavailable", "ImportError: no module named 'pyoidn'")
    monkeypatch.setitem(dn._state, "warned", False)
    assert not dn.is_available()
    with caplog.at_level(logging.WARNING, logger="variantshot.imaging.denoise"):
        out = dn.denoise(img)
    assert "not available" in caplog.text
    assert out.dtype == np.float64 and out[0, 0, 0] == 0.0
    np.testing.assert_array_equal(out[1:], img[1:])


def test_devices_are_cached_per_thread_count():
    img = np.random.default_rng(2).random((16, 16, 3))
    dn.denoise(img, threads=1)
    first = dn._state["devices"][1]
    dn.denoise(img, threads=1)
    assert dn._state["devices"][1] is first
    dn.denoise(img, threads=2)
    assert set(dn._state["devices"]) >= {1, 2}


def test_thread_count_does_not_change_the_image():
    """Same bits on 1, 2 and 3 threads (DESIGN.md: an image does not depend on the thread count)."""
    rng = np.random.default_rng(4)
    clean, albedo, normal = _edge_image(96)
    noisy = _noisy(rng, clean, 0.5)
    outs = [dn.denoise(noisy, albedo=albedo, normal=normal, threads=t) for t in (1, 2, 3)]
    np.testing.assert_array_equal(outs[0], outs[1])
    np.testing.assert_array_equal(outs[0], outs[2])


def _child_denoise(queue):
    img = np.random.default_rng(9).random((32, 32, 3))
    queue.put((len(dn._state["devices"]), dn.denoise(img, threads=1)))


@pytest.mark.skipif(sys.platform != "linux", reason="fork start method")
def test_forked_worker_makes_its_own_device():
    """A worker forked after the parent denoised gets a fresh device and the same result."""
    img = np.random.default_rng(9).random((32, 32, 3))
    want = dn.denoise(img, threads=1)
    ctx = multiprocessing.get_context("fork")
    queue = ctx.Queue()
    proc = ctx.Process(target=_child_denoise, args=(queue,))
    proc.start()
    n_devices_at_start, got = queue.get(timeout=60)
    proc.join(timeout=60)
    assert proc.exitcode == 0
    assert n_devices_at_start == 0  # the parent's devices were dropped in the child
    np.testing.assert_array_equal(got, want)
