"""The shot runner: exposure calibration, file naming, self-contained scenes, executors."""

import io
import math

import numpy as np
import pytest

from variantshot.batch.executors import LocalExecutor
from variantshot.batch.quality import OutputSpec, Quality, parse_formats, parse_sizes, quality_preset
from variantshot.batch.runner import calibrate_exposure, image_paths
from variantshot.errors import InputError


def test_final_preset_is_marketplace_sized():
    # marketplaces ask for 1000-1600 px or more so zoom works; 2000 px masters usual
    # (REFERENCES §8, common practice, no source)
    assert max(quality_preset("final").width, quality_preset("final").height) >= 2000
    assert quality_preset("draft").spp < quality_preset("proof").spp < quality_preset("final").spp
    with pytest.raises(InputError, match="draft, proof, final"):
        quality_preset("best")


def test_output_options():
    assert parse_formats("PNG, jpeg,webp") == ("png", "jpg", "webp")
    assert parse_sizes("1600,1000,1600") == (1600, 1000)
    with pytest.raises(InputError, match="jpg has no alpha"):
        OutputSpec(background="transparent", formats=("jpg",))
    with pytest.raises(InputError, match="tiff"):
        parse_formats("tiff")
    paths = image_paths("A--front", OutputSpec(formats=("png", "jpg"), sizes=(1000, 5000)), 2048)
    assert paths == [("shots/A--front.png", "png", None), ("shots/A--front.jpg", "jpg", None),
                     ("shots/A--front@1000.png", "png", 1000), ("shots/A--front@1000.jpg", "jpg", 1000)]


@pytest.mark.parametrize("rig", ["soft-even", "top-crisp"])
def test_mid_grey_card_renders_to_srgb_118_in_any_product_size(rig):
    # REFERENCES §4: an 18 % grey card encodes to sRGB 117.65 -> 118 (IEC 61966-2-1 curve).
    # Calibrated once per rig on a unit-cube product; rig lengths scale with the product, so a
    # card standing in for a product 7x larger, elsewhere in the world, must still give 118.
    from PIL import Image

    from variantshot.geometry.rig import build_rig
    from variantshot.geometry.scene import Camera, Material, make_scene, merge_scenes
    from variantshot.imaging.files import encode_image
    from variantshot.settings import RenderSettings
    from variantshot.transport.environment import make_environment
    from variantshot.transport.integrator import render

    ev = calibrate_exposure(rig)
    assert calibrate_exposure(rig) == ev  # cached, deterministic
    k, off = 7.0, np.array([3.0, 0.0, -2.0])
    lo, hi = off + k * np.array([-0.5, 0.0, -0.5]), off + k * np.array([0.5, 1.0, 0.5])
    card = make_scene(
        off + k * np.array([[-0.5, 0.0, 0.0], [0.5, 0.0, 0.0], [0.5, 1.0, 0.0], [-0.5, 1.0, 0.0]]),
        [[0, 1, 2], [0, 2, 3]], normals=[[0, 0, 1.0]] * 4,
        materials=[Material(base_colour_factor=(0.18, 0.18, 0.18, 1.0), metallic_factor=0.0, roughness_factor=1.0,
                            extensions={"KHR_materials_ior": {"ior": 1.0}})])
    m = np.eye(4)
    m[:3, 3] = off + k * np.array([0.0, 0.5, 6.0])
    cam = Camera(name="c", kind="perspective", world_from_camera=m, yfov_rad=0.05)
    built = build_rig(rig, (lo, hi), camera=cam)
    film = render(merge_scenes(card, built.scene), RenderSettings(width=8, height=8, spp=512, seed=7, max_depth=8),
                  env=make_environment(tuple(built.environment_linear), rotation_rad=built.yaw_rad), camera=cam)
    y = float(np.mean(film.radiance @ np.array([0.2126, 0.7152, 0.0722])))
    assert y * 2.0 ** ev == pytest.approx(0.18, rel=0.03)
    grey = np.full((4, 4, 3), y)
    png = encode_image(grey, "png", exposure_ev=ev, dither=False)
    code = np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))
    assert abs(int(code.mean().round()) - 118) <= 1


def _double(x):
    return 2 * x


def test_local_executor_runs_everything_in_process_and_in_workers():
    assert list(LocalExecutor(1).map(_double, [1, 2, 3])) == [2, 4, 6]
    assert sorted(LocalExecutor(2).map(_double, [1, 2, 3, 4])) == [2, 4, 6, 8]
    assert math.isfinite(LocalExecutor(2).threads)


class _Task:
    def __init__(self, shot_id):
        self.shot_id = shot_id


def _die_on_b(task):
    import os

    from variantshot.batch.runner import ShotResult

    if task.shot_id == "b":
        os._exit(9)  # the worker process dies mid-shot
    return ShotResult(task.shot_id, True)


def test_a_dead_worker_fails_its_shot_not_the_batch():
    results = {r.shot_id: r for r in LocalExecutor(2).map(_die_on_b, [_Task("a"), _Task("b")])}
    assert not results["b"].ok and "worker failed" in results["b"].error
