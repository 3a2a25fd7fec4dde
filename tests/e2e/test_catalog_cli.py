"""`variantshot check`, `plan` and `expand` through the CLI (DESIGN.md's command contract).

Exit statuses per DESIGN.md: 0 done, 2 bad input with nothing written.  Expanded scenes are
read back with the project's glTF loader and their cameras compared with the angles asked.
"""

from __future__ import annotations

import json

import numpy as np
from typer.testing import CliRunner

from variantshot.cli.main import app


def run(*args):
    return CliRunner().invoke(app, [str(a) for a in args])


BAD = "sku,product,colour,finish\nA-1,bottle,#112233,matte\nA-1,mugg,#1122,matte\n"


def test_check_demo_ok(repo_dir):
    result = run("check", repo_dir / "catalog" / "demo.csv", "--json")
    assert result.exit_code == 0, result.output
    summary = json.loads(result.stdout)
    assert summary["ok"] and summary["rows"] >= 20 and set(summary["products"]) == {"bottle", "mug", "speaker"}
    assert 40 <= summary["shots"] <= 90


def test_check_bad_catalog_exits_2_with_one_line_per_error(repo_dir, tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text(BAD)
    result = run("check", path, "--templates", repo_dir / "templates")
    assert result.exit_code == 2
    lines = [line for line in result.stderr.splitlines() if line.startswith("error: ")]
    assert lines == [
        f"error: {path}:3:sku: duplicate SKU 'A-1' (first on row 2) (accepted: each SKU on one row)",
        f"error: {path}:3:product: 'mugg' is not a known product; did you mean 'mug'? (accepted: bottle, mug, speaker)",
        f"error: {path}:3:colour: '#1122' is not a #RRGGBB colour (six hexadecimal digits) (accepted: #RRGGBB, "
        "lab(L, a, b) with the D65 white, lab50(L, a, b) with the D50 white)",
    ]


def test_expand_bad_catalog_writes_nothing(repo_dir, tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text(BAD)
    result = run("expand", path, "--out", tmp_path / "out", "--templates", repo_dir / "templates")
    assert result.exit_code == 2 and not (tmp_path / "out").exists()
    result = run("plan", path, "--out", tmp_path / "out", "--templates", repo_dir / "templates")
    assert result.exit_code == 2 and not (tmp_path / "out").exists()


def test_expand_writes_loadable_scenes_with_angle_cameras(repo_dir, tmp_path):
    out = tmp_path / "out"
    result = run("expand", repo_dir / "catalog" / "demo.csv", "--out", out, "--json")
    assert result.exit_code == 0, result.output
    written = [p for p in json.loads(result.stdout)["scenes"]]
    assert len(written) >= 20
    from variantshot.geometry.gltf import load_gltf  # the project's loader reads what we write

    for p in written[:: max(1, len(written) // 6)]:
        doc = json.loads(open(p).read())
        extras = doc["asset"]["extras"]["variantshot"]
        scene = load_gltf(p)
        assert [c.name for c in scene.cameras] == extras["angles"]
        for cam in scene.cameras:
            assert cam.kind == "perspective" and cam.aspect_ratio == 1.0
        lo, hi = scene.bounds()
        assert np.all(hi - lo > 0.03) and np.all(hi - lo < 0.5), "real-looking sizes in metres"
        assert scene.n_triangles > 1000
    # the model buffers are copied once, next to the scenes
    bins = sorted(p.name for p in (out / "scenes").glob("*.bin"))
    assert bins == ["bottle.bin", "mug.bin", "speaker.bin"]


def test_plan_lists_shots_and_sees_them_up_to_date(repo_dir, tmp_path):
    out = tmp_path / "out"
    result = run("plan", repo_dir / "catalog" / "demo.csv", "--out", out, "--json", "--only", "TT-MUG350-OAT-GZ*")
    assert result.exit_code == 0, result.output
    plan = json.loads(result.stdout)
    ids = [s["id"] for s in plan["shots"]]
    assert ids == ["TT-MUG350-OAT-GZ--front", "TT-MUG350-OAT-GZ--three-quarter-right", "TT-MUG350-OAT-GZ--top"]
    assert plan["counts"] == {"new": 3, "changed": 0, "up-to-date": 0}
    assert not out.exists()


def _rounded(text: str) -> str:
    import re

    return re.sub(r"-?\d+\.\d+(?:e-?\d+)?", lambda m: f"{float(m.group(0)):.6f}", text)


def test_demo_models_are_small_and_rebuildable(repo_dir, tmp_path):
    # the committed models are what the script builds (to float32 rounding: another numpy may
    # differ in the last bits of trigonometry)
    from variantshot.catalog.demo_models import write_demo
    from variantshot.catalog.gltf_check import accessor_array, load_buffers

    counts = write_demo(tmp_path)
    for name, n in counts.items():
        assert 1000 <= n <= 10000, (name, n)
        committed = repo_dir / "catalog" / "models" / f"{name}.gltf"
        built = tmp_path / "catalog" / "models" / f"{name}.gltf"
        for suffix in (".gltf", ".bin"):
            assert committed.with_suffix(suffix).stat().st_size < 1_000_000
        doc_c, doc_b = json.loads(committed.read_text()), json.loads(built.read_text())
        assert _rounded(json.dumps(doc_c)) == _rounded(json.dumps(doc_b))
        buf_c, buf_b = load_buffers(doc_c, committed.parent), load_buffers(doc_b, built.parent)
        for k in range(len(doc_c["accessors"])):
            np.testing.assert_allclose(accessor_array(doc_c, buf_c, k), accessor_array(doc_b, buf_b, k), atol=1e-6)
        assert _rounded((tmp_path / "templates" / f"{name}.gltf.j2").read_text()) == \
            _rounded((repo_dir / "templates" / f"{name}.gltf.j2").read_text())


def test_check_warns_about_out_of_gamut_colours_and_unrendered_extensions(repo_dir, tmp_path):
    # a user finish folder next to the catalog adds a finish with an extension no renderer knows
    (tmp_path / "finishes").mkdir()
    (tmp_path / "finishes" / "glitter.toml").write_text(
        "[material.pbrMetallicRoughness]\nroughnessFactor = 0.5\n[material.extensions.VS_materials_glitter]\ndensity = 1.0\n")
    path = tmp_path / "c.csv"
    path.write_text('sku,product,colour,finish\nG-1,mug,"lab(60, 120, 0)",satin\nG-2,mug,#445566,glitter\n')
    result = run("check", path, "--templates", repo_dir / "templates")
    assert result.exit_code == 0, result.output
    warnings = [line for line in result.stderr.splitlines() if line.startswith("warning: ")]
    assert any(line.startswith(f"warning: {path}:2:colour: 'lab(60, 120, 0)' is outside the sRGB gamut") for line in warnings), warnings
    assert any(line.startswith(f"warning: {path}:3:finish: finish 'glitter' uses VS_materials_glitter") for line in warnings), warnings


def test_check_reports_a_broken_model(repo_dir, tmp_path):
    import shutil

    shutil.copytree(repo_dir / "templates", tmp_path / "templates")
    shutil.copytree(repo_dir / "catalog", tmp_path / "catalog")
    model = tmp_path / "catalog" / "models" / "mug.gltf"
    doc = json.loads(model.read_text())
    doc["buffers"][0]["byteLength"] += 4
    model.write_text(json.dumps(doc))
    result = run("check", tmp_path / "catalog" / "demo.csv")
    assert result.exit_code == 2
    assert any("mug.gltf: /buffers/0: byteLength" in line for line in result.stderr.splitlines()), result.stderr


def test_expand_respects_the_output_lock(repo_dir, tmp_path):
    from variantshot._lock import acquire_lock

    out = tmp_path / "out"
    with acquire_lock(out):  # this process is alive, so the lock is live
        import subprocess
        import sys

        # from another process: exit 3 (DESIGN.md: another run holds the output folder's lock)
        proc = subprocess.run([sys.executable, "-c", "from variantshot.cli.main import app; app()", "expand",
                               str(repo_dir / "catalog" / "demo.csv"), "--out", str(out)],
                              capture_output=True, text=True)
    assert proc.returncode == 3, proc.stderr
    assert not (out / "scenes").exists()
