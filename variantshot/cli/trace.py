"""``variantshot trace``: render one glTF file with the path tracer and write one image."""

from __future__ import annotations

import time
from pathlib import Path

import typer

from . import _console

IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg", ".webp", ".pfm", ".npy")


def _parse_env(value: str | None):
    """``--env``: a number (uniform grey), three comma-separated numbers, or an image path."""
    if value is None:
        return None
    parts = [p.strip() for p in value.split(",")]
    try:
        numbers = [float(p) for p in parts]
    except ValueError:
        return Path(value)
    if len(numbers) == 1:
        return numbers[0]
    if len(numbers) == 3:
        return tuple(numbers)
    from ..errors import InputError

    raise InputError(f"--env {value!r} is neither one number, three numbers nor an image file",
                     accepted="0.5 | 1,0.9,0.8 | studio.hdr | sky.pfm")


def trace(
    scene_path: Path = typer.Argument(..., metavar="SCENE", help="A .gltf or .glb file."),
    output: Path = typer.Option(..., "-o", "--output", help="Image to write: .png .jpg .webp (sRGB) or "
                                ".pfm .npy (linear, scene-referred)."),
    width: int = typer.Option(512, "--width", min=1, help="Image width in pixels."),
    height: int = typer.Option(512, "--height", min=1, help="Image height in pixels."),
    spp: int = typer.Option(64, "--spp", min=1, help="Samples per pixel."),
    camera: str = typer.Option(None, "--camera", help="Name of a glTF camera (default: the first one, or a "
                               "front view framing the scene)."),
    env: str = typer.Option(None, "--env", help="Environment light: a uniform radiance (0.5 or 1,0.9,0.8) or an "
                            "equirectangular image (.hdr, .pfm)."),
    env_rotation: float = typer.Option(0.0, "--env-rotation", help="Turn of the environment about +Y, degrees."),
    rig: str = typer.Option("none", "--rig", help="Studio rig to light the scene with, or 'none'."),
    seed: int = typer.Option(0, "--seed", min=0, help="Sample seed (same seed, same image, any thread count)."),
    threads: int = typer.Option(None, "--threads", min=1, help="Threads to use (default: all cores)."),
    exposure: float = typer.Option(0.0, "--exposure", help="Exposure in EV (stops) for display formats."),
    tone: str = typer.Option("none", "--tone", help="Tone curve for display formats: none or neutral."),
    f_number: float = typer.Option(None, "--f-number", min=0.01, help="Thin-lens aperture (f-number) for depth "
                                   "of field; default: pinhole."),
    focus_distance: float = typer.Option(None, "--focus-distance", min=0.0, help="Distance in focus, metres "
                                         "(default: the scene's centre)."),
    bit_depth: int = typer.Option(8, "--bit-depth", help="PNG bit depth: 8 or 16."),
    noise_target: float = typer.Option(None, "--noise-target", min=0.0, help="Adaptive sampling: 8x8 tiles stop "
                                       "once their relative standard error is at or below this (e.g. 0.05); "
                                       "--spp is then the cap."),
    no_denoise: bool = typer.Option(False, "--no-denoise", help="Write the raw film for .png/.jpg/.webp "
                                    "(by default they are denoised when the denoiser is installed; .pfm/.npy "
                                    "always hold the raw film)."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress bar or summary."),
) -> None:
    """Render one glTF scene to an image with the path tracer.

    The output suffix picks the format: .png (8 or 16 bit), .jpg and .webp are display-referred
    sRGB with an embedded sRGB profile (after --exposure and --tone); .pfm and .npy hold the
    linear, scene-referred radiance untouched. A scene without lights and without --env is lit
    by a neutral uniform environment of radiance 1 (and a note says so). Display formats are
    denoised (albedo and normal guided) when the denoiser is installed; --no-denoise turns it off.

    Example: variantshot trace bottle.glb -o bottle.png --width 1024 --height 1024 --spp 256 --env 1
    """
    from ..errors import InputError

    with _console.guarded():
        if tone not in ("none", "neutral"):
            raise InputError(f"--tone {tone!r} is not a tone curve", accepted="none, neutral")
        if output.suffix.lower() not in IMAGE_SUFFIXES:
            raise InputError(f"cannot tell the image format from suffix {output.suffix!r}", file=output,
                             accepted=", ".join(IMAGE_SUFFIXES))
        if bit_depth not in (8, 16):
            raise InputError(f"--bit-depth {bit_depth} is not accepted", accepted="8, 16")
        from ..geometry.gltf import load_gltf
        from ..imaging.files import write_image
        from ..settings import RenderSettings
        from ..transport.environment import make_environment
        from ..transport.integrator import needs_default_light, render

        settings = RenderSettings(
            width=width, height=height, spp=spp, seed=seed, threads=threads, camera_name=camera,
            aperture_f_number=f_number, focus_distance_m=focus_distance or None,
            noise_target=noise_target or None,
        )
        started = time.perf_counter()
        scene = load_gltf(scene_path)
        env_value = _parse_env(env)
        import math

        rotation = math.radians(env_rotation)
        if rig != "none":
            scene, rig_env, rig_yaw = _apply_rig(scene, rig, settings)
            if env_value is None:
                env_value, rotation = rig_env, rig_yaw
        environment = make_environment(env_value, rotation_rad=rotation) if env_value is not None else None
        if needs_default_light(scene, environment):
            if not quiet:
                _console.error(f"note: {scene_path} has no lights and no --env was given; "
                               "lighting it with a neutral uniform environment of radiance 1")
            environment = make_environment(1.0)
        with _console.progress_bar(f"tracing {scene_path.name}", enabled=not quiet) as progress:
            film = render(scene, settings, env=environment, progress=progress)
        fmt_options = {}
        if output.suffix.lower() == ".png":
            fmt_options["bit_depth"] = bit_depth
        radiance = film.radiance
        if not no_denoise and output.suffix.lower() not in (".pfm", ".npy"):
            radiance = _denoised(film, threads)
        write_image(output, radiance, exposure_ev=exposure, tone=tone, seed=seed, **fmt_options)
        seconds = time.perf_counter() - started
    if not quiet:
        samples = f"{spp} spp" if film.spp_map is None else f"{film.mean_spp:.1f} spp on average (cap {spp})"
        _console.error(f"{output}: {width}x{height}, {samples}, {seconds:.2f} s")


def _denoised(film, threads=None):
    """The film denoised with its albedo and normal passes (raw radiance where no denoiser runs)."""
    from ..imaging.denoise import denoise_film_if_available

    return denoise_film_if_available(film, threads=threads)


def _apply_rig(scene, name: str, settings):
    """Merge a studio rig (``geometry.rig``) sized to the scene into it; return (scene, env, yaw)."""
    from ..errors import InputError
    from ..geometry import rig as rigs
    from ..geometry.scene import merge_scenes
    from ..transport.camera import choose_camera

    if name not in rigs.rig_names() and not Path(name).is_file():
        raise InputError(f"--rig {name!r} is not a studio rig", accepted=", ".join(["none", *rigs.rig_names()]))
    cam = choose_camera(scene, settings.camera_name, settings.width / settings.height)
    built = rigs.build_rig(name, scene.bounds(), camera=cam)
    merged = merge_scenes(scene, built.scene, source=scene.source)
    if not scene.cameras:
        merged.cameras = [cam]  # frame the product, not the product and the rig
    return merged, tuple(built.environment_linear), built.yaw_rad
