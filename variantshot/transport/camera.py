"""Cameras for the path tracer: choosing a glTF camera, framing a scene, packing for kernels.

glTF 2.0 cameras (§3.10): a perspective camera has ``yfov`` (radians) and an optional
``aspectRatio``; an orthographic one has ``xmag``/``ymag`` half extents.  The renderer keeps
the vertical extent (``yfov`` or ``ymag``) and takes the horizontal extent from the *image*
aspect ratio, so a render is never stretched when its size differs from the camera's own
aspect ratio.  Depth of field is a thin lens on top of the perspective camera.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError, RenderError
from ..geometry.scene import Camera, Scene

#: Sensor height used to turn a field of view into a focal length for the f-number
#: (24 mm, the full-frame 35 mm format; common practice, no source).
SENSOR_HEIGHT_M = 0.024

#: Vertical field of view of a framed camera (about a 50 mm lens on full frame; common practice).
FRAMED_YFOV_RAD = 2.0 * float(np.arctan(0.012 / 0.05))


def choose_camera(scene: Scene, name: str | None, aspect: float) -> Camera:
    """The camera named ``name``, else the scene's first camera, else a framed front view.

    Raises
    ------
    RenderError
        When ``name`` is given and the scene has no camera of that name.
    """
    if name is not None:
        for cam in scene.cameras:
            if cam.name == name:
                return cam
        known = ", ".join(repr(c.name) for c in scene.cameras) or "none"
        raise InputError(f"no camera named {name!r}", file=scene.source, accepted=known)
    if scene.cameras:
        return scene.cameras[0]
    lo, hi = scene.bounds()
    return frame_camera(lo, hi, aspect)


def frame_camera(lo, hi, aspect: float, *, yfov_rad: float = FRAMED_YFOV_RAD, margin: float = 1.1) -> Camera:
    """A perspective camera on +Z looking down -Z at the box ``lo``..``hi`` (glTF front view).

    The camera sits so that the bounding sphere of the box fits the narrower field of view,
    enlarged by ``margin``.
    """
    lo = np.asarray(lo, dtype=np.float64)
    hi = np.asarray(hi, dtype=np.float64)
    centre = 0.5 * (lo + hi)
    radius = max(float(np.linalg.norm(hi - lo)) * 0.5, 1e-3)
    half_v = 0.5 * yfov_rad
    half_h = float(np.arctan(np.tan(half_v) * aspect))
    half = min(half_v, half_h)
    distance = margin * radius / np.sin(half)
    world_from_camera = np.eye(4)
    world_from_camera[:3, 3] = centre + np.array([0.0, 0.0, distance])
    return Camera(
        name="framed front view",
        kind="perspective",
        world_from_camera=world_from_camera,
        yfov_rad=yfov_rad,
        aspect_ratio=aspect,
        znear=0.01 * distance,
    )


def pack_camera(
    camera: Camera,
    width: int,
    height: int,
    *,
    aperture_f_number: float | None = None,
    focus_distance_m: float | None = None,
    focus_point=None,
) -> np.ndarray:
    """Pack a camera into the ``(32,) float64`` record of ``camera_kernels`` (layout there).

    Parameters
    ----------
    camera : Camera
    width, height : int
        Image size in pixels.
    aperture_f_number : float, optional
        Thin lens: lens radius = focal length / (2 N), with the focal length from ``yfov`` on a
        24 mm sensor.  Ignored by orthographic cameras.
    focus_distance_m : float, optional
        Plane of focus (metres along the view axis); default: the distance of ``focus_point``
        along the view axis, or 1 m.
    focus_point : (3,) array, optional
        World point to focus on when ``focus_distance_m`` is not given.
    """
    m = np.asarray(camera.world_from_camera, dtype=np.float64)
    if m.shape != (4, 4) or not np.all(np.isfinite(m)):
        raise RenderError(f"camera {camera.name!r}: world_from_camera must be a finite 4x4 matrix")
    cam = np.zeros(32, np.float64)
    cam[1:17] = m.reshape(-1)
    cam[18] = width / height
    cam[21] = width
    cam[22] = height
    if camera.kind == "orthographic":
        cam[0] = 1
        cam[17] = float(camera.ymag)
        return cam
    if camera.kind != "perspective":
        raise RenderError(f"camera {camera.name!r}: kind {camera.kind!r} is not accepted (perspective, orthographic)")
    if not 0.0 < camera.yfov_rad < np.pi:
        raise RenderError(f"camera {camera.name!r}: yfov {camera.yfov_rad!r} rad is not accepted (0 < yfov < pi)")
    tan_half = float(np.tan(0.5 * camera.yfov_rad))
    cam[17] = tan_half
    if focus_distance_m is None:
        if focus_point is not None:
            forward = -m[:3, 2] / np.linalg.norm(m[:3, 2])
            focus_distance_m = float(np.dot(np.asarray(focus_point, float) - m[:3, 3], forward))
        if focus_distance_m is None or focus_distance_m <= 0:
            focus_distance_m = 1.0
    cam[20] = focus_distance_m
    if aperture_f_number is not None:
        focal_length_m = 0.5 * SENSOR_HEIGHT_M / tan_half
        cam[19] = focal_length_m / (2.0 * aperture_f_number)
    return cam


def generate_rays(cam: np.ndarray, xs, ys, u_lens=None) -> tuple[np.ndarray, np.ndarray]:
    """World rays through raster points (pixels, y down): ``(origins (N,3), directions (N,3))``."""
    from . import camera_kernels

    xs = np.ascontiguousarray(xs, dtype=np.float64).reshape(-1)
    ys = np.ascontiguousarray(ys, dtype=np.float64).reshape(-1)
    if u_lens is None:
        u_lens = np.full((xs.shape[0], 2), 0.5)
    u_lens = np.ascontiguousarray(u_lens, dtype=np.float64).reshape(-1, 2)
    out = np.zeros((xs.shape[0], 6), np.float64)
    camera_kernels.generate_rays(np.ascontiguousarray(cam, dtype=np.float64), xs, ys, u_lens, out)
    return out[:, :3], out[:, 3:]
