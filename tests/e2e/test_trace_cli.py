"""``variantshot trace`` end to end through Typer's CliRunner (DESIGN.md command line)."""

from __future__ import annotations

import numpy as np
from PIL import Image
from typer.testing import CliRunner

from variantshot.cli.main import app
from variantshot.imaging.files import read_pfm


def _trace(*args):
    return CliRunner().invoke(app, ["trace", *map(str, args)])


def test_trace_writes_png_with_icc_and_linear_pfm_npy(gltf_samples, tmp_path):
    # Box.gltf (Khronos sample, facts.json): a red baseColorFactor (0.8, 0, 0) box, no lights,
    # no camera: the command frames it from the front and lights it with a neutral environment.
    png = tmp_path / "box.png"
    r = _trace(gltf_samples / "Box.gltf", "-o", png, "--width", 16, "--height", 12, "--spp", 4)
    assert r.exit_code == 0, r.output
    assert "no lights" in r.output
    with Image.open(png) as im:
        assert im.size == (16, 12) and im.mode == "RGB"
        assert im.info.get("icc_profile")  # IEC 61966-2-1 sRGB profile embedded
    pfm, npy = tmp_path / "box.pfm", tmp_path / "box.npy"
    assert _trace(gltf_samples / "Box.gltf", "-o", pfm, "--width", 16, "--height", 12, "--spp", 4,
                  "--exposure", 3).exit_code == 0
    assert _trace(gltf_samples / "Box.gltf", "-o", npy, "--width", 16, "--height", 12, "--spp", 4).exit_code == 0
    a = read_pfm(pfm)
    b = np.load(npy)
    assert a.shape == b.shape == (12, 16, 3)
    np.testing.assert_allclose(a, b, rtol=1e-6)  # linear outputs ignore --exposure: same seed, same render
    centre = b[6, 8]
    assert centre[0] > 0.2 and centre[1] < 0.05 and centre[2] < 0.05  # the red front face


def test_trace_camera_env_and_seed_options(gltf_samples, tmp_path):
    out1, out2 = tmp_path / "a.npy", tmp_path / "b.npy"
    args = [gltf_samples / "Cameras.gltf", "--width", 8, "--height", 8, "--spp", 2, "--env", "0.5,0.5,0.5",
            "--camera", "camera1", "--threads", 1]
    assert _trace(*args, "-o", out1, "--seed", 3).exit_code == 0
    assert _trace(*args, "-o", out2, "--seed", 3).exit_code == 0
    assert np.load(out1).tobytes() == np.load(out2).tobytes()
    assert np.load(out1)[0, 0].tolist() == [0.5, 0.5, 0.5]  # background: the uniform --env


def test_trace_bad_input_exits_2_with_a_named_error(gltf_samples, tmp_path):
    r = _trace(gltf_samples / "Cameras.gltf", "-o", tmp_path / "x.png", "--camera", "nope", "--spp", 1)
    assert r.exit_code == 2 and "no camera named 'nope'" in r.output and "camera0" in r.output
    r = _trace(gltf_samples / "Box.gltf", "-o", tmp_path / "x.tiff", "--spp", 1, "--width", 2, "--height", 2)
    assert r.exit_code == 2 and ".tiff" in r.output
    r = _trace(gltf_samples / "Box.gltf", "-o", tmp_path / "x.png", "--rig", "no-such-rig")
    assert r.exit_code == 2 and "no-such-rig" in r.output
    r = _trace(gltf_samples / "Box.gltf", "-o", tmp_path / "x.png", "--env", "1,2")
    assert r.exit_code == 2 and "--env" in r.output
    assert not (tmp_path / "x.png").exists()
