"""Shadow rays of the shadow catcher through glass: the light a transmissive product lets through."""

import math

import numpy as np
import pytest

from variantshot.geometry.bvh import build_bvh
from variantshot.geometry.rig import build_rig, direct_light_ratio, parse_rig
from variantshot.geometry.scene import Material, make_scene

BOUNDS = (np.array([-0.5, 0.0, -0.5]), np.array([0.5, 1.0, 0.5]))
N_GLASS = 1.5
# Fresnel reflectance at normal incidence R0 = ((n - 1) / (n + 1))^2 (E. Hecht, Optics, the
# normal-incidence form of the Fresnel equations): 0.04 for n = 1.5
R0 = ((N_GLASS - 1.0) / (N_GLASS + 1.0)) ** 2


def _point_light_rig():
    # one small soft box straight overhead and far away: every shadow ray is within 1 degree of
    # the vertical, so each crossing is at normal incidence to within 1e-6 in F
    data = {"environment": 0.0,
            "softbox": [{"name": "k", "role": "key", "azimuth_deg": 0, "elevation_deg": 90, "distance": 40,
                         "width": 0.5, "height": 0.5}]}
    return build_rig(parse_rig(data), BOUNDS)


def _glass(thickness=0.01, transmission=1.0, **extra):
    ext = {"KHR_materials_transmission": {"transmissionFactor": transmission},
           "KHR_materials_ior": {"ior": N_GLASS}}
    if thickness > 0:
        ext["KHR_materials_volume"] = {"thicknessFactor": thickness, **extra}
    return Material(name="glass", base_colour_factor=(1.0, 1.0, 1.0, 1.0), metallic_factor=0.0,
                    roughness_factor=0.0, double_sided=True, extensions=ext)


def _slab(ys, material, thick=0.02):
    """Closed horizontal slabs (outward-wound boxes, 1e3 wide) whose lower faces lie at ``ys``."""
    pos, tris = [], []
    for y0 in ys:
        y1 = y0 + thick
        s = 1e3
        p = np.array([[-s, y0, -s], [s, y0, -s], [s, y1, -s], [-s, y1, -s],
                      [-s, y0, s], [s, y0, s], [s, y1, s], [-s, y1, s]], np.float32)
        t = np.array([[0, 2, 1], [0, 3, 2], [4, 5, 6], [4, 6, 7], [0, 1, 5], [0, 5, 4],
                      [3, 7, 6], [3, 6, 2], [0, 4, 7], [0, 7, 3], [1, 2, 6], [1, 6, 5]], np.int32)
        tris.append(t + sum(len(q) for q in pos))
        pos.append(p)
    p, t = np.concatenate(pos), np.concatenate(tris)
    return make_scene(p, t, materials=[material], tri_material=np.zeros(len(t), np.int32), source="slab")


def _ratio(scene, rig, **kw):
    floor = np.array([[0.0, rig.floor_y, 0.0]])
    up = np.array([[0.0, 1.0, 0.0]])
    return direct_light_ratio(rig, floor, up, build_bvh(scene.positions, scene.triangles), occluder=scene, **kw)[0]


def test_a_clear_glass_pane_passes_one_minus_r0_squared():
    rig = _point_light_rig()
    pane = _slab([0.5], _glass())
    # two interfaces at normal incidence, no absorption: (1 - R0)^2 = 0.9216
    assert _ratio(pane, rig) == pytest.approx((1.0 - R0) ** 2, abs=1e-4)
    two = _slab([0.3, 0.6], _glass())
    assert _ratio(two, rig) == pytest.approx((1.0 - R0) ** 4, abs=1e-4)
    # the same slab opaque (no transmission) blocks everything; without the scene it is opaque too
    opaque = _slab([0.5], _glass(transmission=0.0))
    assert _ratio(opaque, rig) == 0.0
    floor = np.array([[0.0, rig.floor_y, 0.0]])
    assert direct_light_ratio(rig, floor, [[0.0, 1.0, 0.0]], build_bvh(pane.positions, pane.triangles))[0] == 0.0


def test_thin_walled_sheet_is_one_crossing_and_volumes_absorb():
    rig = _point_light_rig()
    # thin-walled (thicknessFactor 0): the BSDF's single interface, 1 - F(0) = 0.96
    sheet = make_scene([[-1e3, 0.5, -1e3], [1e3, 0.5, -1e3], [1e3, 0.5, 1e3], [-1e3, 0.5, 1e3]],
                       [[0, 1, 2], [0, 2, 3]], materials=[_glass(thickness=0.0)], source="sheet")
    assert _ratio(sheet, rig) == pytest.approx(1.0 - R0, abs=1e-4)
    # Beer-Lambert (attenuationColor c at attenuationDistance d: T = c^(x / d) through x):
    # a grey attenuation of 0.5 per 0.02 m through a 0.02 m slab halves the light once more
    tinted = _slab([0.5], _glass(attenuationColor=[0.5, 0.5, 0.5], attenuationDistance=0.02))
    assert _ratio(tinted, rig) == pytest.approx((1.0 - R0) ** 2 * 0.5, abs=2e-3)


def test_blended_and_masked_surfaces():
    rig = _point_light_rig()
    quad = ([[-1e3, 0.5, -1e3], [1e3, 0.5, -1e3], [1e3, 0.5, 1e3], [-1e3, 0.5, 1e3]], [[0, 1, 2], [0, 2, 3]])
    blend = make_scene(*quad, materials=[Material(base_colour_factor=(1, 1, 1, 0.25), alpha_mode="BLEND")])
    # glTF 2.0 alphaMode BLEND: coverage alpha, an opaque surface otherwise -> 1 - alpha passes
    assert _ratio(blend, rig) == pytest.approx(0.75, abs=1e-9)
    masked = make_scene(*quad, materials=[Material(base_colour_factor=(1, 1, 1, 0.25), alpha_mode="MASK",
                                                   alpha_cutoff=0.5)])
    assert _ratio(masked, rig) == 1.0  # alpha below the cutoff: not there (glTF 2.0 alphaMode MASK)
