"""Studio rigs: sweep geometry, soft-box placement, key-to-fill radiometry, rig files."""

import math

import numpy as np
import pytest

from variantshot.errors import InputError
from variantshot.geometry import rig as rigmod
from variantshot.geometry.rig import (
    build_rig,
    emitted_power,
    load_rig,
    parse_rig,
    polygon_irradiance,
    rig_names,
    sweep_profile,
)
from variantshot.catalog.angles import ANGLE_PRESETS, frame_angle
from variantshot.geometry.scene import Camera

BOUNDS = (np.array([-0.1, 0.0, -0.05]), np.array([0.1, 0.3, 0.05]))


def test_at_least_three_bundled_rigs():
    names = rig_names()
    assert len(names) >= 3
    assert rigmod.DEFAULT_RIG in names


def test_polygon_irradiance_matches_coaxial_disk_closed_form():
    # REFERENCES §6(d): on-axis irradiance from a Lambertian disk, E = pi L R^2 / (R^2 + h^2);
    # L = 1, R = h -> pi/2, R = h/2 -> 0.628319. A 512-gon inscribed in the disk converges to it.
    for radius, h, expected in ((1.0, 1.0, math.pi / 2), (0.5, 1.0, 0.628319)):
        k = 512
        phi = 2 * np.pi * np.arange(k) / k
        # area-preserving polygon radius so the 512-gon has the disk's area
        rp = radius * math.sqrt(2 * math.pi / (k * math.sin(2 * math.pi / k)))
        corners = np.stack([rp * np.cos(phi), rp * np.sin(phi), np.full(k, h)], axis=1)
        e = polygon_irradiance(corners, 1.0, (0, 0, 0), (0, 0, 1))
        assert e == pytest.approx(expected, rel=1e-4)


def test_polygon_irradiance_full_hemisphere_limit_and_horizon_clip():
    # A huge square far above a point approaches the unit-radiance hemisphere, E = pi L
    # (PBR 4ed §4.1, irradiance of uniform radiance over the hemisphere).
    big = np.array([[-1e4, -1e4, 1.0], [1e4, -1e4, 1.0], [1e4, 1e4, 1.0], [-1e4, 1e4, 1.0]])
    assert polygon_irradiance(big, 1.0, (0, 0, 0), (0, 0, 1)) == pytest.approx(math.pi, rel=1e-3)
    # entirely below the receiver's horizon: nothing arrives
    assert polygon_irradiance(big, 1.0, (0, 0, 2.0), (0, 0, 1)) == 0.0


@pytest.mark.parametrize("name", rig_names())
def test_soft_boxes_face_the_product(name):
    r = build_rig(name, BOUNDS)
    for box, corners in r.box_corners.items():
        n = np.cross(corners[1] - corners[0], corners[2] - corners[0])
        n /= np.linalg.norm(n)
        to_product = r.centre - corners.mean(axis=0)
        to_product /= np.linalg.norm(to_product)
        assert n @ to_product > 0.999, box
        # the scene's triangles for the box carry the same front-face normal (CCW winding)
        mat = next(i for i, m in enumerate(r.scene.materials) if m.name.endswith(":" + box))
        tris = r.scene.triangles[r.scene.tri_material == mat]
        p = r.scene.positions.astype(np.float64)
        fn = np.cross(p[tris[:, 1]] - p[tris[:, 0]], p[tris[:, 2]] - p[tris[:, 0]])
        fn /= np.linalg.norm(fn, axis=1, keepdims=True)
        assert np.all(fn @ to_product > 0.999)


@pytest.mark.parametrize("ratio", [1.0, 2.0, 4.0, 8.0])
def test_key_to_fill_ratio_is_illuminance_ratio(ratio):
    # Definition (REFERENCES §8, [read]): key-to-fill ratio = key intensity / fill intensity.
    # Our convention: illuminance at the product centre, meter facing each light.
    r = build_rig("soft-even", BOUNDS, key_to_fill=ratio)
    keys = {b.role: b.name for b in r.spec.boxes}
    e = {}
    for role in ("key", "fill"):
        corners = r.box_corners[keys[role]]
        d = corners.mean(axis=0) - r.centre
        e[role] = polygon_irradiance(corners, r.box_radiance[keys[role]], r.centre, d)
    assert e["key"] / e["fill"] == pytest.approx(ratio, rel=1e-9)
    assert e["key"] == pytest.approx(r.spec.key_illuminance, rel=1e-9)


def test_equal_boxes_at_equal_distance_power_ratio_equals_setting():
    # For two identical boxes at the same distance the illuminance ratio is the emitted power
    # ratio Phi = pi L A (Lambertian emitter).
    data = {
        "key_to_fill": 3.0,
        "softbox": [
            {"name": "k", "role": "key", "azimuth_deg": -45, "elevation_deg": 30, "distance": 4, "width": 2, "height": 3},
            {"name": "f", "role": "fill", "azimuth_deg": 45, "elevation_deg": 30, "distance": 4, "width": 2, "height": 3},
        ],
    }
    r = build_rig(parse_rig(data), BOUNDS)
    pk = emitted_power(2 * r.radius, 3 * r.radius, r.box_radiance["k"])
    pf = emitted_power(2 * r.radius, 3 * r.radius, r.box_radiance["f"])
    assert pk / pf == pytest.approx(3.0, rel=1e-9)
    # and the material carries the radiance as emissive_factor x KHR_materials_emissive_strength
    m = next(m for m in r.scene.materials if m.name.endswith(":k"))
    assert m.emissive_strength == pytest.approx(r.box_radiance["k"])
    assert m.extensions["KHR_materials_emissive_strength"]["emissiveStrength"] == pytest.approx(m.emissive_strength)


def test_rig_scales_with_the_product():
    small = build_rig("side-contour", BOUNDS)
    big_bounds = (BOUNDS[0] * 10, BOUNDS[1] * 10)
    big = build_rig("side-contour", big_bounds)
    # same solid angles -> same radiances; positions scale about the floor-centre point
    for k in small.box_radiance:
        assert big.box_radiance[k] == pytest.approx(small.box_radiance[k], rel=1e-9)
    assert big.radius == pytest.approx(10 * small.radius)
    ps = small.scene.positions.astype(np.float64)
    pb = big.scene.positions.astype(np.float64)
    np.testing.assert_allclose(pb, ps * 10, rtol=1e-5, atol=1e-5)


def test_sweep_profile_is_continuous_and_tangent_smooth():
    bd = load_rig("soft-even").backdrop
    yz, n = sweep_profile(bd)
    # normals are unit and perpendicular to the profile on both sides of every vertex
    assert np.allclose(np.linalg.norm(n, axis=1), 1.0)
    seg = np.diff(yz, axis=0)
    seg /= np.linalg.norm(seg, axis=1, keepdims=True)
    # the analytic normal turns by at most one cove step between neighbours (no kink anywhere)
    step = math.radians(90.0 / bd.segments) + 1e-9
    turn = np.arccos(np.clip(np.sum(n[1:] * n[:-1], axis=1), -1, 1))
    assert turn.max() <= step
    # each segment's chord is perpendicular to the mean of its end normals (tangent continuity)
    mean_n = n[1:] + n[:-1]
    mean_n /= np.linalg.norm(mean_n, axis=1, keepdims=True)
    assert np.abs(np.sum(seg * mean_n, axis=1)).max() < 1e-9
    # it goes from floor (normal +Y) to wall (normal +Z), rising monotonically behind the product
    assert np.allclose(n[0], (1, 0)) and np.allclose(n[-1], (0, 1))
    assert yz[-1, 0] == pytest.approx(bd.height)
    assert np.all(np.diff(yz[:, 1]) <= 1e-12)


def test_sweep_mesh_is_one_manifold_sheet_with_matching_normals():
    trimesh = pytest.importorskip("trimesh")
    r = build_rig("soft-even", BOUNDS)
    mat = r.floor_material
    tris = r.scene.triangles[r.scene.tri_material == mat]
    used = np.unique(tris)
    remap = -np.ones(r.scene.positions.shape[0], np.int64)
    remap[used] = np.arange(len(used))
    mesh = trimesh.Trimesh(r.scene.positions[used], remap[tris], process=False)
    # trimesh as the reference: a single connected sheet, every edge shared by at most 2 faces
    groups = trimesh.graph.connected_components(mesh.face_adjacency, nodes=np.arange(len(mesh.faces)), engine="scipy")
    assert len(groups) == 1
    edges = np.sort(mesh.edges, axis=1)
    _, counts = np.unique(edges, axis=0, return_counts=True)
    assert counts.max() <= 2
    # face winding agrees with the smooth vertex normals everywhere
    vn = r.scene.normals[used].astype(np.float64)
    fn = mesh.face_normals
    for k in range(3):
        assert np.all(np.sum(fn * vn[mesh.faces[:, k]], axis=1) > 0.9)
    # the product stands on the floor: floor just below the bbox bottom, under the product
    assert r.floor_y <= BOUNDS[0][1] and BOUNDS[0][1] - r.floor_y < 1e-2 * r.radius


def test_rig_turns_to_face_the_camera():
    m = np.eye(4)
    m[:3, 3] = (3.0, 0.5, 0.0)  # camera on +X
    cam = Camera(name="side", kind="perspective", world_from_camera=m)
    base = build_rig("soft-even", BOUNDS)
    turned = build_rig("soft-even", BOUNDS, camera=cam)
    assert turned.yaw_rad == pytest.approx(math.pi / 2)
    # the key's offset from the centre is the unturned one rotated by 90 deg about +Y
    a = base.box_corners["key"].mean(axis=0) - base.centre
    b = turned.box_corners["key"].mean(axis=0) - turned.centre
    assert b == pytest.approx(np.array([a[2], a[1], -a[0]]), abs=1e-9)
    rot = build_rig("soft-even", BOUNDS, rotation_deg=90.0)
    assert rot.yaw_rad == pytest.approx(math.pi / 2)


def test_bad_rig_files_name_the_problem(tmp_path):
    with pytest.raises(InputError, match="unknown studio rig 'nope'.*soft-even"):
        load_rig("nope")
    bad = tmp_path / "bad.toml"
    bad.write_text('name = "bad"\n[[softbox]]\nname = "a"\nrole = "fill"\nazimuth_deg = 0\n'
                   'elevation_deg = 10\ndistance = 3\nwidth = 1\nheight = 1\n')
    with pytest.raises(InputError, match="bad.toml.*exactly one key"):
        load_rig(bad)
    bad.write_text('[[softbox]]\nrole = "key"\nazimuth_deg = "left"\n')
    with pytest.raises(InputError, match=r"softbox\[0\]: 'azimuth_deg' must be a number"):
        load_rig(bad)
    with pytest.raises(InputError, match="key-to-fill"):
        build_rig("soft-even", BOUNDS, key_to_fill=0.0)


def test_box_between_lens_and_product_is_left_out():
    # a top view: camera straight above, looking down -Y (its up vector is -Z)
    m = np.eye(4)
    m[:3, :3] = [[1, 0, 0], [0, 0, 1], [0, -1, 0]]  # columns: right +X, up -Z, backward +Y
    m[:3, 3] = (0.0, 3.0, 0.0)
    top = Camera(name="top", kind="perspective", world_from_camera=m, yfov_rad=0.35)
    full = build_rig("soft-even", BOUNDS)
    seen = build_rig("soft-even", BOUNDS, camera=top)
    assert "overhead" in full.box_corners and "overhead" not in seen.box_corners
    assert "key" in seen.box_corners and "fill" in seen.box_corners
    # nothing that is left is crossed by the line of sight to the product's centre
    for corners in seen.box_corners.values():
        assert not rigmod._quad_blocks(corners, m[:3, 3], seen.centre[None])
    assert rigmod._quad_blocks(full.box_corners["overhead"], m[:3, 3], full.centre[None])


def _overhead_rig(env=0.0):
    data = {
        "environment": env,
        "softbox": [{"name": "k", "role": "key", "azimuth_deg": 0, "elevation_deg": 90, "distance": 4, "width": 2,
                     "height": 2}],
    }
    return build_rig(parse_rig(data), BOUNDS)


def test_direct_light_ratio_half_occluded_by_symmetry():
    from variantshot.geometry.bvh import build_bvh
    from variantshot.geometry.rig import direct_light_ratio

    r = _overhead_rig()
    c = r.box_corners["k"].mean(axis=0)
    floor = np.array([[c[0], r.floor_y, c[2]]])
    up = np.array([[0.0, 1.0, 0.0]])
    y_mid = 0.5 * (r.floor_y + c[1])
    big = 100.0
    # an occluder plane covering exactly the half x > c.x of everything above the point
    half = np.array([[c[0], y_mid, c[2] - big], [c[0] + big, y_mid, c[2] - big], [c[0] + big, y_mid, c[2] + big],
                     [c[0], y_mid, c[2] + big]], np.float32)
    tris = np.array([[0, 1, 2], [0, 2, 3]], np.int32)
    ratio = direct_light_ratio(r, floor, up, build_bvh(half, tris), box_samples=8)
    # the box and the point are mirror-symmetric about x = c.x: half the light is blocked
    assert ratio[0] == pytest.approx(0.5, abs=0.03)
    # an occluder far to the side blocks nothing: exactly 1
    aside = half + np.array([50.0, 0.0, 0.0], np.float32)
    assert direct_light_ratio(r, floor, up, build_bvh(aside, tris))[0] == 1.0


def test_direct_light_ratio_environment_only():
    from variantshot.geometry.bvh import build_bvh
    from variantshot.geometry.rig import direct_light_ratio

    r = _overhead_rig(env=0.5)
    c = r.box_corners["k"].mean(axis=0)
    floor = np.array([[c[0], r.floor_y, c[2]]])
    up = np.array([[0.0, 1.0, 0.0]])
    # a roof over everything blocks the box and the whole sky: nothing arrives
    y = 0.5 * (r.floor_y + c[1])
    roof = np.array([[-1e3, y, -1e3], [1e3, y, -1e3], [1e3, y, 1e3], [-1e3, y, 1e3]], np.float32)
    tris = np.array([[0, 1, 2], [0, 2, 3]], np.int32)
    assert direct_light_ratio(r, floor, up, build_bvh(roof, tris))[0] == 0.0


@pytest.mark.parametrize("rig_name", rig_names())
@pytest.mark.parametrize("angle", sorted(ANGLE_PRESETS))
def test_no_soft_box_stands_between_lens_and_product(rig_name, angle):
    # Geometry of sight lines (a segment-rectangle test, common practice, no source): from every
    # named angle the lens must see every corner of the product's box, under every bundled rig,
    # and the key is always lit (a dropped key would leave a black frame).
    lo, hi = BOUNDS
    corners = np.array([[x, y, z] for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])])
    pose = frame_angle(corners, angle)
    cam = Camera(name=angle, kind="perspective", world_from_camera=pose, yfov_rad=0.35)
    rig = build_rig(rig_name, BOUNDS, camera=cam)
    assert any(b.role == "key" and b.name in rig.box_radiance for b in load_rig(rig_name).boxes)
    eye = pose[:3, 3]
    targets = np.vstack([corners, (0.5 * (lo + hi))[None]])
    for name, quad in rig.box_corners.items():
        assert not rigmod._quad_blocks(np.asarray(quad), eye, targets), f"{rig_name}/{angle}: box {name!r} blocks the view"
