"""Glass on the white and transparent backgrounds: the sweep seen through transmissive surfaces is
composited at the background's own value (path kernel see-through mode + background.py)."""

import numpy as np
import pytest

from variantshot.geometry.rig import build_rig, parse_rig
from variantshot.geometry.scene import Camera, Material, make_scene, merge_scenes
from variantshot.imaging.background import composite_transparent, composite_white
from variantshot.settings import RenderSettings
from variantshot.transport.environment import make_environment
from variantshot.transport.integrator import render

# exact unpolarised Fresnel reflectance at normal incidence for n = 1.5: ((n - 1)/(n + 1))^2 = 0.04
# (E. Hecht, Optics); the BSDF's thin-walled model transmits 1 - F(0) straight through
# (bsdf_kernels.eval_f: (1 - fresnel_dielectric(v.h, ior)) on the mirrored direction)
F0 = 0.04
ENV = 0.05
GAIN = 1.7  # exposure gain of the test's "shot": paper white is 1 / GAIN in the render


def _pane_shot(material, size=16, spp=64):
    # a 1 x 1 m pane facing +Z, a camera 6 m in front with a narrow view: every pixel sees the
    # pane head-on, and behind it the sweep's wall; the only soft box is high to the side, so the
    # mirror direction of the view (back along +Z) sees just the uniform environment
    pane = make_scene([[-0.5, 0.0, 0.0], [0.5, 0.0, 0.0], [0.5, 1.0, 0.0], [-0.5, 1.0, 0.0]], [[0, 1, 2], [0, 2, 3]],
                      normals=[[0.0, 0.0, 1.0]] * 4, materials=[material], source="pane")
    m = np.eye(4)
    m[:3, 3] = (0.0, 0.5, 6.0)
    cam = Camera(name="front", kind="perspective", world_from_camera=m, yfov_rad=0.05)
    spec = parse_rig({"environment": ENV,
                      "softbox": [{"name": "k", "role": "key", "azimuth_deg": 70, "elevation_deg": 50,
                                   "distance": 4, "width": 1, "height": 1}]})
    rig = build_rig(spec, ((-0.5, 0.0, -0.01), (0.5, 1.0, 0.01)), camera=cam)
    scene = merge_scenes(pane, rig.scene)
    settings = RenderSettings(width=size, height=size, spp=spp, seed=3, max_depth=16)
    env = make_environment((ENV, ENV, ENV), rotation_rad=rig.yaw_rad)
    on = render(scene, settings, env=env, camera=cam, see_through_material=len(pane.materials) + rig.floor_material,
                see_through_radiance=1.0 / GAIN)
    off = render(scene, settings, env=env, camera=cam)
    return on, off


def _clear_glass():
    return Material(name="clear pane", base_colour_factor=(1.0, 1.0, 1.0, 1.0), metallic_factor=0.0,
                    roughness_factor=0.0, double_sided=True,
                    extensions={"KHR_materials_transmission": {"transmissionFactor": 1.0},
                                "KHR_materials_ior": {"ior": 1.5}})


def test_clear_pane_over_white_shows_the_white_background_times_its_transmittance():
    on, off = _pane_shot(_clear_glass())
    assert np.all(on.alpha == 1.0)
    tau = on.see_through
    # straight-through transmittance of the thin-walled model: 1 - F(0) = 0.96, neutral
    assert tau.mean() == pytest.approx(1.0 - F0, abs=0.01)
    assert np.ptp(tau.mean(axis=(0, 1))) < 1e-9
    gain = GAIN
    out = composite_white(on.radiance, on.alpha, gain, np.ones(on.alpha.shape), tau)
    # white through the pane plus the pane's mirror reflection of the environment, F(0) L_env
    expected = (1.0 - F0) * 1.0 + gain * F0 * ENV
    assert out.mean() == pytest.approx(expected, abs=0.01)
    # the render itself already shows it (what the denoiser and adaptive sampling see)
    assert gain * on.radiance.mean() == pytest.approx(expected, abs=0.01)
    # behind a shadow s the background through the glass darkens with it
    half = composite_white(on.radiance, on.alpha, gain, np.full(on.alpha.shape, 0.5), tau)
    assert half.mean() == pytest.approx(0.5 * (1.0 - F0) + gain * F0 * ENV, abs=0.01)
    # without the mode the pane shows the rendered sweep (grey), not the white background
    assert off.see_through is None
    grey = composite_white(off.radiance, off.alpha, gain, np.ones(off.alpha.shape))
    assert grey.mean() < expected - 0.1


def test_opaque_card_renders_the_same_bits_with_the_mode_on():
    card = Material(name="card", base_colour_factor=(0.18, 0.18, 0.18, 1.0), metallic_factor=0.0,
                    roughness_factor=1.0)
    on, off = _pane_shot(card, size=8, spp=16)
    assert on.see_through is None  # nothing is seen through an opaque card
    assert on.radiance.tobytes() == off.radiance.tobytes()


def test_transparent_alpha_lets_the_background_through_glass():
    # straight alpha: a viewer shows C A + (1 - A) B; through a pane of transmittance 0.96 it must
    # show the product's own light P plus 0.96 s B, the shadow matte (black, opacity 1 - s) between
    # (Porter & Duff 1984, "over" with un-premultiplied colour)
    h, w = 4, 4
    a = np.ones((h, w))
    p = np.full((h, w, 3), 0.02 + 0.96)  # the render holds tau x paper white (1 at gain 1)
    tau = np.full((h, w, 3), 0.96)
    for s_val in (1.0, 0.5):
        s = np.full((h, w), s_val)
        colour, alpha = composite_transparent(p, a, 1.0, s, tau)
        for b in (0.0, 1.0, 0.3):
            seen = colour * alpha[..., None] + (1.0 - alpha[..., None]) * b
            np.testing.assert_allclose(seen, 0.02 + s_val * 0.96 * b, atol=1e-12)
    # an opaque product (tau = 0) is fully opaque
    _, alpha = composite_transparent(np.full((h, w, 3), 0.02), a, 1.0, np.ones((h, w)), np.zeros((h, w, 3)))
    assert np.all(alpha == 1.0)


def test_white_stays_exact_outside_the_product_even_if_tau_strays():
    h, w = 6, 6
    a = np.zeros((h, w))
    a[2:4, 2:4] = 1.0
    tau = np.full((h, w, 3), 0.3)  # a denoised channel leaking past the product's edge
    rgb = np.where(a[..., None] > 0, 0.3, 0.6) * np.ones(3)  # glass pixels hold tau x white, the others the floor
    out = composite_white(rgb, a, 1.0, np.ones((h, w)), tau)
    assert np.all(out[a == 0] == 1.0)
    np.testing.assert_allclose(out[a == 1], 0.3)
    s = np.where(a > 0, 0.5, 1.0)
    out = composite_white(rgb, a, 1.0, s, tau)
    assert np.all(out[a == 0] == 1.0)
    np.testing.assert_allclose(out[a == 1], 0.15)
