"""The shadow catcher: the kernel's estimator, its determinism, and the sparse grid it is sampled on."""

import numpy as np
import pytest

from variantshot.batch.runner import shadow_blur_radius, shadow_map, shadow_step
from variantshot.catalog.angles import DEFAULT_YFOV_RAD, frame_angle
from variantshot.geometry.bvh import build_bvh, intersect
from variantshot.geometry.rig import build_rig, direct_light_ratio
from variantshot.geometry.scene import Camera
from variantshot.transport.camera import generate_rays, pack_camera


def _box(lo, hi):
    """A closed axis-aligned box, outward-wound (positions (8, 3), triangles (12, 3))."""
    x0, y0, z0 = lo
    x1, y1, z1 = hi
    p = np.array([[x0, y0, z0], [x1, y0, z0], [x1, y1, z0], [x0, y1, z0],
                  [x0, y0, z1], [x1, y0, z1], [x1, y1, z1], [x0, y1, z1]], np.float32)
    t = np.array([[0, 2, 1], [0, 3, 2], [4, 5, 6], [4, 6, 7], [0, 1, 5], [0, 5, 4],
                  [3, 7, 6], [3, 6, 2], [0, 4, 7], [0, 7, 3], [1, 2, 6], [1, 6, 5]], np.int32)
    return p, t


def _shot(angle="three-quarter-left"):
    # a box standing on the floor, turned so its shadow has hard contact edges at an angle to
    # the pixel grid (the case a sparse grid would alias)
    p, t = _box((-0.3, 0.0, -0.2), (0.3, 0.5, 0.2))
    c, s = np.cos(0.4), np.sin(0.4)
    p = (p @ np.array([[c, 0, -s], [0, 1, 0], [s, 0, c]], np.float32).T).astype(np.float32)
    m = frame_angle(p, angle)
    cam = Camera(name=angle, kind="perspective", world_from_camera=m, yfov_rad=DEFAULT_YFOV_RAD, aspect_ratio=1.0)
    rig = build_rig("soft-even", (p.min(axis=0), p.max(axis=0)), camera=cam)
    return p, t, cam, rig


def test_grid_step_is_half_the_blur_radius():
    assert shadow_blur_radius(2048, 2048) == 20 and shadow_step(2048, 2048) == 10
    assert shadow_blur_radius(1024, 768) == 10 and shadow_step(1024, 768) == 5
    assert shadow_step(128, 128) == 1  # small images keep every pixel


def test_sparse_grid_matches_step_2_after_the_blur():
    # The map is box-blurred over 2 r + 1 pixels; nodes r / 2 apart, each averaging its cell,
    # keep every detail the blur lets through.  Compared where the shadow is seen (outside the
    # product): the difference must stay at the level of the estimator's own noise (two seeds
    # of the step-2 map differ by 0.034 at most, 0.006 on average in the shadow on this shot;
    # tolerances common practice, no source).
    p, t, cam, rig = _shot()
    size = 800
    bvh = build_bvh(p, t)
    fine = shadow_map(rig, cam, size, size, bvh, step=2)
    coarse = shadow_map(rig, cam, size, size, bvh)  # the default, shadow_step = 4 here
    assert shadow_step(size, size) == 4
    yy, xx = np.mgrid[0:size, 0:size]
    o, d = generate_rays(pack_camera(cam, size, size), (xx + 0.5).ravel(), (yy + 0.5).ravel())
    product = (intersect(bvh, o, d).tri >= 0).reshape(size, size)
    seen = ~product
    shadowed = seen & ((fine < 1.0) | (coarse < 1.0))
    assert shadowed.sum() > 2000 and fine[seen].min() < 0.7  # a real contact shadow is compared
    diff = np.abs(fine - coarse)[seen]
    assert diff.max() < 0.05
    assert np.abs(fine - coarse)[shadowed].mean() < 0.01
    # outside the shadow both are exactly white
    assert np.array_equal(fine == 1.0, coarse == 1.0) or np.mean((fine == 1.0) != (coarse == 1.0)) < 0.002
    # a grid four times sparser (step 2 r) blurs the contact edges visibly: the comparison
    # above is sensitive to the step (measured: max difference 0.23)
    sparse = shadow_map(rig, cam, size, size, bvh, step=16)
    assert np.abs(fine - sparse)[seen].max() > 0.1


def test_same_seed_same_bits_on_one_and_two_threads():
    import numba

    p, t, cam, rig = _shot("front")
    bvh = build_bvh(p, t)
    rng = np.random.default_rng(1)
    pts = np.column_stack([rng.uniform(-2, 2, 500), np.full(500, rig.floor_y), rng.uniform(-2, 2, 500)])
    up = np.tile([0.0, 1.0, 0.0], (500, 1))
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = direct_light_ratio(rig, pts, up, bvh, seed=5)
        grid1 = shadow_map(rig, cam, 96, 96, bvh, step=3, seed=5)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = direct_light_ratio(rig, pts, up, bvh, seed=5)
        grid2 = shadow_map(rig, cam, 96, 96, bvh, step=3, seed=5)
    finally:
        numba.set_num_threads(before)
    assert one.tobytes() == two.tobytes() and grid1.tobytes() == grid2.tobytes()
    assert (one < 1.0).any() and (one == 1.0).any()
    assert not np.array_equal(one, direct_light_ratio(rig, pts, up, bvh, seed=6))  # the seed matters


def test_unoccluded_points_are_exactly_one_and_a_covered_point_zero():
    p, t, cam, rig = _shot("front")
    bvh = build_bvh(p, t)
    far = np.array([[50.0, rig.floor_y, 50.0]])
    assert direct_light_ratio(rig, far, [[0.0, 1.0, 0.0]], bvh)[0] == 1.0
    # under the middle of the box (just above the floor, inside the box's footprint)
    under = np.array([[0.0, rig.floor_y, 0.0]])
    assert direct_light_ratio(rig, under, [[0.0, 1.0, 0.0]], bvh)[0] == pytest.approx(0.0, abs=1e-12)
