"""Camera angles: named viewpoint presets and auto-framing of a product in a square frame.

Presets
-------
glTF's conventions apply: +Y up, metres, and the product's front faces +Z.  A preset is an
azimuth (degrees about +Y, 0 = in front of the product on +Z, positive towards +X) and an
elevation (degrees above the horizontal through the product's centre) of the direction from the
product to the camera.  ``left`` puts the camera at -X, the viewer's left of the ``front`` view.

================== ======= =========
name               azimuth elevation
================== ======= =========
front                   0        10
back                  180        10
left                  -90        10
right                  90        10
three-quarter-left    -45        20
three-quarter-right    45        20
high-front              0        45
low-hero              -30         2
top                     0        90  (image up is -Z: the product's front at the bottom)
================== ======= =========

Camera nodes a template already has are extra angles named after the node (see
:mod:`.expand`); they are used as written, not re-framed.

Auto-framing
------------
For a preset the camera looks along a fixed direction; :func:`frame_angle` then chooses where it
stands.  It projects the product's *vertices* (not only their bounding box, which would leave
round products small) through a pinhole camera of vertical field of view ``yfov_rad`` and
aspect ratio ``aspect_ratio`` and moves the camera until

* the projected silhouette's bounding rectangle is centred in the frame, and
* its larger extent, relative to the frame side in that direction, equals ``fill_frac``
  (0.85 by default: the product spans 85 % of the longer side of a 1:1 frame, common practice
  for marketplace main images, no source).

It iterates: measure the projected rectangle (centre ``cx, cy`` and half-extent ``s`` in
normalised device coordinates, frame = [-1, 1]), slide the camera sideways by ``c * w * tan``
(``w`` the depth of the product's centre) and along its axis so that ``w`` becomes
``w * s / fill_frac``, until both residuals are below 1e-9 (a few dozen steps at most; perspective
makes it a fixed point, not a closed form).  The default field of view is 0.35 rad (about 20°,
a moderately long lens that keeps perspective distortion low, common practice, no source).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

DEFAULT_FILL_FRAC = 0.85
DEFAULT_YFOV_RAD = 0.35


@dataclass(frozen=True)
class AnglePreset:
    """A named viewpoint: direction from the product to the camera."""

    name: str
    azimuth_deg: float
    elevation_deg: float

    def direction(self) -> np.ndarray:
        """Unit vector from the product's centre towards the camera, ``(3,) float64``."""
        az = math.radians(self.azimuth_deg)
        el = math.radians(self.elevation_deg)
        return np.array([math.sin(az) * math.cos(el), math.sin(el), math.cos(az) * math.cos(el)])


ANGLE_PRESETS: dict[str, AnglePreset] = {
    p.name: p
    for p in (
        AnglePreset("front", 0.0, 10.0),
        AnglePreset("back", 180.0, 10.0),
        AnglePreset("left", -90.0, 10.0),
        AnglePreset("right", 90.0, 10.0),
        AnglePreset("three-quarter-left", -45.0, 20.0),
        AnglePreset("three-quarter-right", 45.0, 20.0),
        AnglePreset("high-front", 0.0, 45.0),
        AnglePreset("low-hero", -30.0, 2.0),
        AnglePreset("top", 0.0, 90.0),
    )
}


def look_rotation(direction_to_camera, up=(0.0, 1.0, 0.0)) -> np.ndarray:
    """Rotation ``(3, 3) float64`` whose columns are the camera's x (right), y (up), z axes.

    The camera looks down its local -Z, so z is the direction from the target to the camera.
    When ``direction_to_camera`` is parallel to ``up`` (a top view) the image's up becomes -Z.
    """
    z = np.asarray(direction_to_camera, dtype=np.float64)
    z = z / np.linalg.norm(z)
    up = np.asarray(up, dtype=np.float64)
    if abs(float(np.dot(z, up))) > 1.0 - 1e-9:
        up = np.array([0.0, 0.0, -1.0]) if z[1] > 0 else np.array([0.0, 0.0, 1.0])
    x = np.cross(up, z)
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    return np.stack([x, y, z], axis=1)


def project_ndc(positions, world_from_camera, yfov_rad: float, aspect_ratio: float = 1.0) -> np.ndarray:
    """Project world points through a glTF perspective camera.

    Parameters
    ----------
    positions : (V, 3) array_like
        World-space points.
    world_from_camera : (4, 4) array_like
    yfov_rad, aspect_ratio : float

    Returns
    -------
    (V, 3) float64 ndarray
        Normalised device x, y (the frame is [-1, 1] on both axes) and the depth in front of the
        camera (positive = visible side).
    """
    p = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    m = np.asarray(world_from_camera, dtype=np.float64)
    rot, eye = m[:3, :3], m[:3, 3]
    q = (p - eye) @ rot  # camera-space coordinates: rot is orthonormal, so R^T (p - eye)
    depth = -q[:, 2]
    t = math.tan(yfov_rad / 2.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = q[:, 0] / (depth * t * aspect_ratio)
        y = q[:, 1] / (depth * t)
    return np.stack([x, y, depth], axis=1)


def fit_camera(
    positions,
    direction_to_camera,
    *,
    fill_frac: float = DEFAULT_FILL_FRAC,
    yfov_rad: float = DEFAULT_YFOV_RAD,
    aspect_ratio: float = 1.0,
    up=(0.0, 1.0, 0.0),
) -> np.ndarray:
    """Place a camera looking along ``-direction_to_camera`` so the points fill ``fill_frac``.

    See the module docstring for the method.  Returns ``world_from_camera`` ``(4, 4) float64``.
    """
    p = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    if p.shape[0] == 0 or not np.all(np.isfinite(p)):
        raise ValueError("framing needs at least one finite vertex position")
    if not (0.0 < fill_frac < 1.0):
        raise ValueError(f"fill_frac must be in (0, 1), got {fill_frac}")
    if not (0.0 < yfov_rad < math.pi):
        raise ValueError(f"yfov_rad must be in (0, pi), got {yfov_rad}")
    rot = look_rotation(direction_to_camera, up)
    lo, hi = p.min(axis=0), p.max(axis=0)
    centre = 0.5 * (lo + hi)
    radius = max(0.5 * float(np.linalg.norm(hi - lo)), 1e-6)
    t = math.tan(yfov_rad / 2.0)
    t_min = t * min(1.0, aspect_ratio)
    # start outside the bounding sphere, at the distance that would frame the sphere
    dist = radius / math.sin(math.atan(t_min * fill_frac)) + radius
    eye = centre + rot[:, 2] * dist
    m = np.eye(4)
    m[:3, :3] = rot
    for _ in range(200):
        m[:3, 3] = eye
        ndc = project_ndc(p, m, yfov_rad, aspect_ratio)
        if np.any(ndc[:, 2] <= 1e-9 * radius):  # a point behind the camera: step back
            eye = eye + rot[:, 2] * radius
            continue
        x0, x1 = ndc[:, 0].min(), ndc[:, 0].max()
        y0, y1 = ndc[:, 1].min(), ndc[:, 1].max()
        cx, cy = 0.5 * (x0 + x1), 0.5 * (y0 + y1)
        s = max(0.5 * (x1 - x0), 0.5 * (y1 - y0))
        if s <= 0:
            raise ValueError("framing needs points with some extent")
        if abs(s - fill_frac) < 1e-9 and abs(cx) < 1e-9 and abs(cy) < 1e-9:
            break
        w = float(np.dot(eye - centre, rot[:, 2]))  # depth of the centre
        eye = eye + rot[:, 0] * (cx * w * t * aspect_ratio) + rot[:, 1] * (cy * w * t)
        eye = eye + rot[:, 2] * (w * (s / fill_frac - 1.0))
    m[:3, 3] = eye
    return m


def frame_angle(
    positions,
    angle_name: str,
    fill_frac: float = DEFAULT_FILL_FRAC,
    yfov_rad: float = DEFAULT_YFOV_RAD,
    aspect_ratio: float = 1.0,
) -> np.ndarray:
    """Camera pose of a named preset, auto-framed on the product's vertices.

    Parameters
    ----------
    positions : (V, 3) array_like, float
        World-space vertex positions of the product (metres).
    angle_name : str
        A key of :data:`ANGLE_PRESETS`.
    fill_frac : float
        Fraction of the frame the silhouette's larger extent spans (default 0.85).
    yfov_rad : float
        Vertical field of view of the perspective camera.
    aspect_ratio : float
        Width / height of the frame (1.0: square).

    Returns
    -------
    world_from_camera : (4, 4) float64 ndarray
        Columns: camera right, up, backward (the camera looks down its local -Z), position.

    Raises
    ------
    KeyError
        For a name that is not a preset.
    """
    preset = ANGLE_PRESETS[angle_name]
    return fit_camera(positions, preset.direction(), fill_frac=fill_frac, yfov_rad=yfov_rad,
                      aspect_ratio=aspect_ratio)


def quaternion_from_rotation(rot) -> list[float]:
    """Unit quaternion ``[x, y, z, w]`` (glTF order) of a rotation matrix ``(3, 3)``."""
    r = np.asarray(rot, dtype=np.float64)
    tr = r[0, 0] + r[1, 1] + r[2, 2]
    if tr > 0:
        s = math.sqrt(tr + 1.0) * 2
        w, x, y, z = 0.25 * s, (r[2, 1] - r[1, 2]) / s, (r[0, 2] - r[2, 0]) / s, (r[1, 0] - r[0, 1]) / s
    elif r[0, 0] > r[1, 1] and r[0, 0] > r[2, 2]:
        s = math.sqrt(1.0 + r[0, 0] - r[1, 1] - r[2, 2]) * 2
        w, x, y, z = (r[2, 1] - r[1, 2]) / s, 0.25 * s, (r[0, 1] + r[1, 0]) / s, (r[0, 2] + r[2, 0]) / s
    elif r[1, 1] > r[2, 2]:
        s = math.sqrt(1.0 + r[1, 1] - r[0, 0] - r[2, 2]) * 2
        w, x, y, z = (r[0, 2] - r[2, 0]) / s, (r[0, 1] + r[1, 0]) / s, 0.25 * s, (r[1, 2] + r[2, 1]) / s
    else:
        s = math.sqrt(1.0 + r[2, 2] - r[0, 0] - r[1, 1]) * 2
        w, x, y, z = (r[1, 0] - r[0, 1]) / s, (r[0, 2] + r[2, 0]) / s, (r[1, 2] + r[2, 1]) / s, 0.25 * s
    q = np.array([x, y, z, w])
    q /= np.linalg.norm(q)
    return [float(v) for v in q]


def camera_gltf(name: str, world_from_camera, positions, yfov_rad: float = DEFAULT_YFOV_RAD,
                aspect_ratio: float = 1.0) -> tuple[dict, dict]:
    """The glTF ``camera`` object and the ``node`` carrying it (both named ``name``).

    ``znear`` is half the nearest vertex depth; ``zfar`` is left out (an infinite projection), so
    a studio backdrop behind the product is never clipped.
    """
    m = np.asarray(world_from_camera, dtype=np.float64)
    depth = project_ndc(positions, m, yfov_rad, aspect_ratio)[:, 2]
    znear = max(float(depth.min()) * 0.5, 1e-4)
    camera = {
        "name": name,
        "type": "perspective",
        "perspective": {"yfov": float(yfov_rad), "aspectRatio": float(aspect_ratio), "znear": znear},
    }
    node = {
        "name": name,
        "translation": [float(v) for v in m[:3, 3]],
        "rotation": quaternion_from_rotation(m[:3, :3]),
    }
    return camera, node
