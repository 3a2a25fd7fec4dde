"""Studio rigs: named, data-defined lighting set-ups placed and scaled from a product's bounds.

A rig is a TOML file (``templates/rigs/<name>.toml``) describing

* **soft boxes**: emissive rectangles (glTF emissive materials with
  ``KHR_materials_emissive_strength``) placed on a sphere around the product by azimuth,
  elevation and distance, each turned to face the product;
* an **environment**: a uniform radiance (linear sRGB primaries) around the whole set;
* ``white_boost_ev``: how many stops above paper white the sweep is lit for the ``white``
  background (see :mod:`variantshot.imaging.background`);
* a **backdrop**: a seamless sweep, a floor that curves up into a wall behind the product
  (a quarter-circle cove between the two, so the floor's horizon never shows).

Every length in a rig file is in units of the product's *bounding radius* ``R`` (half the
diagonal of its axis-aligned bounding box), so every product of a catalog sees the same
solid angles and the same lighting whatever its size.

Rig frame
---------
The rig has its own frame: +Y up, the camera side is +Z and the backdrop wall is behind the
product at −Z.  Azimuth is measured from +Z towards +X (a soft box at azimuth −45° sits
front-left as seen from the camera), elevation upwards from the floor plane.  When a rig is
built for a shot the frame is turned about the vertical axis through the product so that +Z
points towards the camera (``yaw = camera azimuth + rotation``): the product turns on a virtual
turntable under a fixed rig, so every angle of every product is lit the same way relative to
the lens.  ``rotation_deg`` adds a fixed turn of the rig.

Key-to-fill ratio
-----------------
``key_to_fill`` is *key illuminance / fill illuminance* at the product's centre, each measured on
a surface facing that soft box, without occlusion (a light meter pointed at each light; the
"key : fill" convention, not "(key + fill) : fill").  The key box's radiance is set so that its
illuminance at the centre is ``key_illuminance`` (π by default, the illuminance of a unit-radiance
hemisphere); the fill's radiance follows from the ratio; other boxes give their illuminance as
``level`` × the key's.  Illuminance of a rectangle of radiance ``L`` is computed in closed form
(Lambert's polygon formula, :func:`polygon_irradiance`).

References
----------
J. H. Lambert (1760), *Photometria*: irradiance from a uniform polygonal source
E = L/2 Σ θ_i (n · u_i).  Also J. Arvo (1995), "Applications of irradiance tensors to the
simulation of non-Lambertian phenomena", SIGGRAPH, eq. for the polygon's irradiance.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

import numpy as np

from ..errors import InputError
from .scene import Camera, Material, Scene, make_scene

__all__ = [
    "SoftBox",
    "Backdrop",
    "RigSpec",
    "Rig",
    "RIG_DIRS",
    "DEFAULT_RIG",
    "rig_names",
    "load_rig",
    "parse_rig",
    "build_rig",
    "camera_azimuth_rad",
    "bounding_radius",
    "polygon_irradiance",
    "emitted_power",
    "sweep_profile",
    "card_irradiance",
]

DEFAULT_RIG = "soft-even"
ROLES = ("key", "fill", "rim", "top", "accent")


def _find_rig_dirs() -> list[Path]:
    """Where named rigs live: the repo's ``templates/rigs`` next to the package, or the copy a
    wheel installs (``<prefix>/share/variantshot/templates/rigs``)."""
    import sys

    here = Path(__file__).resolve().parent.parent  # variantshot/
    candidates = [here.parent / "templates" / "rigs", Path(sys.prefix) / "share" / "variantshot" / "templates" / "rigs"]
    return [c for c in candidates if c.is_dir()]


RIG_DIRS = _find_rig_dirs()


@dataclass(frozen=True)
class SoftBox:
    """One rectangular soft box of a rig (lengths in product bounding radii).

    Parameters
    ----------
    name : str
        Unique within the rig.
    role : str
        ``key``, ``fill`` (its level follows from the rig's key-to-fill ratio), or ``rim``,
        ``top``, ``accent`` (their level is ``level`` × the key's illuminance).
    azimuth_deg, elevation_deg : float
        Direction from the product's centre to the box centre, in the rig frame.
    distance : float
        Distance from the product's centre to the box centre.
    width, height : float
        Size of the emitting face; ``width`` runs horizontally.
    level : float
        For non-key, non-fill boxes: illuminance at the centre relative to the key.
    colour_linear : (3,) float
        Emission colour, linear sRGB primaries (normalised so its luminance is 1).
    """

    name: str
    role: str
    azimuth_deg: float
    elevation_deg: float
    distance: float
    width: float
    height: float
    level: float = 1.0
    colour_linear: tuple[float, float, float] = (1.0, 1.0, 1.0)


@dataclass(frozen=True)
class Backdrop:
    """The seamless sweep (lengths in product bounding radii, measured from the product's centre
    on the floor).

    ``front`` is how far the floor reaches towards the camera, ``back`` the distance from the
    centre to where the floor starts curving, ``radius`` the cove's radius, ``height`` the
    wall's top above the floor, ``width`` the sweep's full width; ``segments`` the number of
    facets in the cove.  ``colour_linear`` is the sweep's albedo (Lambertian).
    """

    front: float = 12.0
    back: float = 2.5
    radius: float = 3.0
    height: float = 14.0
    width: float = 28.0
    segments: int = 24
    colour_linear: tuple[float, float, float] = (0.8, 0.8, 0.8)
    roughness: float = 1.0


@dataclass(frozen=True)
class RigSpec:
    """A studio rig as data (see the module docstring for the frame and conventions)."""

    name: str
    description: str = ""
    key_to_fill: float = 2.0
    rotation_deg: float = 0.0
    key_illuminance: float = math.pi
    environment_linear: tuple[float, float, float] = (0.05, 0.05, 0.05)
    white_boost_ev: float = 0.75
    boxes: tuple[SoftBox, ...] = ()
    backdrop: Backdrop = field(default_factory=Backdrop)
    source: str = "<memory>"

    def with_settings(self, *, key_to_fill: float | None = None, rotation_deg: float | None = None) -> RigSpec:
        """A copy with the batch's key-to-fill ratio and/or rotation applied."""
        changes = {}
        if key_to_fill is not None:
            if not key_to_fill > 0:
                raise InputError(f"key-to-fill ratio must be > 0, got {key_to_fill}", accepted="a number > 0")
            changes["key_to_fill"] = float(key_to_fill)
        if rotation_deg is not None:
            changes["rotation_deg"] = float(rotation_deg)
        return dataclasses.replace(self, **changes) if changes else self

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d.pop("source", None)
        return d

    def digest(self) -> str:
        """A stable sha256 of the rig's content (for shot keys and the exposure cache)."""
        text = json.dumps(self.to_dict(), sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()


class Rig(NamedTuple):
    """A rig built for one product and one camera.

    Attributes
    ----------
    scene : Scene
        Soft boxes and backdrop, world space (merge it with the product's scene).
    environment_linear : (3,) tuple of float
        Uniform environment radiance, linear sRGB primaries.
    yaw_rad : float
        Rotation of the rig frame about +Y that was applied.
    centre : (3,) float64 ndarray
        The product's bounding-box centre, the point the boxes aim at.
    radius : float
        The product's bounding radius R (the rig's length unit), metres.
    floor_y : float
        Height of the sweep's floor.
    box_radiance : dict of str -> float
        Emitted radiance (luminance of ``emissive_factor × emissive_strength``) per soft box.
    box_corners : dict of str -> (4, 3) float64 ndarray
        World-space corners of each box, counter-clockwise seen from the product.
    floor_material : int
        Index of the sweep's material in ``scene.materials``.
    spec : RigSpec
    """

    scene: Scene
    environment_linear: tuple[float, float, float]
    yaw_rad: float
    centre: np.ndarray
    radius: float
    floor_y: float
    box_radiance: dict
    box_corners: dict
    floor_material: int
    spec: RigSpec


# ----------------------------------------------------------------------------- loading


def rig_names() -> list[str]:
    """Names of the bundled rigs (``templates/rigs/*.toml``)."""
    names = set()
    for d in RIG_DIRS:
        names.update(p.stem for p in d.glob("*.toml"))
    return sorted(names)


def load_rig(name_or_path) -> RigSpec:
    """Load a rig by bundled name (``soft-even``) or from a TOML file path.

    Raises
    ------
    InputError
        The name is unknown (the message lists the bundled names) or the file is invalid.
    """
    if isinstance(name_or_path, RigSpec):
        return name_or_path
    text = str(name_or_path)
    path = Path(text)
    if not (text.endswith(".toml") or path.is_file()):
        for d in RIG_DIRS:
            if (d / f"{text}.toml").is_file():
                path = d / f"{text}.toml"
                break
        else:
            raise InputError(f"unknown studio rig {text!r}", accepted=", ".join(rig_names()) or "a rig .toml file")
    if not path.is_file():
        raise InputError("rig file not found", file=path, accepted="a rig .toml file")
    return _load_rig_file(str(path), path.stat().st_mtime_ns)


_RIG_CACHE: dict = {}


def _load_rig_file(path: str, mtime_ns: int) -> RigSpec:
    key = (path, mtime_ns)
    if key not in _RIG_CACHE:
        raw = Path(path).read_bytes()
        try:
            data = tomllib.loads(raw.decode("utf-8"))
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise InputError(f"not valid TOML: {exc}", file=path) from None
        _RIG_CACHE[key] = parse_rig(data, source=path, default_name=Path(path).stem)
    return _RIG_CACHE[key]


def _num(data, key, where, default=None, positive=False):
    value = data.get(key, default)
    if value is None:
        raise InputError(f"{where}: '{key}' is required", accepted="a number")
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"{where}: '{key}' must be a number, got {value!r}", accepted="a finite number")
    if positive and not value > 0:
        raise InputError(f"{where}: '{key}' must be > 0, got {value!r}", accepted="a number > 0")
    return float(value)


def _rgb(data, key, where, default):
    value = data.get(key, default)
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        value = (value, value, value)
    if (
        not isinstance(value, (list, tuple))
        or len(value) != 3
        or not all(isinstance(v, (int, float)) and not isinstance(v, bool) and v >= 0 for v in value)
    ):
        raise InputError(f"{where}: '{key}' must be 3 numbers >= 0, got {value!r}", accepted="[r, g, b] linear")
    return tuple(float(v) for v in value)


def parse_rig(data: dict, *, source: str = "<memory>", default_name: str = "rig") -> RigSpec:
    """Build a :class:`RigSpec` from parsed TOML, checking every field.

    Errors name the file (``source``) and the soft box and field at fault.
    """
    try:
        where = "rig"
        known = {"name", "description", "key_to_fill", "rotation_deg", "key_illuminance", "environment",
                 "white_boost_ev", "backdrop", "softbox"}
        unknown = set(data) - known
        if unknown:
            raise InputError(f"unknown rig field(s) {sorted(unknown)}", accepted=", ".join(sorted(known)))
        boxes = []
        raw_boxes = data.get("softbox", [])
        if not isinstance(raw_boxes, list) or not raw_boxes:
            raise InputError("a rig needs at least one [[softbox]]", accepted="[[softbox]] tables")
        names = set()
        for i, b in enumerate(raw_boxes):
            w = f"softbox[{i}]"
            name = str(b.get("name", f"box{i}"))
            if name in names:
                raise InputError(f"{w}: duplicate soft box name {name!r}")
            names.add(name)
            role = b.get("role", "accent")
            if role not in ROLES:
                raise InputError(f"{w}: role {role!r} is not a soft box role", accepted=", ".join(ROLES))
            colour = _rgb(b, "colour_linear", w, (1.0, 1.0, 1.0))
            y = 0.2126 * colour[0] + 0.7152 * colour[1] + 0.0722 * colour[2]
            if y <= 0:
                raise InputError(f"{w}: colour_linear must not be black")
            boxes.append(
                SoftBox(
                    name=name,
                    role=role,
                    azimuth_deg=_num(b, "azimuth_deg", w),
                    elevation_deg=_num(b, "elevation_deg", w),
                    distance=_num(b, "distance", w, positive=True),
                    width=_num(b, "width", w, positive=True),
                    height=_num(b, "height", w, positive=True),
                    level=_num(b, "level", w, default=1.0, positive=True),
                    colour_linear=tuple(c / y for c in colour),
                )
            )
        roles = [b.role for b in boxes]
        if roles.count("key") != 1:
            raise InputError(f"a rig needs exactly one key soft box, found {roles.count('key')}", accepted="one role = 'key'")
        for b in boxes:
            if b.distance <= 1.0:
                raise InputError(f"soft box {b.name!r}: distance {b.distance} is inside the product's bounding sphere",
                                 accepted="distance > 1 (bounding radii)")
        bd = data.get("backdrop", {})
        where = "backdrop"
        backdrop = Backdrop(
            front=_num(bd, "front", where, Backdrop.front, positive=True),
            back=_num(bd, "back", where, Backdrop.back, positive=True),
            radius=_num(bd, "radius", where, Backdrop.radius, positive=True),
            height=_num(bd, "height", where, Backdrop.height, positive=True),
            width=_num(bd, "width", where, Backdrop.width, positive=True),
            segments=int(_num(bd, "segments", where, Backdrop.segments, positive=True)),
            colour_linear=_rgb(bd, "colour_linear", where, Backdrop.colour_linear),
            roughness=_num(bd, "roughness", where, Backdrop.roughness),
        )
        if backdrop.back < 1.0:
            raise InputError("backdrop: 'back' must be >= 1 so the product stands clear of the cove", accepted=">= 1")
        if backdrop.height <= backdrop.radius:
            raise InputError("backdrop: 'height' must exceed 'radius'")
        where = "rig"
        return RigSpec(
            name=str(data.get("name", default_name)),
            description=str(data.get("description", "")),
            key_to_fill=_num(data, "key_to_fill", where, 2.0, positive=True),
            rotation_deg=_num(data, "rotation_deg", where, 0.0),
            key_illuminance=_num(data, "key_illuminance", where, math.pi, positive=True),
            environment_linear=_rgb(data, "environment", where, (0.05, 0.05, 0.05)),
            white_boost_ev=_num(data, "white_boost_ev", where, 0.75),
            boxes=tuple(boxes),
            backdrop=backdrop,
            source=source,
        )
    except InputError as exc:
        if exc.file is None:
            raise InputError(exc.message, file=source, accepted=exc.accepted) from None
        raise


# ----------------------------------------------------------------------------- radiometry


def _clip_polygon_to_hemisphere(verts: np.ndarray, n: np.ndarray) -> np.ndarray:
    """Sutherland-Hodgman clip of a polygon (relative to the receiver) to the half-space n·v >= 0."""
    out = []
    k = len(verts)
    for i in range(k):
        a, b = verts[i], verts[(i + 1) % k]
        da, db = float(a @ n), float(b @ n)
        if da >= 0:
            out.append(a)
        if (da >= 0) != (db >= 0):
            t = da / (da - db)
            out.append(a + t * (b - a))
    return np.array(out, dtype=np.float64).reshape(-1, 3)


def polygon_irradiance(corners, radiance: float, point, normal) -> float:
    """Irradiance at ``point`` (surface normal ``normal``) from a planar Lambertian polygon.

    Lambert's formula E = (L / 2) Σ_i θ_i (n · u_i), with θ_i the angle each edge subtends and
    u_i the unit normal of the plane through the point and that edge; the part of the polygon
    below the receiver's horizon is clipped off first.  The polygon's winding does not matter.

    Parameters
    ----------
    corners : (K, 3) float array
        The polygon's vertices in order.
    radiance : float
        Its uniform emitted radiance.
    point, normal : (3,) float arrays
        Receiver position and unit normal.

    Returns
    -------
    float
        Irradiance (radiance units × sr).
    """
    n = np.asarray(normal, np.float64)
    n = n / np.linalg.norm(n)
    v = np.asarray(corners, np.float64) - np.asarray(point, np.float64)
    v = _clip_polygon_to_hemisphere(v, n)
    if len(v) < 3:
        return 0.0
    v = v / np.linalg.norm(v, axis=1, keepdims=True)
    total = 0.0
    for i in range(len(v)):
        a, b = v[i], v[(i + 1) % len(v)]
        c = np.cross(a, b)
        s = np.linalg.norm(c)
        if s < 1e-15:
            continue
        theta = math.atan2(s, float(a @ b))
        total += theta * float(n @ (c / s))
    return abs(0.5 * radiance * total)


def emitted_power(width: float, height: float, radiance: float) -> float:
    """Flux leaving one face of a Lambertian rectangle: Φ = π L A."""
    return math.pi * radiance * width * height


# ----------------------------------------------------------------------------- geometry


def bounding_radius(lo, hi) -> float:
    """Half the diagonal of the bounding box (floored at 1 mm so a flat card still gets a rig)."""
    size = np.asarray(hi, np.float64) - np.asarray(lo, np.float64)
    return max(0.5 * float(np.linalg.norm(size)), 1e-3)


def camera_azimuth_rad(camera: Camera | None, centre) -> float:
    """Azimuth (from +Z towards +X, about +Y) of the camera's position seen from ``centre``;
    0 when there is no camera or it looks straight down."""
    if camera is None:
        return 0.0
    m = np.asarray(camera.world_from_camera, np.float64)
    d = m[:3, 3] - np.asarray(centre, np.float64)
    if math.hypot(d[0], d[2]) < 1e-9 * max(1.0, abs(d[1])):
        # straight above/below: use the camera's up vector's opposite to orient the rig
        up = m[:3, 1]
        d = -up if abs(up[1]) < 0.999 else np.array([0.0, 0.0, 1.0])
        if math.hypot(d[0], d[2]) < 1e-9:
            return 0.0
    return math.atan2(d[0], d[2])


def _yaw_matrix(yaw: float) -> np.ndarray:
    """Rotation about +Y by ``yaw`` (maps the rig's +Z to (sin yaw, 0, cos yaw))."""
    c, s = math.cos(yaw), math.sin(yaw)
    return np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])


def _direction(azimuth_deg: float, elevation_deg: float) -> np.ndarray:
    az, el = math.radians(azimuth_deg), math.radians(elevation_deg)
    return np.array([math.cos(el) * math.sin(az), math.sin(el), math.cos(el) * math.cos(az)])


def sweep_profile(backdrop: Backdrop):
    """The sweep's cross-section in the rig frame, in bounding radii, floor at y = 0.

    Returns
    -------
    yz : (P, 2) float64 ndarray
        (y, z) points from the front edge of the floor, along the floor, round the cove and up
        the wall.
    normal_yz : (P, 2) float64 ndarray
        The analytic unit surface normal at each point (floor +Y, wall +Z, in the cove pointing to
        its axis): tangent-continuous at both joins, which is what makes the sweep seamless.
    """
    b = backdrop
    pts, nrm = [], []
    # floor: front edge to the start of the cove (a few segments so shading stays smooth)
    for z in np.linspace(b.front, -b.back, 6):
        pts.append((0.0, z))
        nrm.append((1.0, 0.0))
    # cove: centre at (y = r, z = -back); angle from straight down (floor) to straight back (wall)
    cy, cz = b.radius, -b.back
    for k in range(1, b.segments + 1):
        phi = 0.5 * math.pi * k / b.segments
        y = cy - b.radius * math.cos(phi)
        z = cz - b.radius * math.sin(phi)
        pts.append((y, z))
        nrm.append((math.cos(phi), math.sin(phi)))
    # wall: from the top of the cove to the top
    for y in np.linspace(b.radius, b.height, 5)[1:]:
        pts.append((y, -b.back - b.radius))
        nrm.append((0.0, 1.0))
    return np.array(pts, np.float64), np.array(nrm, np.float64)


def _sweep_mesh(backdrop: Backdrop, n_across: int = 4):
    """Sweep vertices/normals/triangles in the rig frame (units of R, floor at y = 0)."""
    yz, nyz = sweep_profile(backdrop)
    xs = np.linspace(-0.5 * backdrop.width, 0.5 * backdrop.width, n_across + 1)
    P, X = len(yz), len(xs)
    pos = np.zeros((P, X, 3))
    nor = np.zeros((P, X, 3))
    pos[:, :, 0] = xs[None, :]
    pos[:, :, 1] = yz[:, 0:1]
    pos[:, :, 2] = yz[:, 1:2]
    nor[:, :, 1] = nyz[:, 0:1]
    nor[:, :, 2] = nyz[:, 1:2]
    idx = np.arange(P * X).reshape(P, X)
    tris = []
    for i in range(P - 1):
        for j in range(X - 1):
            a, b, c, d = idx[i, j], idx[i, j + 1], idx[i + 1, j], idx[i + 1, j + 1]
            # profile runs from +Z (front) to -Z (back): (a, b, c) is counter-clockwise seen from +Y
            tris.append((a, b, c))
            tris.append((b, d, c))
    return pos.reshape(-1, 3), nor.reshape(-1, 3), np.array(tris, np.int32)


def _box_corners(centre: np.ndarray, normal: np.ndarray, width: float, height: float) -> np.ndarray:
    """Corners of a rectangle at ``centre`` facing along ``normal`` (its front face), width
    horizontal; counter-clockwise seen from the side the normal points to."""
    up = np.array([0.0, 1.0, 0.0])
    right = np.cross(up, normal)
    if np.linalg.norm(right) < 1e-6:  # facing straight up or down
        right = np.array([1.0, 0.0, 0.0])
    right /= np.linalg.norm(right)
    top = np.cross(normal, right)
    hw, hh = 0.5 * width, 0.5 * height
    # right-handed (right, top, normal): CCW seen from +normal is -r-t, +r-t, +r+t, -r+t
    return np.array(
        [centre - hw * right - hh * top, centre + hw * right - hh * top, centre + hw * right + hh * top, centre - hw * right + hh * top]
    )


def _quad_blocks(corners: np.ndarray, eye: np.ndarray, targets: np.ndarray) -> bool:
    """Whether any segment eye -> target crosses the rectangle ``corners`` (4, 3)."""
    o = corners[0]
    e1, e2 = corners[1] - o, corners[3] - o
    nrm = np.cross(e1, e2)
    for t in targets:
        d = t - eye
        denom = float(d @ nrm)
        if abs(denom) < 1e-15:
            continue
        s = float((o - eye) @ nrm) / denom
        if not 0.0 < s < 1.0:
            continue
        q = eye + s * d - o
        u, v = float(q @ e1) / float(e1 @ e1), float(q @ e2) / float(e2 @ e2)
        if 0.0 <= u <= 1.0 and 0.0 <= v <= 1.0:
            return True
    return False


def build_rig(
    spec: RigSpec | str,
    bounds,
    *,
    camera: Camera | None = None,
    key_to_fill: float | None = None,
    rotation_deg: float | None = None,
) -> Rig:
    """Place and scale a rig around a product.

    Parameters
    ----------
    spec : RigSpec or str
        The rig (or a bundled rig's name / a rig file).
    bounds : ((3,), (3,)) float arrays
        The product's world-space bounding box ``(lo, hi)`` (``Scene.bounds()``).
    camera : Camera, optional
        The shot's camera: the rig turns so that its +Z faces it, and a soft box other than
        the key that would stand between the lens and the product (an overhead box seen from a
        top view) is left out of that shot; a key that would is swung round the product, away
        from the lens, until the view is clear.
    key_to_fill, rotation_deg : float, optional
        Override the rig file's ratio and rotation (batch settings).

    Returns
    -------
    Rig
    """
    spec = load_rig(spec).with_settings(key_to_fill=key_to_fill, rotation_deg=rotation_deg)
    lo, hi = (np.asarray(b, np.float64) for b in bounds)
    centre = 0.5 * (lo + hi)
    R = bounding_radius(lo, hi)
    floor_y = float(lo[1]) - 1e-3 * R  # a hair below the product: no coplanar faces
    yaw = camera_azimuth_rad(camera, centre) + math.radians(spec.rotation_deg)
    rot = _yaw_matrix(yaw)

    positions, normals, triangles, tri_material, materials = [], [], [], [], []
    box_radiance, box_corners = {}, {}
    n_vert = 0

    # Radiance per box from the illuminance it must give at the centre.
    key = next(b for b in spec.boxes if b.role == "key")
    unit = {}
    placed = {}

    def place(b, azimuth_deg):
        # The box's corners at this azimuth, and the illuminance at the centre per unit radiance.
        d = rot @ _direction(azimuth_deg, b.elevation_deg)
        corners = _box_corners(centre + b.distance * R * d, -d, b.width * R, b.height * R)
        return corners, polygon_irradiance(corners, 1.0, centre, d)

    for b in spec.boxes:
        placed[b.name], unit[b.name] = place(b, b.azimuth_deg)
    eye = None if camera is None else np.asarray(camera.world_from_camera, np.float64)[:3, 3]
    blocked = set()
    if eye is not None:
        corners8 = np.array([[x, y, z] for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])])
        targets = np.vstack([corners8, centre[None]])
        for b in spec.boxes:
            if not _quad_blocks(placed[b.name], eye, targets):
                continue
            if b.role != "key":
                blocked.add(b.name)
                continue
            # The key cannot be left out: swing it round the product, away from the lens, until
            # the view is clear (a high camera looks straight through a high key's back).
            swing = -1.0 if b.azimuth_deg <= 0.0 else 1.0
            for step_deg in range(5, 181, 5):
                corners, irradiance = place(b, b.azimuth_deg + swing * step_deg)
                if not _quad_blocks(corners, eye, targets):
                    placed[b.name], unit[b.name] = corners, irradiance
                    break
    for b in spec.boxes:
        if b.name in blocked:
            continue  # it would stand between the lens and the product (a top view, say)
        if b.role == "key":
            target = spec.key_illuminance
        elif b.role == "fill":
            target = spec.key_illuminance / spec.key_to_fill
        else:
            target = spec.key_illuminance * b.level
        radiance = target / unit[b.name]
        box_radiance[b.name] = radiance
        box_corners[b.name] = placed[b.name]
        corners = placed[b.name]
        positions.append(corners)
        face_n = np.cross(corners[1] - corners[0], corners[2] - corners[0])
        face_n /= np.linalg.norm(face_n)
        normals.append(np.repeat(face_n[None], 4, axis=0))
        triangles.append(np.array([[0, 1, 2], [0, 2, 3]]) + n_vert)
        tri_material += [len(materials)] * 2
        n_vert += 4
        materials.append(
            Material(
                name=f"rig:{spec.name}:{b.name}",
                base_colour_factor=(0.0, 0.0, 0.0, 1.0),
                metallic_factor=0.0,
                roughness_factor=1.0,
                emissive_factor=tuple(float(c) for c in b.colour_linear),
                emissive_strength=float(radiance),
                extensions={"KHR_materials_emissive_strength": {"emissiveStrength": float(radiance)}},
            )
        )
    del key

    sp, sn, st = _sweep_mesh(spec.backdrop)
    sp = (rot @ (sp * R).T).T + np.array([centre[0], floor_y, centre[2]])
    sn = (rot @ sn.T).T
    floor_material = len(materials)
    positions.append(sp)
    normals.append(sn)
    triangles.append(st + n_vert)
    tri_material += [floor_material] * len(st)
    bd = spec.backdrop
    materials.append(
        Material(
            name=f"rig:{spec.name}:sweep",
            base_colour_factor=(*bd.colour_linear, 1.0),
            metallic_factor=0.0,
            roughness_factor=bd.roughness,
            double_sided=True,
        )
    )
    scene = make_scene(
        np.concatenate(positions),
        np.concatenate(triangles),
        normals=np.concatenate(normals),
        tri_material=np.array(tri_material, np.int32),
        materials=materials,
        source=f"rig:{spec.name}",
    )
    return Rig(
        scene=scene,
        environment_linear=spec.environment_linear,
        yaw_rad=float(yaw),
        centre=centre,
        radius=float(R),
        floor_y=floor_y,
        box_radiance=box_radiance,
        box_corners=box_corners,
        floor_material=floor_material,
        spec=spec,
    )


def card_irradiance(rig: Rig, normal) -> float:
    """Analytic irradiance on a small card at the product's centre facing ``normal``: the sum of
    every soft box, unoccluded, by Lambert's formula (environment and sweep bounce light are not
    included: :func:`variantshot.batch.quality.calibrate_exposure` measures those by rendering)."""
    n = np.asarray(normal, np.float64)
    n = n / np.linalg.norm(n)
    total = 0.0
    for name, corners in rig.box_corners.items():
        total += polygon_irradiance(corners, rig.box_radiance[name], rig.centre, n)
    return total


# ----------------------------------------------------------------------------- shadow catcher


def _occluder_arrays(scene: Scene | None):
    """The kernel's mesh, material and texture arrays of an occluder, ``walk`` (1 when a shadow
    ray must walk its hits: a transmissive or alpha material) and the step past each hit."""
    if scene is None or scene.n_triangles == 0:
        z = np.zeros
        return ((z((1, 3), np.float32), z((1, 3), np.float32), z((1, 2, 2), np.float32), z((1, 4), np.float32),
                 z((1, 3), np.int32), z(1, np.int32), z((1, 64), np.float32), z((1, 4), np.float32),
                 z((1, 8), np.int32)), 0, 0.0)
    from ..transport.integrator import ray_epsilon
    from ..transport.materials import pack_materials

    table, atlas = pack_materials(scene)
    walk = int(bool(np.any((table[:, 48] > 0.0) | (table[:, 10] != 0))))
    c = np.ascontiguousarray
    mesh = (c(scene.positions, dtype=np.float32), c(scene.normals, dtype=np.float32), c(scene.uvs, dtype=np.float32),
            c(scene.colours, dtype=np.float32), c(scene.triangles, dtype=np.int32),
            c(scene.tri_material, dtype=np.int32), table, c(atlas.pixels, dtype=np.float32),
            c(atlas.table, dtype=np.int32))
    return mesh, walk, float(ray_epsilon(scene))


def direct_light_ratio(
    rig: Rig,
    points,
    normals,
    occluder_bvh,
    *,
    box_samples: int = 4,
    env_samples: int = 4,
    seed: int = 0,
    eps: float | None = None,
    valid=None,
    spread: bool = False,
    occluder: Scene | None = None,
) -> np.ndarray:
    """How much of the rig's direct light reaches each point with an occluder present.

    ``ratio = E_with / E_without``: the irradiance the point receives from the soft boxes and the
    environment when the occluder (the product's BVH) is in the way, over what it receives
    without it (the light its transmissive surfaces let through counts, see ``occluder``).
    Soft boxes are sampled on a ``box_samples`` x ``box_samples`` stratified grid
    (per-point jittered, each sample weighted by its point-to-point form factor term
    L cos θ_x cos θ_y dA / d²); the environment by ``env_samples``² stratified cosine-weighted
    directions of weight π L_env / M.  The sweep itself is not tested as an occluder (it is
    the receiver; it blocks the same light with and without the product).

    The per-point work is one numba ``prange`` kernel (:func:`.rig_kernels.light_ratio`); its
    random numbers are hashes of (point index, stratum, seed), so the same seed gives the same
    bits on any thread count.

    Parameters
    ----------
    rig : Rig
    points, normals : (N, 3) or (H, W, 3) float arrays
        Receiver positions and unit normals (world space), a list or a grid (a camera's view
        of the sweep, one node per grid step).
    occluder_bvh : BVH
        ``build_bvh`` of the product.
    box_samples, env_samples : int
        Strata per side.
    seed : int
        Jitter seed (deterministic).
    eps : float, optional
        Offset of the shadow rays' origin along the normal (default 1e-4 R).
    valid : (H, W) bool array, optional
        For a grid: which nodes are receivers (others get 1 and are not interpolated from).
    occluder : Scene, optional
        The scene ``occluder_bvh`` was built from.  With it, shadow rays pass through
        transmissive (KHR_materials_transmission), alpha-blended and masked-away surfaces with
        the share each crossing transmits (:func:`.rig_kernels.crossing_transmittance`:
        coverage, (1 − metallic) × transmission × (1 − Fresnel) × luminance of the base colour,
        Beer–Lambert inside volumes); the rays go straight on (refraction offsets and caustics
        are left out of the shadow map).  Without it every triangle is opaque.
    spread : bool
        For a grid: spread each node's samples over its cell (the surface interpolated
        bilinearly between neighbouring nodes), a one-cell box prefilter, so a sparse grid
        does not alias hard shadow edges.

    Returns
    -------
    (N,) or (H, W) float64 ndarray in [0, 1]; exactly 1 where nothing is occluded.
    """
    from . import rig_kernels

    p = np.asarray(points, np.float64)
    grid = p.ndim == 3
    if not grid:
        p = p.reshape(1, -1, 3)
    n = np.asarray(normals, np.float64).reshape(p.shape)
    n = np.ascontiguousarray(n / np.maximum(np.linalg.norm(n, axis=-1, keepdims=True), 1e-30))
    p = np.ascontiguousarray(p)
    if p.shape[0] * p.shape[1] == 0:
        return np.ones(p.shape[:2] if grid else 0)
    if valid is None:
        valid = np.ones(p.shape[:2], np.uint8)
    valid = np.ascontiguousarray(np.asarray(valid).reshape(p.shape[:2]), dtype=np.uint8)
    eps = 1e-4 * rig.radius if eps is None else eps
    names = list(rig.box_corners)
    corners = np.ascontiguousarray(np.array([rig.box_corners[k] for k in names], np.float64).reshape(-1, 4, 3))
    radiance = np.array([rig.box_radiance[k] for k in names], np.float64)
    env = rig.environment_linear
    env_l = 0.2126 * env[0] + 0.7152 * env[1] + 0.0722 * env[2]
    out = np.empty(p.shape[:2], np.float64)
    mesh, walk, step_eps = _occluder_arrays(occluder)
    b = occluder_bvh
    rig_kernels.light_ratio(p, n, valid, 1 if (grid and spread) else 0, corners, radiance, int(box_samples),
                            float(env_l), int(env_samples), float(eps), int(seed),
                            b.nodes_f, b.nodes_i, b.tris_f, b.tri_ids, *mesh, walk, step_eps, out)
    return out if grid else out.reshape(-1)
