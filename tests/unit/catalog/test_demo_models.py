"""Demo geometry against trimesh and closed forms.

* A profile polygon turned about the axis on n segments is a stack of n-gon frustums, so its
  volume is the solid of revolution's (Pappus; summed frustums pi/3 (r0^2 + r0 r1 + r1^2) dy)
  times n sin(2 pi / n) / (2 pi), the area ratio of an inscribed n-gon to its circle (exact).
* A box with edges rounded by r, inner box A x B x C, has volume
  ABC + 2r(AB + BC + CA) + pi r^2 (A + B + C) + 4/3 pi r^3 (Minkowski sum of a box and a ball).
trimesh (reference library) merges the seam vertices, reports watertightness, winding and volume.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from variantshot.catalog import demo_models as dm

trimesh = pytest.importorskip("trimesh")


def _trimesh(m):
    return trimesh.Trimesh(vertices=m.positions.astype(np.float64), faces=m.indices, process=True)


def _revolved_volume(profile):
    r, y = profile[:, 0], profile[:, 1]
    r0, r1, y0, y1 = r[:-1], r[1:], y[:-1], y[1:]
    return abs(float(np.sum(math.pi / 3 * (r0 * r0 + r0 * r1 + r1 * r1) * (y1 - y0))))


@pytest.mark.parametrize("key", sorted(dm.lathe_profiles()))
def test_turned_parts_are_closed_and_have_the_closed_form_volume(key):
    profile, n = dm.lathe_profiles()[key]
    mesh = _trimesh(dm.lathe(profile, n))
    assert mesh.is_watertight and mesh.is_winding_consistent, key
    assert mesh.volume > 0, "faces wind counter-clockwise seen from outside"
    expected = _revolved_volume(profile) * n * math.sin(2 * math.pi / n) / (2 * math.pi)
    assert mesh.volume == pytest.approx(expected, rel=1e-6), key


@pytest.mark.parametrize("half, r", [((0.085, 0.052, 0.039), 0.012), ((0.074, 0.041, 0.003), 0.0025)])
def test_rounded_box_is_closed_with_the_minkowski_volume(half, r):
    mesh = _trimesh(dm.rounded_box(half, r, 8))
    assert mesh.is_watertight and mesh.is_winding_consistent and mesh.volume > 0
    a, b, c = (2 * (h - r) for h in half)
    expected = a * b * c + 2 * r * (a * b + b * c + c * a) + math.pi * r * r * (a + b + c) + 4 / 3 * math.pi * r ** 3
    # the rounded rims are polygons of 4 segments per quarter circle, slightly inside the ball
    assert mesh.volume == pytest.approx(expected, rel=5e-3)
    assert mesh.volume < expected
    np.testing.assert_allclose(mesh.bounds[1] - mesh.bounds[0], 2 * np.asarray(half), rtol=1e-6)


@pytest.mark.parametrize("product", sorted(dm.PRODUCTS))
def test_smooth_normals_agree_with_the_surface(product):
    for name, m in dm.PRODUCTS[product]["parts"]().items():
        mesh = trimesh.Trimesh(vertices=m.positions.astype(np.float64), faces=m.indices, process=False)
        n = m.normals.astype(np.float64)
        np.testing.assert_allclose(np.linalg.norm(n, axis=1), 1.0, atol=1e-6)
        # every face's own normal (trimesh) points the way its vertices' normals do
        vn = n[m.indices].mean(axis=1)
        dots = np.einsum("ij,ij->i", mesh.face_normals, vn / np.linalg.norm(vn, axis=1, keepdims=True))
        assert dots.min() > 0.5, (product, name, dots.min())
        assert np.median(dots) > 0.99, (product, name)
        assert m.uvs.min() >= 0.0 and m.uvs.max() <= 1.0


def test_demo_parts_have_real_product_sizes():
    # outer sizes of common products of these kinds, metres (common practice, no source)
    sizes = {}
    for product, spec in dm.PRODUCTS.items():
        parts = spec["parts"]()
        pts = np.concatenate([m.positions for m in parts.values()])
        sizes[product] = pts.max(axis=0) - pts.min(axis=0)
    assert 0.2 < sizes["bottle"][1] < 0.3 and 0.06 < sizes["bottle"][0] < 0.09
    assert 0.08 < sizes["mug"][1] < 0.12 and 0.11 < sizes["mug"][0] < 0.14  # with the handle
    assert 0.12 < sizes["speaker"][0] < 0.25 and 0.06 < sizes["speaker"][2] < 0.1
