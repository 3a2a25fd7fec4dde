"""The batch end to end on a three-row catalog: incremental runs, failure isolation, the lock,
white backgrounds, formats and sizes.  A fixture shrinks the draft preset so each run takes a
few seconds once the JIT cache is warm."""

from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from variantshot.batch import quality as quality_mod
from variantshot.batch.manifest import check_manifest, load_manifest
from variantshot.cli.main import app

DATA = Path(__file__).resolve().parents[1] / "data" / "batch"
TINY = quality_mod.Quality("draft", long_side_px=16, spp=4, noise_target=1.0, max_depth=3)


@pytest.fixture
def tiny_draft(monkeypatch):
    """The draft preset shrunk to 16 x 16 px at 4 spp."""
    monkeypatch.setitem(quality_mod.QUALITY_PRESETS, "draft", TINY)
    return TINY


@pytest.fixture
def catalog(tmp_path, repo_dir) -> Path:
    path = tmp_path / "catalog.csv"
    shutil.copy(DATA / "catalog.csv", path)
    return path


def _render(catalog, out, repo_dir, *extra):
    args = ["render", str(catalog), "--out", str(out), "--templates", str(repo_dir / "templates"), "--quiet", *extra]
    return CliRunner().invoke(app, args)


def _rendered_ids(out) -> dict:
    return {k: e for k, e in load_manifest(out)["shots"].items()}


def test_second_run_renders_nothing_and_an_edited_row_only_its_shots(tiny_draft, catalog, tmp_path, repo_dir):
    out = tmp_path / "out"
    r1 = _render(catalog, out, repo_dir, "--json")
    assert r1.exit_code in (0, 1), r1.output  # 1 only for QA verdicts at 16 px
    first = [json.loads(line) for line in r1.stdout.splitlines() if line.startswith("{")]
    assert sorted(s["id"] for s in first) == sorted(
        ["T-BTL-SAGE--front", "T-MUG-OAT--front", "T-MUG-OAT--three-quarter-right", "T-BTL-EMBR--front"])
    assert all(s["status"] == "rendered" for s in first)
    before = _rendered_ids(out)
    assert check_manifest(out) == []

    # `variantshot plan` keys shots the same way: everything is up to date now
    plan = CliRunner().invoke(app, ["plan", str(catalog), "--out", str(out), "--templates", str(repo_dir / "templates"),
                                    "--json"])
    assert plan.exit_code == 0, plan.output
    assert json.loads(plan.stdout)["counts"] == {"new": 0, "changed": 0, "up-to-date": 4}

    r2 = _render(catalog, out, repo_dir, "--json")
    assert [line for line in r2.stdout.splitlines() if line.startswith("{")] == []  # nothing rendered
    assert _rendered_ids(out) == before

    # change the mug's colour: exactly its two shots are rendered again
    text = catalog.read_text().replace("#d9c7a7", "#c9b797")
    catalog.write_text(text)
    r3 = _render(catalog, out, repo_dir, "--json")
    again = sorted(json.loads(line)["id"] for line in r3.stdout.splitlines() if line.startswith("{"))
    assert again == ["T-MUG-OAT--front", "T-MUG-OAT--three-quarter-right"]
    after = _rendered_ids(out)
    for sid in ("T-BTL-SAGE--front", "T-BTL-EMBR--front"):
        assert after[sid]["content_hash"] == before[sid]["content_hash"]
        assert after[sid]["rendered_at"] == before[sid]["rendered_at"]
    assert after["T-MUG-OAT--front"]["key"] != before["T-MUG-OAT--front"]["key"]

    # --only narrows, --force widens
    r4 = _render(catalog, out, repo_dir, "--json", "--force", "--only", "T-BTL-*")
    forced = sorted(json.loads(line)["id"] for line in r4.stdout.splitlines() if line.startswith("{"))
    assert forced == ["T-BTL-EMBR--front", "T-BTL-SAGE--front"]


def test_a_broken_row_fails_only_its_shots(tiny_draft, catalog, tmp_path, repo_dir):
    # trim_colour is a free column the bottle template turns into a colour: 'banana' breaks
    # only that row's template expansion, not the catalog's validation
    with catalog.open("a") as f:
        f.write("T-BTL-BAD,bottle,Bad,#808080,matte,front;three-quarter-left,banana\n")
    out = tmp_path / "out"
    r = _render(catalog, out, repo_dir)
    assert r.exit_code == 1, r.output
    shots = _rendered_ids(out)
    bad = {k: e for k, e in shots.items() if k.startswith("T-BTL-BAD")}
    assert sorted(bad) == ["T-BTL-BAD--front", "T-BTL-BAD--three-quarter-left"]
    for e in bad.values():
        assert e["status"] == "failed"
        assert "bottle.gltf.j2" in e["error"] and "banana" in e["error"]
    good = {k: e for k, e in shots.items() if not k.startswith("T-BTL-BAD")}
    assert len(good) == 4 and all(e["status"] == "rendered" for e in good.values())
    assert "failed: T-BTL-BAD--front" in r.stderr
    assert check_manifest(out) == []


def test_invalid_catalog_exits_2_and_writes_nothing(tiny_draft, catalog, tmp_path, repo_dir):
    catalog.write_text(catalog.read_text().replace("matte", "velvety", 1))
    out = tmp_path / "out"
    r = _render(catalog, out, repo_dir)
    assert r.exit_code == 2
    assert "finish" in r.stderr
    assert not out.exists()


def test_a_held_lock_exits_3_and_a_stale_one_is_taken_over(tiny_draft, catalog, tmp_path, repo_dir):
    import os
    import subprocess
    import sys

    from variantshot._lock import LOCK_NAME, acquire_lock

    out = tmp_path / "out"
    with acquire_lock(out):
        r = _render(catalog, out, repo_dir)
        assert r.exit_code == 3
        assert f"pid {os.getpid()}" in r.stderr
    assert not (out / "shots").exists()
    # a lock left by a process that is gone
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    (out / LOCK_NAME).write_text(json.dumps({"pid": int(dead.stdout), "started": "2026-01-01T00:00:00+00:00",
                                             "host": os.uname().nodename}))
    r = _render(catalog, out, repo_dir, "--only", "T-BTL-SAGE*")
    assert r.exit_code in (0, 1), r.output
    assert _rendered_ids(out)["T-BTL-SAGE--front"]["status"] == "rendered"
    assert not (out / LOCK_NAME).exists()


def test_white_background_is_exactly_white_outside_the_shadow_region(catalog, tmp_path, repo_dir):
    from PIL import Image

    from variantshot.batch.runner import render_batch
    from variantshot.geometry.gltf import load_gltf
    from variantshot.imaging.background import box_blur
    from variantshot.review.metrics import mask_from_coverage, shadow_zone
    from variantshot.settings import RenderSettings
    from variantshot.transport.integrator import render

    q = quality_mod.Quality("draft", long_side_px=96, spp=8, noise_target=1.0, max_depth=4)
    out = tmp_path / "out"
    report = render_batch(catalog, out, quality=q, templates_dir=repo_dir / "templates", sheet_formats=(),
                          only=["T-BTL-SAGE*", "T-MUG-OAT--front"])
    assert not report.failed
    transparent = render_batch(catalog, tmp_path / "alpha", quality=q, templates_dir=repo_dir / "templates",
                               sheet_formats=(), only=["T-BTL-SAGE*", "T-MUG-OAT--front"], background="transparent")
    assert not transparent.failed
    for sid in ("T-BTL-SAGE--front", "T-MUG-OAT--front"):
        rgb = np.asarray(Image.open(out / "shots" / f"{sid}.png").convert("RGB"))
        rgba = np.asarray(Image.open(tmp_path / "alpha" / "shots" / f"{sid}.png"))
        assert rgba.shape[2] == 4
        # The product's coverage and the zone where its contact shadow may fall are the review
        # stage's definitions (review.metrics); everything else is background that no shadow
        # reaches and must be exactly (255, 255, 255) (marketplace main-image rule, REFERENCES §8,
        # common practice, no source).
        # the product's coverage, from the path tracer's own alpha pass of the written scene
        scene = load_gltf(out / "scenes" / f"{sid.split('--')[0]}.gltf")
        cam = next(c for c in scene.cameras if c.name == sid.split("--")[1])
        alpha = render(scene, RenderSettings(width=96, height=96, spp=16, max_depth=1), camera=cam).alpha
        coverage_any = box_blur((alpha > 0).astype(float), 1) > 0  # with a 1 px guard band
        product = mask_from_coverage(alpha)
        zone = shadow_zone(product) | coverage_any
        outside = ~zone
        assert outside.sum() > 0.05 * outside.size
        white = np.all(rgb == 255, axis=2)
        assert white[outside].mean() == 1.0
        # ... and a contact shadow is kept under the product (not everything is white)
        below = zone & ~coverage_any
        assert (~white[below]).any()
        # the transparent version carries that shadow as a semi-transparent matte
        matte = rgba[..., 3][below & ~white]
        assert matte.min() > 0 and matte.max() < 255
    qa = load_manifest(out)["shots"]["T-BTL-SAGE--front"]["qa"]
    purity = next(c for c in qa["checks"] if c["name"] == "background_purity")
    assert purity["status"] == "pass"


def test_formats_and_sizes_from_one_render(monkeypatch, catalog, tmp_path, repo_dir):
    from PIL import Image

    monkeypatch.setitem(quality_mod.QUALITY_PRESETS, "draft", TINY.replace(long_side_px=48))
    out = tmp_path / "out"
    bad = _render(catalog, out, repo_dir, "--sizes", "8")
    assert bad.exit_code == 2 and ">= 16" in bad.stderr  # refused before anything renders
    r = _render(catalog, out, repo_dir, "--only", "T-BTL-SAGE*", "--format", "png,jpg,webp", "--sizes", "24,16,200")
    assert r.exit_code in (0, 1), r.output
    e = load_manifest(out)["shots"]["T-BTL-SAGE--front"]
    got = [(im["path"], im["width"]) for im in e["images"]]
    stem = "shots/T-BTL-SAGE--front"
    assert got == [(f"{stem}.png", 48), (f"{stem}.jpg", 48), (f"{stem}.webp", 48),
                   (f"{stem}@24.png", 24), (f"{stem}@24.jpg", 24), (f"{stem}@24.webp", 24),
                   (f"{stem}@16.png", 16), (f"{stem}@16.jpg", 16), (f"{stem}@16.webp", 16)]  # 200 > 48: skipped
    assert e["image"] == got[0][0]
    for im in e["images"]:
        with Image.open(out / im["path"]) as pic:
            assert pic.size == (im["width"], im["height"])
            assert pic.format == {"png": "PNG", "jpg": "JPEG", "webp": "WEBP"}[im["format"]]
            assert pic.info.get("icc_profile")  # sRGB-tagged (IEC 61966-2-1)
    # the downsized PNG keeps the exact white of the corners (area filter, no ringing)
    small = np.asarray(Image.open(out / f"{stem}@16.png").convert("RGB"))
    assert np.all(small[0, 0] == 255) and np.all(small[-1, -1] == 255)


def test_a_catalog_column_picks_formats_and_background_per_row(tiny_draft, tmp_path, repo_dir):
    catalog = tmp_path / "catalog.csv"
    catalog.write_text(
        "sku,product,colourway,colour,finish,angles,formats,background\n"
        "T-A,bottle,Sage,#7a9a7a,matte,front,jpg;png,\n"
        "T-B,bottle,Sage,#7a9a7a,matte,front,,transparent\n"
        "T-C,bottle,Sage,#7a9a7a,matte,front,tiff,\n"
    )
    out = tmp_path / "out"
    r = _render(catalog, out, repo_dir)
    shots = load_manifest(out)["shots"]
    assert [im["format"] for im in shots["T-A--front"]["images"]] == ["jpg", "png"]
    assert shots["T-B--front"]["background"] == "transparent"
    from PIL import Image

    with Image.open(out / shots["T-B--front"]["image"]) as im:
        assert im.mode == "RGBA"
    assert shots["T-C--front"]["status"] == "failed"
    assert "column formats" in shots["T-C--front"]["error"] or "formats" in shots["T-C--front"]["error"]
    assert r.exit_code == 1


def test_backdrop_background_is_the_rendered_sweep(tiny_draft, monkeypatch, catalog, tmp_path, repo_dir):
    from PIL import Image

    monkeypatch.setitem(quality_mod.QUALITY_PRESETS, "draft", TINY.replace(long_side_px=64, spp=8))
    out = tmp_path / "out"
    r = _render(catalog, out, repo_dir, "--only", "T-BTL-SAGE*", "--background", "backdrop")
    assert r.exit_code in (0, 1), r.output
    e = load_manifest(out)["shots"]["T-BTL-SAGE--front"]
    assert e["background"] == "backdrop"
    rgb = np.asarray(Image.open(out / e["image"]).convert("RGB")).astype(int)
    corners = np.array([rgb[1, 1], rgb[1, -2], rgb[-2, 1], rgb[-2, -2]])
    # the lit sweep (albedo 0.8, exposed like the product) is a light grey, not paper white
    assert np.all((corners > 120) & (corners < 255))
    # QA frames the product by its coverage, not by the sweep that fills the frame
    fill = next(c for c in e["qa"]["checks"] if c["name"] == "fill")
    assert 0.6 < fill["value"] < 0.95
