"""Peer scenes built in both variantshot (as glTF files) and Mitsuba 3 (as scene dicts).

One description (:class:`PeerScene`: triangle meshes, a material per mesh, a pinhole camera,
an optional uniform environment) is written out twice, so the two renderers see the same
triangles, the same vertex normals, the same camera and the same emitted radiance:

* variantshot: a self-contained ``.gltf`` (``data:`` buffers) loaded by
  ``variantshot.geometry.gltf.load_gltf`` and rendered by ``transport.integrator.render``,
  whose ``Film.radiance`` is the linear scene-referred film before exposure and tone mapping.
* Mitsuba 3 (PyPI ``mitsuba``, ``scalar_rgb`` variant): binary PLY meshes referenced from a
  scene dict, rendered by its ``path`` integrator into an ``hdrfilm`` (linear RGB).

How the materials are matched (glTF 2.0 Appendix B on our side, the Mitsuba 3 plugin
documentation on the other):

* ``diffuse``: glTF metallic 0 with ``KHR_materials_specular`` specularFactor 0, so the
  fresnel_mix keeps only the Lambertian base (albedo / pi); Mitsuba ``diffuse`` wrapped in
  ``twosided`` (its plain ``diffuse`` is black from behind, a doubleSided glTF surface is not).
* ``emitter``: glTF emissiveFactor x KHR_materials_emissive_strength, black base, single-sided;
  Mitsuba ``area`` emitter (single-sided, same radiance) on a black ``diffuse``.
* ``conductor``: a *white* glTF metal (baseColor 1, metallic 1): its Schlick Fresnel
  F = F0 + (1 - F0)(1 - v.h)^5 is exactly 1 when F0 = 1, and Mitsuba's ``roughconductor``
  with ``material = "none"`` (eta 0, k 1: the perfect reflector) has F = 1 too, so both use the
  same Fresnel.  A coloured F0 would not match: Mitsuba has no Schlick conductor (its
  ``specular_reflectance`` is a constant factor).  GGX with alpha = roughness^2 in both.  The
  masking-shadowing terms differ by design: glTF prescribes the height-correlated Smith G2,
  Mitsuba uses the separable G1(wo) G1(wi); they differ by the product Lambda(wo) Lambda(wi),
  negligible at the roughness used here (0.3, alpha 0.09: Lambda < 0.02 above 17 degrees of
  elevation), not at high roughness.
* ``dielectric``: glTF KHR_materials_transmission 1 + KHR_materials_ior + KHR_materials_volume
  (thicknessFactor > 0: a solid, refracting object, not thin-walled), roughness 0 (variantshot
  clamps alpha at 0.002); Mitsuba ``dielectric`` (perfectly smooth, exact Fresnel).  Both leave
  out / cancel the eta^2 radiance factor along paths that enter and leave the closed object.

The pixel filter is a tent of radius 1 pixel in both (``integrator.FILTER_RADIUS_PX``;
Mitsuba ``tent`` rfilter, default radius 1).  Cameras: glTF perspective ``yfov`` with the
image aspect; Mitsuba ``perspective`` with ``fov_axis = "y"``.
"""

from __future__ import annotations

import base64
import json
import math
import struct
import time
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from transport_scenes import look_at, quad, uv_sphere


@dataclass(frozen=True)
class PeerMaterial:
    """One material, in terms both renderers can express exactly (see the module docstring).

    ``colour`` is the diffuse albedo (linear sRGB) or, for an emitter, the emitted radiance.
    """

    name: str
    kind: str  # "diffuse" | "emitter" | "conductor" | "dielectric"
    colour: tuple[float, float, float] = (0.0, 0.0, 0.0)
    roughness: float = 0.0
    ior: float = 1.5


@dataclass(frozen=True)
class PeerMesh:
    """Triangles (T, 3) int32 over positions / normals (V, 3) float32, with one material."""

    material: int
    positions: np.ndarray
    triangles: np.ndarray
    normals: np.ndarray


@dataclass(frozen=True)
class PeerScene:
    name: str
    materials: tuple[PeerMaterial, ...]
    meshes: tuple[PeerMesh, ...]
    eye: tuple[float, float, float]
    target: tuple[float, float, float]
    yfov_rad: float
    width: int
    height: int
    up: tuple[float, float, float] = (0.0, 1.0, 0.0)
    env_radiance: tuple[float, float, float] | None = None
    notes: dict = field(default_factory=dict)


# --------------------------------------------------------------------------------------------
# geometry


def _flat(pos, tris):
    """Unshared vertices per quad -> flat normals (from the winding; front = counter-clockwise)."""
    pos = np.asarray(pos, np.float64)
    fn = np.cross(pos[tris[0, 1]] - pos[tris[0, 0]], pos[tris[0, 2]] - pos[tris[0, 0]])
    fn /= np.linalg.norm(fn)
    return pos, np.asarray(tris, np.int32), np.tile(fn, (len(pos), 1))


def _quad_facing(centre, u_half, v_half, normal):
    """Quad centre +- u +- v wound so that its front face looks along ``normal``."""
    p, t = quad(centre, u_half, v_half)
    if np.dot(np.cross(u_half, v_half), normal) < 0:
        t = t[:, ::-1].copy()
    return _flat(p, t)


def _mesh(material, parts):
    """Join (positions, triangles, normals) parts into one PeerMesh."""
    pos, tris, nrm, off = [], [], [], 0
    for p, t, n in parts:
        pos.append(np.asarray(p, np.float64))
        tris.append(np.asarray(t, np.int64) + off)
        nrm.append(np.asarray(n, np.float64))
        off += len(p)
    return PeerMesh(material, np.concatenate(pos).astype(np.float32), np.concatenate(tris).astype(np.int32),
                    np.concatenate(nrm).astype(np.float32))


def _box(centre, half, yaw_rad):
    """Closed box turned by ``yaw_rad`` about +Y, outward flat-shaded faces."""
    c, s = math.cos(yaw_rad), math.sin(yaw_rad)
    ex = np.array([c, 0.0, -s]) * half[0]
    ey = np.array([0.0, 1.0, 0.0]) * half[1]
    ez = np.array([s, 0.0, c]) * half[2]
    centre = np.asarray(centre, float)
    faces = []
    for axis, a, b in ((ex, ey, ez), (ey, ez, ex), (ez, ex, ey)):
        for sign in (1.0, -1.0):
            n = sign * axis / np.linalg.norm(axis)
            faces.append(_quad_facing(centre + sign * axis, a, b, n))
    return faces


def _room_walls(materials):
    """Cornell-like room x in [-1, 1], y in [0, 2], z in [-1, 1], open towards +z.

    Returns the wall meshes; ``materials`` are indices (white, left, right, light).
    """
    white, left, right, light = materials
    walls = [
        _quad_facing((0, 0, 0), (1, 0, 0), (0, 0, 1), (0, 1, 0)),  # floor
        _quad_facing((0, 2, 0), (1, 0, 0), (0, 0, 1), (0, -1, 0)),  # ceiling
        _quad_facing((0, 1, -1), (1, 0, 0), (0, 1, 0), (0, 0, 1)),  # back
    ]
    return [
        _mesh(white, walls),
        _mesh(left, [_quad_facing((-1, 1, 0), (0, 0, 1), (0, 1, 0), (1, 0, 0))]),
        _mesh(right, [_quad_facing((1, 1, 0), (0, 0, 1), (0, 1, 0), (-1, 0, 0))]),
        # the soft box: a 0.6 m square just under the ceiling, emitting downwards only
        _mesh(light, [_quad_facing((0, 1.98, 0), (0.3, 0, 0), (0, 0, 0.3), (0, -1, 0))]),
    ]


# invented colours (linear sRGB albedo) and light radiance
ROOM_WHITE = (0.72, 0.70, 0.64)
ROOM_LEFT = (0.14, 0.42, 0.40)
ROOM_RIGHT = (0.66, 0.40, 0.12)
ROOM_BOX = (0.48, 0.50, 0.58)
ROOM_LIGHT = (14.0, 12.5, 10.0)


def _room_materials():
    return [
        PeerMaterial("walls", "diffuse", ROOM_WHITE),
        PeerMaterial("left wall", "diffuse", ROOM_LEFT),
        PeerMaterial("right wall", "diffuse", ROOM_RIGHT),
        PeerMaterial("soft box", "emitter", ROOM_LIGHT),
    ]


def lambertian_room(width=32, height=32) -> PeerScene:
    """(a) Lambertian room with a rectangular area light and a turned box."""
    mats = _room_materials() + [PeerMaterial("box", "diffuse", ROOM_BOX)]
    meshes = _room_walls((0, 1, 2, 3)) + [_mesh(4, _box((-0.3, 0.6, -0.25), (0.28, 0.6, 0.28), 0.35))]
    return PeerScene("lambertian_room", tuple(mats), tuple(meshes), eye=(0.0, 1.0, 3.4), target=(0.0, 1.0, 0.0),
                     yfov_rad=0.68, width=width, height=height)


def rough_conductor(width=32, height=32, roughness=0.3) -> PeerScene:
    """(b) The room with a white rough-metal sphere (GGX, F0 = 1) and the diffuse box."""
    mats = _room_materials() + [PeerMaterial("box", "diffuse", ROOM_BOX),
                                PeerMaterial("rough metal", "conductor", (1.0, 1.0, 1.0), roughness=roughness)]
    p, t, n = uv_sphere(0.42, (0.38, 0.42, 0.25), 64, 128)
    meshes = _room_walls((0, 1, 2, 3)) + [_mesh(4, _box((-0.4, 0.6, -0.4), (0.25, 0.6, 0.25), 0.35)),
                                          _mesh(5, [(p, t, n)])]
    return PeerScene("rough_conductor", tuple(mats), tuple(meshes), eye=(0.0, 1.0, 3.4), target=(0.0, 1.0, 0.0),
                     yfov_rad=0.68, width=width, height=height, notes={"roughness": roughness})


def smooth_dielectric(width=32, height=32, ior=1.5) -> PeerScene:
    """(c) A smooth glass sphere (IOR 1.5) over a diffuse floor, two coloured panels behind it,
    under a uniform environment."""
    mats = [
        PeerMaterial("floor", "diffuse", (0.62, 0.56, 0.46)),
        PeerMaterial("panel a", "diffuse", (0.70, 0.16, 0.12)),
        PeerMaterial("panel b", "diffuse", (0.10, 0.30, 0.62)),
        PeerMaterial("glass", "dielectric", (1.0, 1.0, 1.0), ior=ior),
    ]
    p, t, n = uv_sphere(0.5, (0.0, 0.55, 0.0), 96, 192)
    meshes = [
        _mesh(0, [_quad_facing((0, 0, 0), (2.5, 0, 0), (0, 0, 2.5), (0, 1, 0))]),
        _mesh(1, [_quad_facing((-0.6, 0.8, -1.0), (0.6, 0, 0), (0, 0.8, 0), (0, 0, 1))]),
        _mesh(2, [_quad_facing((0.6, 0.8, -1.0), (0.6, 0, 0), (0, 0.8, 0), (0, 0, 1))]),
        _mesh(3, [(p, t, n)]),
    ]
    return PeerScene("smooth_dielectric", tuple(mats), tuple(meshes), eye=(0.0, 0.9, 3.0), target=(0.0, 0.55, 0.0),
                     yfov_rad=0.62, width=width, height=height, env_radiance=(0.9, 0.95, 1.0),
                     notes={"ior": ior})


SCENES = {"lambertian_room": lambertian_room, "rough_conductor": rough_conductor,
          "smooth_dielectric": smooth_dielectric}


def scale_diffuse_albedo(scene: PeerScene, factor: float) -> PeerScene:
    """A copy of ``scene`` whose diffuse albedos are multiplied by ``factor`` (broken inputs)."""
    mats = tuple(replace(m, colour=tuple(factor * c for c in m.colour)) if m.kind == "diffuse" else m
                 for m in scene.materials)
    return replace(scene, materials=mats)


# --------------------------------------------------------------------------------------------
# variantshot: glTF


def _gltf_material(m: PeerMaterial) -> dict:
    if m.kind == "diffuse":
        return {"name": m.name, "doubleSided": True,
                "pbrMetallicRoughness": {"baseColorFactor": [*m.colour, 1.0], "metallicFactor": 0.0,
                                         "roughnessFactor": 1.0},
                "extensions": {"KHR_materials_specular": {"specularFactor": 0.0}}}
    if m.kind == "emitter":
        strength = max(m.colour)
        return {"name": m.name, "emissiveFactor": [c / strength for c in m.colour],
                "pbrMetallicRoughness": {"baseColorFactor": [0.0, 0.0, 0.0, 1.0], "metallicFactor": 0.0,
                                         "roughnessFactor": 1.0},
                "extensions": {"KHR_materials_emissive_strength": {"emissiveStrength": strength},
                               "KHR_materials_specular": {"specularFactor": 0.0}}}
    if m.kind == "conductor":
        return {"name": m.name, "doubleSided": True,
                "pbrMetallicRoughness": {"baseColorFactor": [*m.colour, 1.0], "metallicFactor": 1.0,
                                         "roughnessFactor": m.roughness}}
    if m.kind == "dielectric":
        return {"name": m.name,
                "pbrMetallicRoughness": {"baseColorFactor": [*m.colour, 1.0], "metallicFactor": 0.0,
                                         "roughnessFactor": m.roughness},
                "extensions": {"KHR_materials_transmission": {"transmissionFactor": 1.0},
                               "KHR_materials_ior": {"ior": m.ior},
                               "KHR_materials_volume": {"thicknessFactor": 1.0}}}
    raise ValueError(f"material {m.name!r}: kind {m.kind!r} (accepted: diffuse, emitter, conductor, dielectric)")


def gltf_document(scene: PeerScene) -> dict:
    """The scene as a glTF 2.0 JSON document with one embedded ``data:`` buffer."""
    blob = bytearray()
    views, accessors, meshes, nodes = [], [], [], []

    def add(array, target, kind, ctype):
        nonlocal blob
        while len(blob) % 4:
            blob += b"\0"
        data = np.ascontiguousarray(array).tobytes()
        views.append({"buffer": 0, "byteOffset": len(blob), "byteLength": len(data), "target": target})
        blob += data
        acc = {"bufferView": len(views) - 1, "componentType": ctype, "count": int(array.shape[0]) * (
            1 if kind != "SCALAR" else 1), "type": kind}
        if kind == "VEC3":
            acc["min"] = array.min(axis=0).tolist()
            acc["max"] = array.max(axis=0).tolist()
        accessors.append(acc)
        return len(accessors) - 1

    for m in scene.meshes:
        pos = add(m.positions.astype(np.float32), 34962, "VEC3", 5126)
        nrm = add(m.normals.astype(np.float32), 34962, "VEC3", 5126)
        idx = add(m.triangles.astype(np.uint32).reshape(-1), 34963, "SCALAR", 5125)
        meshes.append({"primitives": [{"attributes": {"POSITION": pos, "NORMAL": nrm}, "indices": idx,
                                       "material": m.material}]})
        nodes.append({"mesh": len(meshes) - 1})
    cam_matrix = look_at(scene.eye, scene.target, scene.up)
    nodes.append({"camera": 0, "matrix": cam_matrix.T.reshape(-1).tolist()})  # glTF: column-major
    used = sorted({k for m in scene.materials for k in _gltf_material(m).get("extensions", {})})
    return {
        "asset": {"version": "2.0", "generator": "peer_scenes"},
        "extensionsUsed": used,
        "scene": 0,
        "scenes": [{"nodes": list(range(len(nodes)))}],
        "nodes": nodes,
        "cameras": [{"type": "perspective", "perspective": {
            "yfov": scene.yfov_rad, "aspectRatio": scene.width / scene.height, "znear": 0.01}}],
        "meshes": meshes,
        "materials": [_gltf_material(m) for m in scene.materials],
        "accessors": accessors,
        "bufferViews": views,
        "buffers": [{"byteLength": len(blob),
                     "uri": "data:application/octet-stream;base64," + base64.b64encode(bytes(blob)).decode()}],
    }


def write_gltf(scene: PeerScene, path: Path) -> Path:
    path = Path(path)
    path.write_text(json.dumps(gltf_document(scene)))
    return path


def render_variantshot(scene: PeerScene, folder: Path, spp: int, seed: int = 0, threads: int = 2,
                       max_depth: int = 256):
    """Render with variantshot through its glTF loader.

    Returns
    -------
    radiance : (H, W, 3) float64, linear (``Film.radiance``: before exposure and tone)
    seconds : float
        Loading and rendering (the scene's BVH build included, JIT already warm or not).
    """
    from variantshot.geometry.gltf import load_gltf
    from variantshot.settings import RenderSettings
    from variantshot.transport.environment import make_environment
    from variantshot.transport.integrator import render

    path = write_gltf(scene, Path(folder) / f"{scene.name}.gltf")
    started = time.perf_counter()
    loaded = load_gltf(path)
    env = make_environment(scene.env_radiance) if scene.env_radiance is not None else None
    settings = RenderSettings(width=scene.width, height=scene.height, spp=spp, seed=seed, threads=threads,
                              max_depth=max_depth)
    film = render(loaded, settings, env=env)
    return np.asarray(film.radiance, np.float64)[..., :3], time.perf_counter() - started


# --------------------------------------------------------------------------------------------
# Mitsuba 3


def write_ply(mesh: PeerMesh, path: Path) -> Path:
    """Binary little-endian PLY with positions and vertex normals (Mitsuba's ``ply`` loader)."""
    v = np.concatenate([mesh.positions, mesh.normals], axis=1).astype("<f4")
    header = (
        "ply\nformat binary_little_endian 1.0\n"
        f"element vertex {len(v)}\nproperty float x\nproperty float y\nproperty float z\n"
        "property float nx\nproperty float ny\nproperty float nz\n"
        f"element face {len(mesh.triangles)}\nproperty list uchar int vertex_indices\nend_header\n"
    )
    faces = np.zeros(len(mesh.triangles), dtype=[("n", "u1"), ("i", "<i4", (3,))])
    faces["n"] = 3
    faces["i"] = mesh.triangles
    with open(path, "wb") as f:
        f.write(header.encode("ascii"))
        f.write(v.tobytes())
        f.write(faces.tobytes())
    return Path(path)


def _rgb(c):
    return {"type": "rgb", "value": [float(x) for x in c]}


def _mitsuba_bsdf(m: PeerMaterial) -> dict:
    if m.kind == "diffuse":
        return {"type": "twosided", "bsdf": {"type": "diffuse", "reflectance": _rgb(m.colour)}}
    if m.kind == "emitter":
        return {"type": "diffuse", "reflectance": _rgb((0.0, 0.0, 0.0))}
    if m.kind == "conductor":
        if tuple(m.colour) != (1.0, 1.0, 1.0):
            raise ValueError("a conductor is matched only as a white metal (Schlick F0 = 1 <-> Mitsuba material none)")
        return {"type": "twosided", "bsdf": {"type": "roughconductor", "material": "none", "distribution": "ggx",
                                             "alpha": float(m.roughness) ** 2}}
    if m.kind == "dielectric":
        return {"type": "dielectric", "int_ior": float(m.ior), "ext_ior": 1.0}
    raise ValueError(f"material {m.name!r}: kind {m.kind!r}")


def mitsuba_dict(scene: PeerScene, folder: Path, spp: int, seed: int = 0, sampler: str = "ldsampler",
                 max_depth: int = -1) -> dict:
    """The scene as a Mitsuba 3 scene dict (``mi.load_dict``); meshes written as PLY to ``folder``."""
    import mitsuba as mi

    d = {
        "type": "scene",
        "integrator": {"type": "path", "max_depth": int(max_depth)},
        "sensor": {
            "type": "perspective",
            "fov_axis": "y",
            "fov": math.degrees(scene.yfov_rad),
            "near_clip": 0.01,
            "to_world": mi.ScalarTransform4f().look_at(origin=list(scene.eye), target=list(scene.target),
                                                       up=list(scene.up)),
            "sampler": {"type": sampler, "sample_count": int(spp), "seed": int(seed)},
            "film": {"type": "hdrfilm", "width": scene.width, "height": scene.height, "pixel_format": "rgb",
                     # sample_border: the edge pixels also see the 1-pixel filter skirt outside the
                     # frame, as the importance-sampled tent of variantshot does
                     "rfilter": {"type": "tent"}, "sample_border": True},
        },
    }
    for k, mesh in enumerate(scene.meshes):
        m = scene.materials[mesh.material]
        shape = {"type": "ply", "filename": str(write_ply(mesh, Path(folder) / f"{scene.name}_{k}.ply")),
                 "bsdf": _mitsuba_bsdf(m)}
        if m.kind == "emitter":
            shape["emitter"] = {"type": "area", "radiance": _rgb(m.colour)}
        d[f"mesh_{k}"] = shape
    if scene.env_radiance is not None:
        d["environment"] = {"type": "constant", "radiance": _rgb(scene.env_radiance)}
    return d


def mitsuba_available() -> str | None:
    """None when ``mitsuba`` with the ``scalar_rgb`` variant is importable, else the reason."""
    try:
        import mitsuba as mi

        mi.set_variant("scalar_rgb")
    except Exception as exc:  # ImportError, or a build without the variant
        return f"mitsuba (scalar_rgb) is not available: {exc}"
    return None


def render_mitsuba(scene: PeerScene, folder: Path, spp: int, seed: int = 0, sampler: str = "ldsampler",
                   threads: int = 2, max_depth: int = -1):
    """Render with Mitsuba 3 ``scalar_rgb``; returns ((H, W, 3) float64 linear RGB, seconds)."""
    import drjit as dr
    import mitsuba as mi

    mi.set_variant("scalar_rgb")
    dr.set_thread_count(threads)
    started = time.perf_counter()
    loaded = mi.load_dict(mitsuba_dict(scene, folder, spp, seed, sampler, max_depth))
    image = mi.render(loaded, seed=seed)
    return np.array(image, dtype=np.float64)[..., :3], time.perf_counter() - started


# --------------------------------------------------------------------------------------------
# comparison


def block_medians(image: np.ndarray, block: int = 8) -> np.ndarray:
    """Per-channel medians of the ``block`` x ``block`` tiles, (H / block, W / block, 3)."""
    h, w, c = image.shape
    tiles = image[: h - h % block, : w - w % block].reshape(h // block, block, w // block, block, c)
    return np.median(tiles.transpose(0, 2, 1, 3, 4).reshape(h // block, w // block, block * block, c), axis=2)


def compare(ours: np.ndarray, reference: np.ndarray, block: int = 8) -> dict:
    """Relative differences of ``ours`` against ``reference`` (per channel).

    ``mean_rel``: the largest |mean_ours / mean_ref - 1| over the channels; ``block_rel``: the
    largest |median_ours / median_ref - 1| over the 8 x 8 tiles and channels.
    """
    m_o = ours.reshape(-1, 3).mean(axis=0)
    m_r = reference.reshape(-1, 3).mean(axis=0)
    b_o = block_medians(ours, block)
    b_r = block_medians(reference, block)
    rel = np.abs(b_o / b_r - 1.0)
    worst = np.unravel_index(int(np.argmax(rel)), rel.shape)
    return {"mean_rel": float(np.max(np.abs(m_o / m_r - 1.0))), "block_rel": float(rel.max()),
            "worst_block": [int(worst[0]), int(worst[1]), int(worst[2])],
            "mean_ours": m_o.tolist(), "mean_ref": m_r.tolist()}
