"""Angle presets and auto-framing: silhouettes measured by projecting the vertices again."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from variantshot.catalog.angles import (
    ANGLE_PRESETS,
    DEFAULT_YFOV_RAD,
    camera_gltf,
    fit_camera,
    frame_angle,
    project_ndc,
    quaternion_from_rotation,
)
from variantshot.catalog.gltf_check import load_buffers, world_positions


def _span(positions, m, yfov, aspect=1.0):
    ndc = project_ndc(positions, m, yfov, aspect)
    assert np.all(ndc[:, 2] > 0), "every vertex is in front of the camera"
    sx = ndc[:, 0].max() - ndc[:, 0].min()
    sy = ndc[:, 1].max() - ndc[:, 1].min()
    centre = (0.5 * (ndc[:, 0].max() + ndc[:, 0].min()), 0.5 * (ndc[:, 1].max() + ndc[:, 1].min()))
    return max(sx, sy) / 2.0, centre, ndc


@pytest.fixture(scope="module")
def demo_positions(repo_dir):
    out = {}
    for name in ("bottle", "mug", "speaker"):
        path = repo_dir / "catalog" / "models" / f"{name}.gltf"
        doc = json.loads(path.read_text())
        out[name] = world_positions(doc, load_buffers(doc, path.parent))
    return out


@pytest.mark.parametrize("angle", sorted(ANGLE_PRESETS))
@pytest.mark.parametrize("product", ["bottle", "mug", "speaker"])
def test_silhouette_spans_85_percent_of_the_frame(demo_positions, product, angle):
    # issue: the silhouette spans 85 % of the longer side of a 1:1 frame (common practice for
    # marketplace main images, no source); measured by re-projecting the model's vertices
    p = demo_positions[product]
    m = frame_angle(p, angle)
    fill, centre, _ = _span(p, m, DEFAULT_YFOV_RAD)
    assert fill == pytest.approx(0.85, abs=0.01)
    assert abs(centre[0]) < 0.01 and abs(centre[1]) < 0.01


@pytest.mark.parametrize("fill_frac, yfov", [(0.85, 0.35), (0.6, 0.8), (0.95, 0.2)])
def test_sphere_distance_matches_the_closed_form(fill_frac, yfov):
    # A sphere of radius R seen from distance d has an angular radius asin(R/d); filling the frame
    # to f needs tan(asin(R/d)) = f tan(yfov/2), i.e. d = R / sin(atan(f tan(yfov/2))) (pinhole
    # geometry, closed form). Dense points on the sphere approximate its silhouette from inside.
    golden = math.pi * (3 - math.sqrt(5))
    n = 20000
    k = np.arange(n)
    y = 1 - 2 * (k + 0.5) / n
    r = np.sqrt(1 - y * y)
    pts = np.stack([r * np.cos(golden * k), y, r * np.sin(golden * k)], axis=1) * 0.1 + [0.3, 0.5, -0.2]
    m = fit_camera(pts, ANGLE_PRESETS["three-quarter-left"].direction(), fill_frac=fill_frac, yfov_rad=yfov)
    d = np.linalg.norm(m[:3, 3] - [0.3, 0.5, -0.2])
    expected = 0.1 / math.sin(math.atan(fill_frac * math.tan(yfov / 2)))
    assert d == pytest.approx(expected, rel=2e-3)


def test_wide_frame_fills_the_limiting_side():
    pts = np.array([[x, y, z] for x in (-0.1, 0.1) for y in (0, 0.3) for z in (-0.05, 0.05)])
    m = fit_camera(pts, ANGLE_PRESETS["front"].direction(), fill_frac=0.85, yfov_rad=0.4, aspect_ratio=1.5)
    ndc = project_ndc(pts, m, 0.4, 1.5)
    half_x = 0.5 * (ndc[:, 0].max() - ndc[:, 0].min())
    half_y = 0.5 * (ndc[:, 1].max() - ndc[:, 1].min())
    assert max(half_x, half_y) == pytest.approx(0.85, abs=1e-6)


@pytest.mark.parametrize("angle", sorted(ANGLE_PRESETS))
def test_camera_looks_along_the_preset_direction(angle):
    pts = np.random.default_rng(3).normal(size=(300, 3)) * [0.05, 0.1, 0.05] + [0, 0.1, 0]
    m = frame_angle(pts, angle)
    rot = m[:3, :3]
    np.testing.assert_allclose(rot.T @ rot, np.eye(3), atol=1e-12)
    assert np.linalg.det(rot) == pytest.approx(1.0)
    # the camera's +Z (it looks down -Z) points along the preset's product-to-camera direction
    np.testing.assert_allclose(rot[:, 2], ANGLE_PRESETS[angle].direction(), atol=1e-12)
    if angle != "top":
        assert rot[1, 1] > 0, "image up is world up"
    else:
        np.testing.assert_allclose(rot[:, 1], [0, 0, -1], atol=1e-12)


def test_quaternion_matches_scipy():
    from scipy.spatial.transform import Rotation  # reference library

    for angle in ANGLE_PRESETS:
        pts = np.random.default_rng(5).normal(size=(50, 3))
        rot = frame_angle(pts, angle)[:3, :3]
        q = quaternion_from_rotation(rot)
        ref = Rotation.from_matrix(rot).as_quat()  # scipy's order is (x, y, z, w), as glTF's
        assert np.allclose(q, ref, atol=1e-10) or np.allclose(q, -ref, atol=1e-10)


def test_camera_node_round_trips(demo_positions):
    from scipy.spatial.transform import Rotation

    p = demo_positions["mug"]
    m = frame_angle(p, "three-quarter-right")
    cam, node = camera_gltf("three-quarter-right", m, p)
    assert cam["type"] == "perspective" and cam["perspective"]["aspectRatio"] == 1.0
    assert cam["perspective"]["yfov"] == pytest.approx(DEFAULT_YFOV_RAD)
    assert 0 < cam["perspective"]["znear"] < np.min(project_ndc(p, m, DEFAULT_YFOV_RAD)[:, 2])
    rot = Rotation.from_quat(node["rotation"]).as_matrix()
    np.testing.assert_allclose(rot, m[:3, :3], atol=1e-9)
    np.testing.assert_allclose(node["translation"], m[:3, 3])


def test_bad_input_is_refused():
    with pytest.raises(KeyError):
        frame_angle(np.zeros((3, 3)), "sideways")
    with pytest.raises(ValueError):
        fit_camera(np.zeros((0, 3)), (0, 0, 1))
    with pytest.raises(ValueError):
        fit_camera(np.ones((4, 3)), (0, 0, 1))  # no extent
