"""Build the demo brand's product models and their Jinja templates.

Run ``python -m variantshot.catalog.demo_models [REPO]`` to (re)write

* ``catalog/models/<product>.gltf`` + ``.bin``: the plain model (grey materials), and
* ``templates/<product>.gltf.j2``: the same scene with the materials written by Jinja,

for three products of the invented brand "Tallow & Tide": an insulated bottle with a screw cap,
a ceramic mug with a handle and a small speaker with a fabric grille.  Geometry is built from
three primitives, all with smooth per-vertex normals and UVs, in metres, +Y up, front +Z:

* :func:`lathe`: a profile (radius, height) turned about +Y; profile corners are rounded with
  circular fillets first (:func:`rounded_polyline`), so smooth normals give crisp but
  believable edges;
* :func:`sweep`: an elliptical section swept along a planar path (the mug's handle);
* :func:`rounded_box`: a box with rounded edges and corners (a subdivided cube whose points are
  pushed onto the surface at distance ``radius`` from the inner box), for the speaker.

The output is deterministic (no randomness), so re-running the script gives the same bytes.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np

# ----------------------------------------------------------------------------- geometry


class Mesh:
    """Indexed triangles with smooth normals and UVs (numpy arrays)."""

    def __init__(self, positions, normals, uvs, indices):
        self.positions = np.asarray(positions, np.float32).reshape(-1, 3)
        self.normals = np.asarray(normals, np.float32).reshape(-1, 3)
        self.uvs = np.asarray(uvs, np.float32).reshape(-1, 2)
        self.indices = np.asarray(indices, np.uint32).reshape(-1, 3)

    @property
    def n_triangles(self) -> int:
        return int(self.indices.shape[0])


def rounded_polyline(points, radii, n_arc: int = 6) -> np.ndarray:
    """A 2-D polyline whose interior corners are replaced by circular fillets.

    Parameters
    ----------
    points : (N, 2) array_like
    radii : float or (N,) array_like
        Fillet radius per corner (end points are kept; 0 keeps a corner sharp).
    n_arc : int
        Segments per fillet.
    """
    p = np.asarray(points, dtype=np.float64)
    r = np.broadcast_to(np.asarray(radii, dtype=np.float64), (len(p),))
    out = [p[0]]
    for i in range(1, len(p) - 1):
        a, b, c = p[i - 1], p[i], p[i + 1]
        u = (a - b) / np.linalg.norm(a - b)
        v = (c - b) / np.linalg.norm(c - b)
        cos_t = float(np.clip(np.dot(u, v), -1.0, 1.0))
        theta = math.acos(cos_t)
        if r[i] <= 0 or theta > math.pi - 1e-6:
            out.append(b)
            continue
        d = r[i] / math.tan(theta / 2.0)
        d = min(d, 0.45 * np.linalg.norm(a - b), 0.45 * np.linalg.norm(c - b))
        rr = d * math.tan(theta / 2.0)
        t0, t1 = b + u * d, b + v * d
        bis = (u + v) / np.linalg.norm(u + v)
        centre = b + bis * (rr / math.sin(theta / 2.0))
        a0 = math.atan2(*(t0 - centre)[::-1])
        a1 = math.atan2(*(t1 - centre)[::-1])
        da = (a1 - a0 + math.pi) % (2 * math.pi) - math.pi
        for k in range(n_arc + 1):
            ang = a0 + da * k / n_arc
            out.append(centre + rr * np.array([math.cos(ang), math.sin(ang)]))
    out.append(p[-1])
    return np.array(out)


def _profile_normals(profile: np.ndarray) -> np.ndarray:
    """Outward 2-D normals of a (radius, y) profile traced so that the solid is on its left."""
    d = np.gradient(profile, axis=0)
    n = np.stack([d[:, 1], -d[:, 0]], axis=1)
    return n / np.maximum(np.linalg.norm(n, axis=1, keepdims=True), 1e-12)


def lathe(profile, segments: int = 48) -> Mesh:
    """Turn a (radius, y) profile about +Y.

    The profile runs so that the surface's outside is on the right of the direction of travel
    in the (r, y) plane (e.g. bottom centre -> outer wall -> top).  Points on the axis (r = 0)
    become poles without degenerate triangles.  u runs around (seam duplicated), v along the
    profile's arc length.
    """
    prof = np.asarray(profile, dtype=np.float64)
    n2 = _profile_normals(prof)
    arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(prof, axis=0), axis=1))])
    v = arc / arc[-1]
    ang = np.linspace(0.0, 2 * np.pi, segments + 1)
    # angle measured from +Z towards +X so u = 0.5 faces the front
    s, c = np.sin(ang), np.cos(ang)
    r, y = prof[:, 0], prof[:, 1]
    pos = np.stack([r[:, None] * s[None, :], np.broadcast_to(y[:, None], (len(prof), segments + 1)),
                    r[:, None] * c[None, :]], axis=-1)
    nor = np.stack([n2[:, 0:1] * s[None, :], np.broadcast_to(n2[:, 1:2], (len(prof), segments + 1)),
                    n2[:, 0:1] * c[None, :]], axis=-1)
    uv = np.stack([np.broadcast_to(ang[None, :] / (2 * np.pi), (len(prof), segments + 1)),
                   np.broadcast_to(1.0 - v[:, None], (len(prof), segments + 1))], axis=-1)
    cols = segments + 1
    tris = []
    for i in range(len(prof) - 1):
        for j in range(segments):
            a, b = i * cols + j, i * cols + j + 1
            cc, d = (i + 1) * cols + j, (i + 1) * cols + j + 1
            # winding: counter-clockwise seen from outside
            if r[i] > 1e-12:
                tris.append((a, b, d))
            if r[i + 1] > 1e-12:
                tris.append((a, d, cc))
    idx = np.array(tris, dtype=np.int64)
    m = Mesh(pos.reshape(-1, 3), nor.reshape(-1, 3), uv.reshape(-1, 2), idx)
    return _fix_winding(m)


def _fix_winding(m: Mesh) -> Mesh:
    """Flip triangles whose geometric normal disagrees with their vertex normals (CCW outside)."""
    p = m.positions.astype(np.float64)
    t = m.indices.astype(np.int64)
    face = np.cross(p[t[:, 1]] - p[t[:, 0]], p[t[:, 2]] - p[t[:, 0]])
    vn = m.normals[t].astype(np.float64).sum(axis=1)
    flip = np.einsum("ij,ij->i", face, vn) < 0
    t[flip] = t[flip][:, [0, 2, 1]]
    keep = np.linalg.norm(face, axis=1) > 1e-14
    return Mesh(m.positions, m.normals, m.uvs, t[keep])


def sweep(path, half_width: float, half_depth: float, sides: int = 16) -> Mesh:
    """Sweep an ellipse (``half_width`` in the path's plane, ``half_depth`` along Z) along a
    path in the XY plane; ends are left open (they sit inside the part they join)."""
    p = np.asarray(path, dtype=np.float64)
    t = np.gradient(p, axis=0)
    t /= np.linalg.norm(t, axis=1, keepdims=True)
    z = np.array([0.0, 0.0, 1.0])
    nrm = np.cross(z, t)
    nrm /= np.linalg.norm(nrm, axis=1, keepdims=True)
    ang = np.linspace(0.0, 2 * np.pi, sides + 1)
    pos, nor, uv = [], [], []
    arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(p, axis=0), axis=1))])
    for i in range(len(p)):
        for a in ang:
            ca, sa = math.cos(a), math.sin(a)
            pos.append(p[i] + nrm[i] * (half_width * ca) + z * (half_depth * sa))
            # ellipse normal: gradient of (x/a)^2 + (y/b)^2
            n = nrm[i] * (ca / half_width) + z * (sa / half_depth)
            nor.append(n / np.linalg.norm(n))
            uv.append((a / (2 * np.pi), arc[i] / arc[-1]))
    cols = sides + 1
    tris = []
    for i in range(len(p) - 1):
        for j in range(sides):
            a, b = i * cols + j, i * cols + j + 1
            c, d = (i + 1) * cols + j, (i + 1) * cols + j + 1
            tris += [(a, c, d), (a, d, b)]
    return _fix_winding(Mesh(pos, nor, uv, tris))


def rounded_box(half_extents, radius: float, n: int = 8) -> Mesh:
    """A box of ``half_extents`` (x, y, z) with edges and corners rounded by ``radius``.

    Each face is an ``n`` x ``n`` grid (plus rows clustered at the rounded rims); every grid point
    is clamped to the inner box (half extents minus ``radius``) and pushed out by ``radius``
    along the direction from its clamp point, which is also its normal.
    """
    h = np.asarray(half_extents, dtype=np.float64)
    inner = h - radius
    # grid parameter: dense near the rims so the rounded edges get enough rows
    k = np.linspace(-1.0, 1.0, n + 1)
    rim = radius / h
    pos, nor, uv, tris = [], [], [], []
    faces = [(0, 1, 2, 1.0), (0, 1, 2, -1.0), (1, 2, 0, 1.0), (1, 2, 0, -1.0), (2, 0, 1, 1.0), (2, 0, 1, -1.0)]
    for axis_u, axis_v, axis_n, sign in [(f[1], f[2], f[0], f[3]) for f in faces]:
        base = len(pos)
        uu = _rim_grid(k, rim[axis_u])
        vv = _rim_grid(k, rim[axis_v])
        for v in vv:
            for u in uu:
                q = np.zeros(3)
                q[axis_u], q[axis_v], q[axis_n] = u * h[axis_u], v * h[axis_v], sign * h[axis_n]
                c = np.clip(q, -inner, inner)
                d = q - c
                dn = d / np.linalg.norm(d)
                pos.append(c + dn * radius)
                nor.append(dn)
                uv.append(((u + 1) / 2, 1 - (v + 1) / 2))
        cols = len(uu)
        for vi in range(len(vv) - 1):
            for ui in range(cols - 1):
                a = base + vi * cols + ui
                tris += [(a, a + 1, a + cols + 1), (a, a + cols + 1, a + cols)]
    return _fix_winding(Mesh(pos, nor, uv, tris))


def _rim_grid(k: np.ndarray, rim_frac: float, n_rim: int = 4) -> np.ndarray:
    inner = 1.0 - rim_frac
    core = k * inner
    rim = np.linspace(inner, 1.0, n_rim + 1)[1:]
    return np.concatenate([-rim[::-1], core, rim])


def translate(m: Mesh, offset) -> Mesh:
    return Mesh(m.positions + np.asarray(offset, np.float32), m.normals, m.uvs, m.indices)


# ----------------------------------------------------------------------------- the products


def lathe_profiles() -> dict[tuple[str, str], tuple[np.ndarray, int]]:
    """``{(product, part): ((N, 2) radius/height profile, segments)}`` of every turned part."""
    bottle_body = rounded_polyline(
        [(0.0, 0.0), (0.0365, 0.0), (0.0365, 0.185), (0.0285, 0.212), (0.0285, 0.226), (0.0245, 0.226),
         (0.0245, 0.214), (0.0, 0.214)],
        [0, 0.006, 0.025, 0.02, 0.0015, 0.0015, 0.001, 0], n_arc=6)
    bottle_cap = rounded_polyline(
        [(0.0, 0.2155), (0.0312, 0.2155), (0.0312, 0.2575), (0.0, 0.2575)],
        [0, 0.0015, 0.007, 0], n_arc=6)
    outer = rounded_polyline(
        [(0.0, 0.0015), (0.034, 0.0015), (0.036, 0.0), (0.0405, 0.008), (0.043, 0.095), (0.0425, 0.0955)],
        [0, 0.001, 0.002, 0.006, 0.0, 0], n_arc=5)
    inner = rounded_polyline(
        [(0.0405, 0.0955), (0.0395, 0.095), (0.0375, 0.012), (0.0, 0.011)],
        [0, 0.0, 0.008, 0], n_arc=6)
    # the rim: a half-round joining the outer and inner walls
    t = np.linspace(0.0, math.pi, 7)
    rim = np.stack([0.0415 + 0.00175 * np.cos(t), 0.0955 + 0.0012 * np.sin(t)], axis=1)
    mug_body = np.concatenate([outer[:-1], rim, inner[1:]])
    foot = rounded_polyline([(0.0, 0.0), (0.008, 0.0), (0.008, 0.0045), (0.0, 0.0045)], [0, 0.002, 0.0015, 0], n_arc=4)
    button = rounded_polyline([(0.0, 0.106), (0.011, 0.106), (0.011, 0.1105), (0.0, 0.1112)], [0, 0.0, 0.0015, 0],
                              n_arc=4)
    return {
        ("bottle", "body"): (bottle_body, 48),
        ("bottle", "cap"): (bottle_cap, 48),
        ("mug", "body"): (mug_body, 56),
        ("speaker", "foot"): (foot, 20),
        ("speaker", "button"): (button, 32),
    }


def bottle_parts() -> dict[str, Mesh]:
    """Insulated 500 ml bottle: body 73 mm across, 257.5 mm tall with its cap."""
    prof = lathe_profiles()
    return {part: lathe(*prof[("bottle", part)]) for part in ("body", "cap")}


def mug_parts() -> dict[str, Mesh]:
    """Ceramic 350 ml mug: 86 mm across the rim, 95 mm tall, handle on +X."""
    u = np.linspace(0.0, 1.0, 28)
    # handle: a D-shaped path in the XY plane leaving the wall at y 0.078 and re-entering at 0.022
    ang = -math.pi / 2 + math.pi * u
    path = np.stack([0.0405 + 0.028 * np.cos(ang) ** 0.9, 0.050 - 0.028 * np.sin(ang)], axis=1)
    path3 = np.stack([path[:, 0], path[:, 1], np.zeros(len(u))], axis=1)
    return {"body": lathe(*lathe_profiles()[("mug", "body")]), "handle": sweep(path3, 0.0055, 0.0075, 16)}


def speaker_parts() -> dict[str, Mesh]:
    """Small speaker: 170 x 104 x 78 mm body on four rubber feet, fabric grille on the front."""
    body = translate(rounded_box((0.085, 0.052, 0.039), 0.012, 8), (0.0, 0.056, 0.0))
    grille = translate(rounded_box((0.074, 0.041, 0.003), 0.0025, 6), (0.0, 0.056, 0.0375))
    prof = lathe_profiles()
    foot = lathe(*prof[("speaker", "foot")])
    button = lathe(*prof[("speaker", "button")])
    return {"body": body, "grille": grille, "foot": foot, "button": button}


FOOT_POSITIONS = [(-0.062, 0.0, -0.024), (0.062, 0.0, -0.024), (-0.062, 0.0, 0.024), (0.062, 0.0, 0.024)]

# ----------------------------------------------------------------------------- glTF writing


def _pack(parts: dict[str, Mesh]) -> tuple[bytes, list, list, dict]:
    """Pack meshes into one buffer; returns (bin, bufferViews, accessors, {part: attribute dict})."""
    blob = bytearray()
    views, accessors, prims = [], [], {}

    def add(array: np.ndarray, target: int, kind: str, ctype: int, minmax: bool) -> int:
        while len(blob) % 4:
            blob.append(0)
        data = np.ascontiguousarray(array).tobytes()
        views.append({"buffer": 0, "byteOffset": len(blob), "byteLength": len(data), "target": target})
        blob.extend(data)
        acc = {"bufferView": len(views) - 1, "componentType": ctype, "count": int(array.shape[0]), "type": kind}
        if minmax:
            acc["min"] = [float(x) for x in array.min(axis=0)]
            acc["max"] = [float(x) for x in array.max(axis=0)]
        accessors.append(acc)
        return len(accessors) - 1

    for name, m in parts.items():
        attrs = {
            "POSITION": add(m.positions, 34962, "VEC3", 5126, True),
            "NORMAL": add(m.normals / np.linalg.norm(m.normals, axis=1, keepdims=True), 34962, "VEC3", 5126, False),
            "TEXCOORD_0": add(m.uvs, 34962, "VEC2", 5126, False),
        }
        n_v = m.positions.shape[0]
        if n_v < 65536:
            idx = add(m.indices.reshape(-1).astype(np.uint16), 34963, "SCALAR", 5123, False)
        else:
            idx = add(m.indices.reshape(-1).astype(np.uint32), 34963, "SCALAR", 5125, False)
        accessors[idx]["min"] = [int(m.indices.min())]
        accessors[idx]["max"] = [int(m.indices.max())]
        prims[name] = {"attributes": attrs, "indices": idx}
    while len(blob) % 4:
        blob.append(0)
    return bytes(blob), views, accessors, prims


PRODUCTS = {
    "bottle": {
        "title": "Tallow & Tide insulated bottle, 500 ml",
        "parts": bottle_parts,
        # part -> (material slot, Jinja material expression)
        "materials": [
            ("body", '{{ material(finish, colour, "body") | tojson }}'),
            ("cap", '{{ material("soft-touch", colour_of(row.trim_colour) if row.get("trim_colour") else colour_of("#2b2b2d"), "cap") | tojson }}'),
        ],
        "nodes": [("body", "body", None), ("cap", "cap", None)],
    },
    "mug": {
        "title": "Tallow & Tide ceramic mug, 350 ml",
        "parts": mug_parts,
        "materials": [
            ("glaze", '{{ material(finish, colour, "glaze") | tojson }}'),
        ],
        "nodes": [("body", "glaze", None), ("handle", "glaze", None)],
    },
    "speaker": {
        "title": "Tallow & Tide pocket speaker",
        "parts": speaker_parts,
        "materials": [
            ("shell", '{{ material(finish, colour, "shell") | tojson }}'),
            ("grille", '{{ material("fabric", colour_of(row.trim_colour) if row.get("trim_colour") else colour_of("lab(32, 0, -2)"), "grille") | tojson }}'),
            ("rubber", '{{ material("rubber", colour_of("#1c1c1c"), "rubber") | tojson }}'),
            ("grille-charcoal", '{{ material("fabric", colour_of("lab(25, 0, 0)"), "grille-charcoal") | tojson }}'),
            ("grille-sand", '{{ material("fabric", colour_of("lab(74, 3, 14)"), "grille-sand") | tojson }}'),
        ],
        "nodes": [("body", "shell", None), ("grille", "grille", None), ("button", "rubber", None)]
        + [("foot", "rubber", pos) for pos in FOOT_POSITIONS],
        # KHR_materials_variants carried by the model: grille fabric alternatives
        "variants": {"grille": [("grille-charcoal", "charcoal-grille"), ("grille-sand", "sand-grille")]},
    },
}


def build_product(name: str):
    """``(gltf_json_dict, bin_bytes, template_text, triangle_count)`` of a demo product."""
    spec = PRODUCTS[name]
    parts = spec["parts"]()
    blob, views, accessors, prims = _pack(parts)
    slots = [m[0] for m in spec["materials"]]
    variants = spec.get("variants", {})
    variant_names = sorted({v for lst in variants.values() for _, v in lst})
    meshes, mesh_of = [], {}
    for part in parts:
        material_slot = next(mat for p, mat, _ in spec["nodes"] if p == part)
        prim = dict(prims[part], material=slots.index(material_slot))
        if part in variants:
            prim["extensions"] = {"KHR_materials_variants": {"mappings": [
                {"material": slots.index(mat), "variants": [variant_names.index(v)]} for mat, v in variants[part]
            ]}}
        mesh_of[part] = len(meshes)
        meshes.append({"name": part, "primitives": [prim]})
    nodes = []
    for k, (part, _mat, pos) in enumerate(spec["nodes"]):
        node = {"name": part if pos is None else f"{part}-{k}", "mesh": mesh_of[part]}
        if pos is not None:
            node["translation"] = [float(x) for x in pos]
        nodes.append(node)
    root = {"name": name, "children": list(range(1, len(nodes) + 1))}
    nodes = [root] + nodes
    n_tris = sum(parts[p].n_triangles for p, _m, _pos in spec["nodes"])
    base = {
        "asset": {"version": "2.0", "generator": "variantshot demo_models", "copyright": "variantshot demo (invented brand)"},
        "scene": 0,
        "scenes": [{"name": name, "nodes": [0]}],
        "nodes": nodes,
        "meshes": meshes,
        "accessors": accessors,
        "bufferViews": views,
        "buffers": [{"uri": f"{name}.bin", "byteLength": len(blob)}],
    }
    if variant_names:
        base["extensions"] = {"KHR_materials_variants": {"variants": [{"name": v} for v in variant_names]}}
    model = dict(base)
    model["materials"] = [{"name": s, "pbrMetallicRoughness": {"baseColorFactor": [0.5, 0.5, 0.5, 1.0],
                                                             "metallicFactor": 0.0, "roughnessFactor": 0.5}}
                          for s in slots]
    if variant_names:
        model["extensionsUsed"] = ["KHR_materials_variants"]
    template = _template_text(name, spec, base)
    return model, blob, template, n_tris


def _template_text(name: str, spec: dict, base: dict) -> str:
    lines = [
        "{#- " + spec["title"] + ".",
        f"    Written by variantshot.catalog.demo_models; geometry in {name}.bin next to the model.",
        "    Materials come from the finish library: `finish` and `colour` are the catalog row's;",
        "    row.trim_colour (an optional extra catalog column) colours the secondary part.",
        "    extensionsUsed is filled in by the expander. -#}",
        "{",
    ]
    keys = list(base)
    for k in keys:
        lines.append(f"  {json.dumps(k)}: {json.dumps(base[k], separators=(',', ':'))},")
    lines.append('  "materials": [')
    mats = spec["materials"]
    for i, (_slot, expr) in enumerate(mats):
        lines.append("    " + expr + ("," if i < len(mats) - 1 else ""))
    lines.append("  ]")
    lines.append("}")
    return "\n".join(lines) + "\n"


def write_demo(repo) -> dict[str, int]:
    """Write every demo model and template under ``repo``; returns ``{product: triangles}``."""
    from .._atomic import atomic_write

    repo = Path(repo)
    counts = {}
    for name in PRODUCTS:
        model, blob, template, n_tris = build_product(name)
        atomic_write(repo / "catalog" / "models" / f"{name}.bin", blob)
        atomic_write(repo / "catalog" / "models" / f"{name}.gltf", json.dumps(model, indent=1) + "\n")
        atomic_write(repo / "templates" / f"{name}.gltf.j2", template)
        counts[name] = n_tris
    return counts


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    repo = Path(argv[0]) if argv else Path(__file__).resolve().parents[2]
    counts = write_demo(repo)
    sys.stdout.write(json.dumps({"triangles": counts}) + "\n")  # a script entry point, not library code
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
