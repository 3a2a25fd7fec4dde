"""Light packing and sampling: KHR_lights_punctual fall-off, emissive-triangle power CDF."""

from __future__ import annotations

import math

import numpy as np
import pytest

from variantshot.geometry.scene import Light, Material, make_scene
from variantshot.transport import light_kernels as lk
from variantshot.transport.lights import build_lights, pack_punctual
from variantshot.transport.materials import pack_materials


def _sample(light, points):
    scene = make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]], lights=[light])
    table = pack_punctual(scene)
    out = np.zeros((len(points), 7))
    lk.sample_punctual_batch(table, 0, np.asarray(points, float), out)
    return out


def test_point_light_inverse_square_and_range():
    # KHR_lights_punctual: intensity in candela, E = I / d^2; with a range the recommended
    # window max(min(1 - (d/range)^4, 1), 0) / d^2.
    light = Light(name="p", kind="point", colour_linear=(1.0, 0.5, 0.25), intensity=8.0, position=(0, 2, 0))
    out = _sample(light, [[0, 0, 0], [3, 2, 4]])
    np.testing.assert_allclose(out[0, :4], [0, 1, 0, 2])
    np.testing.assert_allclose(out[0, 4:], np.array([1.0, 0.5, 0.25]) * 8 / 4)
    np.testing.assert_allclose(out[1, 4], 8 / 25)
    ranged = Light(name="p", kind="point", intensity=8.0, position=(0, 2, 0), range=4.0)
    out = _sample(ranged, [[0, 0, 0], [0, -3, 0]])
    assert out[0, 4] == pytest.approx(8 / 4 * (1 - (2 / 4) ** 4))
    assert out[1, 4] == 0.0


def test_spot_light_angular_attenuation():
    # KHR_lights_punctual README: scale = 1/max(0.001, cos(inner) - cos(outer)),
    # offset = -cos(outer) * scale, attenuation = clamp(cd * scale + offset, 0, 1)^2.
    inner, outer = 0.3, 0.7
    light = Light(name="s", kind="spot", intensity=2.0, position=(0, 0, 0), direction=(0, 0, -1),
                  inner_cone_rad=inner, outer_cone_rad=outer)
    angles = np.array([0.0, 0.2, 0.4, 0.55, 0.69, 0.8])
    pts = np.stack([np.sin(angles), np.zeros_like(angles), -np.cos(angles)], 1)  # unit distance
    out = _sample(light, pts)
    scale = 1 / max(0.001, math.cos(inner) - math.cos(outer))
    att = np.clip(np.cos(angles) * scale - math.cos(outer) * scale, 0, 1) ** 2
    np.testing.assert_allclose(out[:, 4], 2.0 * att, atol=1e-12)
    assert out[0, 4] == 2.0 and out[-1, 4] == 0.0


def test_directional_light_is_at_infinity():
    light = Light(name="sun", kind="directional", intensity=3.0, direction=(0, -1, 0))
    out = _sample(light, [[5, 5, 5]])
    np.testing.assert_allclose(out[0, :3], [0, 1, 0])
    assert math.isinf(out[0, 3]) and out[0, 4] == 3.0


def test_emissive_triangles_are_chosen_by_power():
    # power = pi x area x luminance(emission) (x2 double-sided): triangle B has 4x the area,
    # triangle C is double-sided with half the radiance, D does not emit.
    pos = [[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [2, 0, 1], [0, 2, 1], [0, 0, 2], [1, 0, 2], [0, 1, 2],
           [0, 0, 3], [1, 0, 3], [0, 1, 3]]
    tris = [[0, 1, 2], [3, 4, 5], [6, 7, 8], [9, 10, 11]]
    mats = [Material(emissive_factor=(1, 1, 1)), Material(emissive_factor=(0.5, 0.5, 0.5), double_sided=True),
            Material()]
    scene = make_scene(pos, tris, tri_material=[0, 0, 1, 2], materials=mats)
    table, _ = pack_materials(scene)
    ls = build_lights(scene, table)
    np.testing.assert_array_equal(ls.emit_tris, [0, 1, 2])
    np.testing.assert_allclose(ls.tri_emit_prob, np.array([1, 4, 1, 0]) / 6)
    assert ls.powers[1] == pytest.approx(math.pi * 0.5 * 6)
    rng = np.random.default_rng(0)
    picks = [lk.sample_emissive_point(scene.positions, scene.triangles, ls.emit_tris, ls.emit_cdf, *rng.random(3))[0]
             for _ in range(6000)]
    assert np.bincount(picks, minlength=4)[1] / 6000 == pytest.approx(4 / 6, abs=0.02)


def test_light_choice_includes_environment_and_punctual_lights():
    from variantshot.transport.environment import make_environment

    scene = make_scene([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]],
                       lights=[Light(name="p", kind="point", intensity=4.0)])
    table, _ = pack_materials(scene)
    ls = build_lights(scene, table, make_environment(2.0))
    radius = 0.5 * math.sqrt(2)
    np.testing.assert_allclose(ls.powers, [math.pi**2 * radius**2 * 2.0, 0.0, 4 * math.pi * 4.0])
    np.testing.assert_allclose(ls.sel_cdf, np.concatenate([[0], np.cumsum(ls.powers)]))
