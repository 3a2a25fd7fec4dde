"""Cameras: glTF 2.0 projection (§3.10.3), orthographic extents, thin-lens focus, framing."""

from __future__ import annotations

import math

import numpy as np
import pytest

from variantshot.errors import InputError
from variantshot.geometry.gltf import load_gltf
from variantshot.geometry.scene import Camera, make_scene
from variantshot.transport.camera import choose_camera, frame_camera, generate_rays, pack_camera


def gltf_perspective(yfov, aspect, znear, zfar):
    """The perspective projection matrix of glTF 2.0 §3.10.3 (finite zfar form)."""
    t = math.tan(0.5 * yfov)
    return np.array([[1 / (aspect * t), 0, 0, 0], [0, 1 / t, 0, 0],
                     [0, 0, (zfar + znear) / (znear - zfar), 2 * zfar * znear / (znear - zfar)], [0, 0, -1, 0]])


def gltf_orthographic(xmag, ymag, znear, zfar):
    """The orthographic projection matrix of glTF 2.0 §3.10.3."""
    return np.array([[1 / xmag, 0, 0, 0], [0, 1 / ymag, 0, 0],
                     [0, 0, 2 / (znear - zfar), (zfar + znear) / (znear - zfar)], [0, 0, 0, 1]])


def test_perspective_rays_project_back_to_their_raster_points(gltf_samples):
    # Cameras.gltf (Khronos sample, facts.json): camera0 perspective yfov 0.7, aspect 1.0,
    # znear 0.01, zfar 100, at (0.5, 0.5, 3) looking down -Z.  A point along each generated ray,
    # projected with the glTF projection matrix, lands on the ray's raster point.
    scene = load_gltf(gltf_samples / "Cameras.gltf")
    cam = next(c for c in scene.cameras if c.kind == "perspective")
    assert cam.yfov_rad == pytest.approx(0.7)
    w, h = 40, 40
    packed = pack_camera(cam, w, h)
    rng = np.random.default_rng(0)
    xs, ys = rng.random(50) * w, rng.random(50) * h
    o, d = generate_rays(packed, xs, ys)
    np.testing.assert_allclose(o, np.tile([0.5, 0.5, 3.0], (50, 1)), atol=1e-6)
    pts = o + d * 2.0
    camera_from_world = np.linalg.inv(cam.world_from_camera)
    clip = gltf_perspective(0.7, w / h, 0.01, 100.0) @ camera_from_world @ np.c_[pts, np.ones(50)].T
    ndc = clip[:2] / clip[3]
    np.testing.assert_allclose(ndc[0], 2 * xs / w - 1, atol=1e-9)
    np.testing.assert_allclose(ndc[1], 1 - 2 * ys / h, atol=1e-9)
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, atol=1e-12)


def test_orthographic_rays_are_parallel_and_span_the_magnification(gltf_samples):
    # Cameras.gltf camera1: orthographic xmag = ymag = 1 (glTF §3.10.3); square image.
    scene = load_gltf(gltf_samples / "Cameras.gltf")
    cam = next(c for c in scene.cameras if c.kind == "orthographic")
    packed = pack_camera(cam, 20, 20)
    xs, ys = np.array([0.0, 20.0, 10.0, 3.7]), np.array([0.0, 20.0, 10.0, 15.2])
    o, d = generate_rays(packed, xs, ys)
    np.testing.assert_allclose(d, np.tile(cam.world_from_camera[:3, :3] @ [0, 0, -1], (4, 1)), atol=1e-12)
    clip = gltf_orthographic(1.0, 1.0, 0.01, 100.0) @ np.linalg.inv(cam.world_from_camera) @ np.c_[o, np.ones(4)].T
    np.testing.assert_allclose(clip[0], 2 * xs / 20 - 1, atol=1e-9)
    np.testing.assert_allclose(clip[1], 1 - 2 * ys / 20, atol=1e-9)


def test_thin_lens_rays_meet_on_the_plane_of_focus():
    # Thin-lens model (PBR 4ed §5.2.3): every ray through a raster point, whatever its lens
    # sample, passes through one point on the plane z = -focus; the lens radius is f / (2 N).
    m = np.eye(4)
    m[:3, 3] = (1.0, 2.0, 3.0)
    cam = Camera(name="c", kind="perspective", world_from_camera=m, yfov_rad=0.6)
    packed = pack_camera(cam, 32, 24, aperture_f_number=2.0, focus_distance_m=4.0)
    focal = 0.5 * 0.024 / math.tan(0.3)
    assert packed[19] == pytest.approx(focal / 4.0)
    rng = np.random.default_rng(1)
    n = 64
    o, d = generate_rays(packed, np.full(n, 7.3), np.full(n, 18.1), rng.random((n, 2)))
    t = (3.0 - 4.0 - o[:, 2]) / d[:, 2]
    hit = o + d * t[:, None]
    np.testing.assert_allclose(hit, np.tile(hit[0], (n, 1)), atol=1e-9)
    assert np.ptp(o[:, 0]) > 0.5 * packed[19]  # the lens is really sampled
    pin = generate_rays(pack_camera(cam, 32, 24, focus_distance_m=4.0), [7.3], [18.1])
    np.testing.assert_allclose(pin[0][0] + pin[1][0] * ((3.0 - 4.0 - pin[0][0, 2]) / pin[1][0, 2]), hit[0], atol=1e-9)


def test_choose_camera_by_name_or_frame_the_scene(gltf_samples):
    scene = load_gltf(gltf_samples / "Cameras.gltf")
    names = [c.name for c in scene.cameras]
    assert choose_camera(scene, names[1], 1.0).name == names[1]
    with pytest.raises(InputError, match="no camera named 'nope'"):
        choose_camera(scene, "nope", 1.0)
    box = make_scene([[-1, -1, 0], [1, -1, 0], [1, 1, 0.5]], [[0, 1, 2]])
    cam = choose_camera(box, None, 1.5)
    assert cam.kind == "perspective"
    # the framed front view looks down -Z and holds the bounding sphere inside the field of view
    lo, hi = box.bounds()
    centre, radius = 0.5 * (lo + hi), 0.5 * np.linalg.norm(hi - lo)
    eye = cam.world_from_camera[:3, 3]
    np.testing.assert_allclose(cam.world_from_camera[:3, 2], [0, 0, 1])
    dist = np.linalg.norm(eye - centre)
    assert math.asin(radius / dist) <= 0.5 * cam.yfov_rad + 1e-12
    assert frame_camera(lo, hi, 0.5).world_from_camera[2, 3] > cam.world_from_camera[2, 3]  # narrow image: further
