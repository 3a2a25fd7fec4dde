"""BVH build and traversal against brute force, embreex/trimesh, and watertightness checks."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import naive
from variantshot.geometry import bvh as bvh_mod
from variantshot.geometry.bvh import build_bvh, intersect, occluded

trimesh = pytest.importorskip("trimesh")

# float32 geometry: coordinates carry ~6e-8 relative rounding, so a t that is tiny compared with
# the scene size can only be compared absolutely (common practice, no source).
REL_T = 1e-4
# A ray whose brute-force hit lies this close to a triangle edge (in barycentric units) grazes
# the edge; float32 and float64 tests may then legitimately disagree about that one triangle.
GRAZE = 1e-4


def _t_close(a, b, floor):
    with np.errstate(invalid="ignore"):
        return np.abs(a - b) <= REL_T * np.maximum(np.maximum(np.abs(a), np.abs(b)), floor)


def _check_against_brute_force(pos, tris, o, d, tmin, tmax):
    """Closest hits and any-hits of the BVH agree with all-pairs float64 Möller–Trumbore."""
    b = build_bvh(pos, tris)
    hits = intersect(b, o, d, tmin, tmax)
    assert hits.t.dtype == np.float32 and hits.tri.dtype == np.int32
    assert hits.b1.dtype == np.float32 and hits.b2.dtype == np.float32
    assert not np.isnan(hits.t).any()
    scale = float(np.abs(pos).max()) if pos.size else 1.0
    p64 = pos.astype(np.float64)
    t64 = tris.astype(np.int64)
    v0, v1, v2 = p64[t64[:, 0]], p64[t64[:, 1]], p64[t64[:, 2]]
    for r in range(len(o)):
        floor = 1e-3 * max(scale, 1e-3) / max(float(np.linalg.norm(d[r])), 1e-30)
        if len(tris):
            t_all, b1_all, b2_all = naive.ray_triangles_moller_trumbore(o[r], d[r], v0, v1, v2, tmin, tmax)
        else:
            t_all = b1_all = b2_all = np.zeros(0)
        with np.errstate(invalid="ignore"):
            graze = np.minimum(np.minimum(b1_all, b2_all), 1.0 - b1_all - b2_all) < GRAZE
            graze = graze | ~np.isfinite(b1_all)
        t_bvh = float(hits.t[r])
        if np.isfinite(t_bvh):
            k = int(hits.tri[r])
            assert 0 <= k < len(tris)
            # the reported triangle is hit at the reported t, or grazed (float64 puts the hit
            # point within GRAZE of its edges)
            tp, b1p, b2p = naive.ray_triangles_moller_trumbore(
                o[r], d[r], v0[k : k + 1], v1[k : k + 1], v2[k : k + 1], clip=False
            )
            margin = min(b1p[0], b2p[0], 1.0 - b1p[0] - b2p[0])
            assert margin >= -GRAZE and _t_close(t_bvh, tp[0], floor), (r, k, t_bvh, tp, margin)
            # barycentrics reproduce the hit point
            p = (1 - hits.b1[r] - hits.b2[r]) * v0[k] + hits.b1[r] * v1[k] + hits.b2[r] * v2[k]
            q = o[r].astype(np.float64) + t_bvh * d[r].astype(np.float64)
            assert np.linalg.norm(p - q) <= 1e-3 * max(scale, 1e-3) + 1e-4 * np.linalg.norm(q)
        # nothing clearly nearer was missed
        nearer = np.isfinite(t_all) & ~graze & (t_all < t_bvh) & ~_t_close(t_all, t_bvh, floor)
        assert not nearer.any(), (r, t_bvh, t_all[nearer])
    # any-hit is "closest hit exists in (tmin, tmax)"
    occ = occluded(b, o, d, tmin, tmax)
    np.testing.assert_array_equal(occ, np.isfinite(hits.t))
    return hits


coords = st.floats(-1.0, 1.0, width=32, allow_subnormal=False)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    pos=hnp.arrays(np.float32, st.tuples(st.integers(3, 40), st.just(3)), elements=coords),
    data=st.data(),
)
def test_closest_hit_matches_brute_force(pos, data):
    # Hypothesis fills arrays with repeated values: degenerate, coplanar and duplicated
    # triangles appear often, which is the point.
    n_v = len(pos)
    tris = data.draw(hnp.arrays(np.int32, st.tuples(st.integers(0, 60), st.just(3)), elements=st.integers(0, n_v - 1)))
    o = data.draw(hnp.arrays(np.float32, (16, 3), elements=st.floats(-2.0, 2.0, width=32)))
    d = data.draw(hnp.arrays(np.float32, (16, 3), elements=coords))
    tmax = data.draw(st.sampled_from([np.inf, 1.0, 0.25]))
    _check_against_brute_force(pos, tris, o, d, 0.0, tmax)


def test_a_hit_exactly_at_tmax_is_outside_for_both_queries():
    # Found by hypothesis: a ray ending exactly on a vertex (t = tmax = 1).  The interval is open,
    # so neither query may report it; before, the closest-hit core rounded t64 = 1 - 1e-16 to the
    # float32 t = 1.0 and kept it while the any-hit core said no.  Degenerate triangles at the same
    # vertex ride along (never hit).
    pos = np.array([[0.96875, 0.5, 0.5], [0.5, -0.5078125, 0.5], [0.5, 0.5, 0.5]], np.float32)
    for tris in (np.array([[0, 1, 2]], np.int32), np.array([[2, 2, 2]] * 16 + [[0, 1, 2]], np.int32)):
        b = build_bvh(pos, tris)
        o = np.zeros((4, 3), np.float32)
        d = np.full((4, 3), 0.5, np.float32)
        for tmax, inside in ((1.0, False), (np.nextafter(np.float32(1.0), np.float32(2.0)), True)):
            hits = intersect(b, o, d, 0.0, tmax)
            occ = occluded(b, o, d, 0.0, tmax)
            np.testing.assert_array_equal(occ, np.isfinite(hits.t))
            assert occ.all() == inside and (not inside or np.all(hits.t < tmax))
        _check_against_brute_force(pos, tris, o, d, 0.0, 1.0)


def test_random_soup_many_rays():
    rng = np.random.default_rng(7)
    pos = rng.normal(size=(600, 3)).astype(np.float32)
    tris = rng.integers(0, 600, (400, 3)).astype(np.int32)
    o = (rng.normal(size=(400, 3)) * 2).astype(np.float32)
    d = rng.normal(size=(400, 3)).astype(np.float32) * rng.uniform(0.1, 10, (400, 1)).astype(np.float32)
    hits = _check_against_brute_force(pos, tris, o, d, 0.05, 50.0)
    assert np.isfinite(hits.t).sum() > 100  # the check exercised real hits


def test_single_triangle_closed_form():
    # The point 0.2 v0 + 0.3 v1 + 0.5 v2 of a triangle, reached from 2 units above it: t is in
    # units of the direction's length, b1 / b2 weight v1 / v2 (BRIEF contract; affine
    # combination of the vertices, closed form).
    v = np.array([[0.0, 0.0, 0.0], [2.0, 0.0, 0.0], [0.0, 1.0, 0.0]], np.float32)
    b = build_bvh(v, np.array([[0, 1, 2]], np.int32))
    p = 0.2 * v[0] + 0.3 * v[1] + 0.5 * v[2]
    for length in (1.0, 4.0, 0.25):
        o = (p + [0.0, 0.0, 2.0]).astype(np.float32)[None]
        d = np.array([[0.0, 0.0, -length]], np.float32)
        h = intersect(b, o, d)
        assert h.tri[0] == 0
        assert h.t[0] == pytest.approx(2.0 / length, rel=1e-6)
        assert h.b1[0] == pytest.approx(0.3, abs=1e-6) and h.b2[0] == pytest.approx(0.5, abs=1e-6)
        # from below: both faces count
        h = intersect(b, (p - [0.0, 0.0, 2.0]).astype(np.float32)[None], -d)
        assert h.tri[0] == 0 and h.t[0] == pytest.approx(2.0 / length, rel=1e-6)
        # the open interval (tmin, tmax) decides, for closest and any hit alike
        t_hit = 2.0 / length
        for tmin, tmax, expect in ((0.0, 0.99 * t_hit, False), (0.0, 1.01 * t_hit, True),
                                   (1.01 * t_hit, np.inf, False), (0.99 * t_hit, np.inf, True)):
            assert bool(occluded(b, o, d, tmin, tmax)[0]) is expect
            assert bool(intersect(b, o, d, tmin, tmax).tri[0] == 0) is expect
    # per-ray tmax arrays broadcast like scalars
    o = np.repeat((p + [0.0, 0.0, 2.0]).astype(np.float32)[None], 2, axis=0)
    d = np.repeat(np.array([[0.0, 0.0, -1.0]], np.float32), 2, axis=0)
    np.testing.assert_array_equal(occluded(b, o, d, 0.0, np.array([1.0, 3.0])), [False, True])


def test_no_triangles_always_misses():
    b = build_bvh(np.zeros((0, 3), np.float32), np.zeros((0, 3), np.int32))
    o = np.zeros((5, 3), np.float32)
    d = np.eye(3, dtype=np.float32)[[0, 1, 2, 0, 1]]
    h = intersect(b, o, d)
    assert np.all(np.isinf(h.t)) and np.all(h.tri == -1)
    assert not occluded(b, o, d).any()


def test_all_same_centroid_and_duplicates_build():
    # 5000 copies of one triangle: every split candidate is empty on one side.
    pos = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], np.float32)
    tris = np.tile(np.array([[0, 1, 2]], np.int32), (5000, 1))
    b = build_bvh(pos, tris)
    h = intersect(b, np.array([[0.2, 0.2, 1.0]], np.float32), np.array([[0, 0, -1.0]], np.float32))
    assert h.t[0] == pytest.approx(1.0) and 0 <= h.tri[0] < 5000
    # the leaves hold every triangle (spare lanes of a short pack repeat one of them)
    assert set(b.tri_ids.tolist()) == set(range(5000))


def test_zero_area_triangles_never_hit():
    pos = np.array([[0, 0, 0], [1, 1, 1], [2, 2, 2], [0, 0, 0]], np.float32)
    tris = np.array([[0, 1, 2], [0, 3, 0], [1, 1, 1]], np.int32)
    b = build_bvh(pos, tris)
    o = np.array([[1, 1, 1], [0, 0, 0], [1, 0, 0]], np.float32) + np.float32(0.0)
    d = np.array([[1, 0, 0], [1, 1, 1], [-1, 0, 0]], np.float32)
    h = intersect(b, o - d, d)
    assert np.all(h.tri == -1)


def _icosphere(subdivisions=3, radius=1.0):
    mesh = trimesh.creation.icosphere(subdivisions=subdivisions, radius=radius)
    return mesh.vertices.astype(np.float32), mesh.faces.astype(np.int32)


def test_watertight_rays_from_inside_icosphere():
    # pbrt-v4 shapes_test.cpp: rays leaving a point inside a closed mesh must hit it.
    pos, tris = _icosphere(3)
    b = build_bvh(pos, tris)
    rng = np.random.default_rng(3)
    n = 20000
    o = (rng.normal(size=(n, 3)) * 0.2).astype(np.float32)
    d = rng.normal(size=(n, 3)).astype(np.float32)
    h = intersect(b, o, d)
    assert np.all(h.tri >= 0)
    assert occluded(b, o, d).all()


def test_watertight_rays_through_vertices_and_edges():
    # Rays from the centre straight at every vertex and every edge midpoint of a closed mesh.
    pos, tris = _icosphere(2)
    b = build_bvh(pos, tris)
    edges = np.concatenate([tris[:, [0, 1]], tris[:, [1, 2]], tris[:, [2, 0]]])
    mids = 0.5 * (pos[edges[:, 0]] + pos[edges[:, 1]])
    targets = np.concatenate([pos, mids]).astype(np.float32)
    for origin in ([0, 0, 0], [0.1, -0.2, 0.05]):
        o = np.broadcast_to(np.asarray(origin, np.float32), targets.shape).copy()
        h = intersect(b, o, targets - o)
        assert np.all(h.tri >= 0), np.flatnonzero(h.tri < 0)[:10]


def _grid(n=16):
    ys, xs = np.mgrid[0 : n + 1, 0 : n + 1]
    pos = np.stack([xs.ravel(), ys.ravel(), np.zeros(xs.size)], axis=1).astype(np.float32) / n
    idx = np.arange((n + 1) * (n + 1)).reshape(n + 1, n + 1)
    a, bb, c, dd = idx[:-1, :-1], idx[:-1, 1:], idx[1:, :-1], idx[1:, 1:]
    tris = np.concatenate(
        [np.stack([a, bb, dd], -1).reshape(-1, 3), np.stack([a, dd, c], -1).reshape(-1, 3)]
    ).astype(np.int32)
    return pos, tris


def test_watertight_grid_shared_edges_and_vertices():
    # A ray through a shared edge or vertex of a flat grid hits (exactly one or several at the
    # same t, never none): every interior vertex, edge midpoint and diagonal midpoint.
    pos, tris = _grid(16)
    b = build_bvh(pos, tris)
    e = np.concatenate([tris[:, [0, 1]], tris[:, [1, 2]], tris[:, [2, 0]]])
    pts = np.concatenate([pos, 0.5 * (pos[e[:, 0]] + pos[e[:, 1]])]).astype(np.float32)
    inside = (pts[:, 0] > 0) & (pts[:, 0] < 1) & (pts[:, 1] > 0) & (pts[:, 1] < 1)
    pts = pts[inside]
    rng = np.random.default_rng(5)
    for _ in range(4):
        o = (pts + rng.normal(size=pts.shape) * [0.5, 0.5, 0] + [0, 0, 1.0]).astype(np.float32)
        o[:, 2] = rng.uniform(0.2, 2.0, len(o))
        h = intersect(b, o, pts - o)
        assert np.all(h.tri >= 0), pts[h.tri < 0][:5]
        np.testing.assert_allclose(h.t, 1.0, rtol=1e-5)
    # straight down, from below too (both faces count)
    for sign in (1.0, -1.0):
        o = pts + np.float32([0, 0, sign])
        h = intersect(b, o, np.broadcast_to(np.float32([0, 0, -sign]), o.shape))
        assert np.all(h.tri >= 0)


def test_edge_on_rays_do_not_produce_nan():
    pos, tris = _grid(8)
    b = build_bvh(pos, tris)
    rng = np.random.default_rng(11)
    o = rng.uniform(-0.5, 1.5, (2000, 3)).astype(np.float32)
    o[:, 2] = 0.0  # in the grid plane
    d = rng.normal(size=(2000, 3)).astype(np.float32)
    d[:, 2] = 0.0
    d[:10] = 0.0  # zero directions miss
    h = intersect(b, o, d)
    for arr in h:
        assert not np.isnan(arr.astype(np.float64)).any()
    assert np.all(h.tri[:10] == -1)
    occluded(b, o, d)


def test_against_embreex_and_trimesh():
    """Hit/miss agreement >= 99.99 % and |dt| <= 1e-4 relative against Embree (through embreex)."""
    embreex = pytest.importorskip("embreex")  # noqa: F841
    from embreex import rtcore_scene as rtcs
    from embreex.mesh_construction import TriangleMesh

    mesh = trimesh.creation.icosphere(subdivisions=5)  # 20480 faces
    v = mesh.vertices
    v = v * (1.0 + 0.15 * np.sin(5 * v[:, :1]) * np.cos(7 * v[:, 1:2]) * np.sin(3 * v[:, 2:]))
    mesh = trimesh.Trimesh(v.astype(np.float32), mesh.faces, process=False)
    pos = mesh.vertices.astype(np.float32)
    tris = mesh.faces.astype(np.int32)
    b = build_bvh(pos, tris)

    rng = np.random.default_rng(2)
    n = 100_000
    o = rng.normal(size=(n, 3))
    o = (3.0 * o / np.linalg.norm(o, axis=1, keepdims=True)).astype(np.float32)
    target = rng.uniform(-1.2, 1.2, (n, 3))
    d = (target - o).astype(np.float32)
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    h = intersect(b, o, d)

    scene = rtcs.EmbreeScene()
    TriangleMesh(scene, pos[tris])
    ref = scene.run(o, d, output=1)
    ref_hit = ref["primID"] >= 0
    ours_hit = h.tri >= 0
    agree = np.mean(ref_hit == ours_hit)
    assert agree >= 0.9999, agree
    both = ref_hit & ours_hit
    assert both.sum() > n // 4
    rel = np.abs(h.t[both] - ref["tfar"][both]) / ref["tfar"][both]
    assert np.mean(rel <= 1e-4) >= 0.9999

    # trimesh's ray module names the same first triangles (its backend is embreex when that is
    # installed, as in the test extra: trimesh.ray.ray_pyembree; else its numpy ray_triangle)
    first = mesh.ray.intersects_first(o[:20000], d[:20000])
    same = (first == h.tri[:20000]) | (
        (first >= 0) & (h.tri[:20000] >= 0) & np.isclose(h.t[:20000], ref["tfar"][:20000], rtol=1e-4)
    )
    assert np.mean(same) >= 0.9999
    # ... and the same first hit points (trimesh.ray intersects_location, first hits only)
    loc, index_ray, _ = mesh.ray.intersects_location(o[:20000], d[:20000], multiple_hits=False)
    ours = o[index_ray].astype(np.float64) + h.t[index_ray, None].astype(np.float64) * d[index_ray]
    close = np.linalg.norm(ours - loc, axis=1) <= 1e-4 * 3.0  # 1e-4 of the ray length scale
    assert len(index_ray) > 5000 and np.mean(close) >= 0.9999


def test_thread_count_does_not_change_results():
    import numba

    pos, tris = _icosphere(3)
    b = build_bvh(pos, tris)
    rng = np.random.default_rng(9)
    o = rng.normal(size=(5000, 3)).astype(np.float32) * 2
    d = rng.normal(size=(5000, 3)).astype(np.float32)
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        h1 = intersect(b, o, d)
        numba.set_num_threads(numba.config.NUMBA_NUM_THREADS)
        h2 = intersect(b, o, d)
    finally:
        numba.set_num_threads(before)
    for a1, a2 in zip(h1, h2):
        np.testing.assert_array_equal(a1, a2)


def test_input_checks():
    pos, tris = _icosphere(1)
    with pytest.raises(TypeError):
        build_bvh(pos.astype(np.int32), tris)
    with pytest.raises(TypeError):
        build_bvh(pos, tris.astype(np.float32))
    with pytest.raises(ValueError, match="index vertices"):
        build_bvh(pos, tris + len(pos))
    bad = pos.copy()
    bad[tris[3, 0]] = np.nan
    with pytest.raises(ValueError, match="non-finite"):
        build_bvh(bad, tris)
    b = build_bvh(pos.astype(np.float64), tris.astype(np.int64))
    assert isinstance(b, bvh_mod.BVH) and b._fields[:4] == ("nodes_f", "nodes_i", "tris_f", "tri_ids")
    assert b.nodes_f.dtype == np.float32 and b.nodes_i.dtype == np.int32
    assert b.tris_f.dtype == np.float32 and b.tri_ids.dtype == np.int32
    with pytest.raises(ValueError):
        intersect(b, np.zeros((3, 3), np.float32), np.zeros((4, 3), np.float32))


def _walk_layout(b, pos, tris):
    """Walk the BVH arrays by the layout of the bvh_kernels docstring; check its invariants."""
    from variantshot.geometry.bvh_kernels import WIDTH

    nodes_f = b.nodes_f.reshape(-1, 6, WIDTH)  # [min_x, max_x, min_y, max_y, min_z, max_z] x lanes
    nodes_i = b.nodes_i.reshape(-1, WIDTH)
    packs = b.tris_f.reshape(-1, 3, 3, 4)  # pack, vertex, axis, lane
    ids = b.tri_ids.reshape(-1, 4)
    seen_nodes = np.zeros(len(nodes_i), np.int64)
    seen_tris = np.zeros(len(tris), np.int64)
    leaf_sizes = []
    stack = [0]
    while stack:
        n = stack.pop()
        seen_nodes[n] += 1
        for k in range(WIDTH):
            ref = int(nodes_i[n, k])
            if ref == -1:
                continue
            lo, hi = nodes_f[n, 0::2, k], nodes_f[n, 1::2, k]
            if ref >= 0:
                stack.append(ref)
                below = []
                sub = [ref]
                while sub:  # every triangle under the child lies inside the child's box
                    m = sub.pop()
                    for r in nodes_i[m]:
                        r = int(r)
                        if r >= 0:
                            sub.append(r)
                        elif r != -1:
                            v = ~r
                            for p in range((v >> 3), (v >> 3) + ((v & 7) + 3) // 4):
                                below.extend(ids[p])
                corners = pos[tris[np.unique(below)]].reshape(-1, 3)
            else:
                v = ~ref
                first, count = v >> 3, v & 7
                assert 1 <= count <= 7
                leaf_sizes.append(count)
                lanes = np.concatenate([ids[p] for p in range(first, first + (count + 3) // 4)])
                # the count first lanes are the leaf's triangles; spare lanes repeat the last one
                assert (lanes[count:] == lanes[count - 1]).all()
                seen_tris[lanes[:count]] += 1
                for p in range(first, first + (count + 3) // 4):
                    for lane in range(4):  # the pack holds the triangle's vertices in order
                        np.testing.assert_array_equal(packs[p, :, :, lane], pos[tris[ids[p, lane]]])
                corners = pos[tris[lanes[:count]]].reshape(-1, 3)
            assert (corners >= lo).all() and (corners <= hi).all(), (n, k)
    return seen_nodes, seen_tris, np.array(leaf_sizes)


@pytest.mark.parametrize("kind", ["icosphere", "soup"])
def test_layout_invariants(kind):
    # The layout documented in bvh_kernels (a fact of this module, no outside source): every node
    # is reached once from the root, every triangle sits in exactly one leaf, leaves hold 1..7
    # triangles, and every child box contains the triangles below it.
    if kind == "icosphere":
        pos, tris = _icosphere(4)
    else:
        rng = np.random.default_rng(11)
        pos = rng.normal(size=(3000, 3)).astype(np.float32)
        tris = rng.integers(0, 3000, (2000, 3)).astype(np.int32)
    b = build_bvh(pos, tris)
    seen_nodes, seen_tris, sizes = _walk_layout(b, pos, tris)
    assert (seen_nodes == 1).all()
    assert (seen_tris == 1).all()
    # the leaves come out mostly as full packs (the SAH counts whole packs): more than 85 % of
    # the pack lanes hold a distinct triangle (measured 96 %; 80 % with 4-triangle leaves)
    assert len(tris) / len(b.tri_ids) > 0.85, len(tris) / len(b.tri_ids)
    # the wide nodes are chosen by SAH over the whole binary tree, not by opening the largest
    # child first: nodes come out well filled (measured 5.9 / 6.7 of 8 here; 3.7 greedily)
    fill = float(np.mean(b.nodes_i != -1) * 8)
    assert fill > 5.0, fill
