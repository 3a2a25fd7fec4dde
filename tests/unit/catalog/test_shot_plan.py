"""The shot plan (batch/plan.py) and content-hash keys (batch/cache.py).

The status rule is checked against a manifest written in the BRIEF §7 format; the key must
change with each input the issue lists (template text, row values, model bytes, rig name and
definition, settings, renderer version, angle) and with nothing else.
"""

from __future__ import annotations

import hashlib
import json
import shutil
from dataclasses import dataclass

import pytest

from variantshot.batch.plan import plan_shots


@dataclass(frozen=True)
class Settings:
    spp: int = 16
    width: int = 64


@pytest.fixture()
def demo(tmp_path, repo_dir):
    shutil.copytree(repo_dir / "templates", tmp_path / "templates")
    shutil.copytree(repo_dir / "catalog", tmp_path / "catalog")
    return tmp_path


def keys(demo, settings=Settings(), **kw):
    shots = plan_shots(demo / "catalog" / "demo.csv", demo / "out", settings, **kw)
    return {s.id: s.key for s in shots}


def test_ids_and_counts(demo):
    shots = plan_shots(demo / "catalog" / "demo.csv", demo / "out", Settings())
    rows = (demo / "catalog" / "demo.csv").read_text().splitlines()[1:]
    assert len({s.sku for s in shots}) == len(rows)
    assert all(s.id == f"{s.safe_sku}--{s.angle}" and s.id.startswith(s.sku) for s in shots)
    assert len({s.id for s in shots}) == len(shots)
    assert {s.status for s in shots} == {"new"}
    first = shots[0]
    assert (first.angle, first.scene, first.catalog_row) == ("front", f"scenes/{first.safe_sku}.gltf", 2)
    assert all(len(s.key) == 64 for s in shots)
    assert not (demo / "out").exists(), "planning writes nothing"


def test_keys_are_deterministic(demo):
    assert keys(demo) == keys(demo)


def _changed(before, after):
    return {k for k in before if before[k] != after[k]}


def test_key_follows_each_input(demo, monkeypatch):
    base = keys(demo)
    bottle = {k for k in base if k.startswith("TT-BTL")}
    mug = {k for k in base if k.startswith("TT-MUG")}
    # template text
    t = demo / "templates" / "mug.gltf.j2"
    t.write_text(t.read_text() + "\n")
    assert _changed(base, keys(demo)) == mug
    t.write_text(t.read_text()[:-1])
    assert keys(demo) == base
    # model bytes
    b = demo / "catalog" / "models" / "bottle.bin"
    data = bytearray(b.read_bytes())
    data[-1] ^= 1
    b.write_bytes(bytes(data))
    assert _changed(base, keys(demo)) == bottle
    data[-1] ^= 1
    b.write_bytes(bytes(data))
    # row values: one cell of one row
    c = demo / "catalog" / "demo.csv"
    text = c.read_text()
    c.write_text(text.replace("TT-MUG350-INK-SA,mug,Ink,#1f2533", "TT-MUG350-INK-SA,mug,Ink,#1f2534"))
    assert _changed(base, keys(demo)) == {k for k in base if k.startswith("TT-MUG350-INK-SA--")}
    c.write_text(text)
    # finish file
    f = demo / "templates" / "finishes" / "gloss.toml"
    f.write_text(f.read_text().replace("0.03", "0.04"))
    assert _changed(base, keys(demo)) == {k for k in bottle if "-GL--" in k}
    f.write_text(f.read_text().replace("0.04", "0.03"))
    # settings, rig, renderer version: every shot
    assert _changed(base, keys(demo, Settings(spp=32))) == set(base)
    assert _changed(base, keys(demo, rig="top-crisp")) == set(base)
    rig = demo / "templates" / "rigs" / "soft-even.toml"
    rig.write_text(rig.read_text() + "\n# edited\n")
    assert _changed(base, keys(demo)) == set(base)
    rig.write_text(rig.read_text().replace("\n# edited\n", ""))
    import variantshot

    monkeypatch.setattr(variantshot, "__version__", "9.9.9")
    assert _changed(base, keys(demo)) == set(base)
    monkeypatch.undo()
    assert keys(demo) == base
    # the image encoder's and the denoiser's versions (they shape the bytes and the pixels)
    from importlib import metadata

    real_version = metadata.version
    for lib in ("pillow", "pyoidn"):
        monkeypatch.setattr(metadata, "version", lambda name, lib=lib: "0.0-test" if name == lib else real_version(name))
        assert _changed(base, keys(demo)) == set(base), lib
        monkeypatch.undo()
    assert keys(demo) == base
    # the angle: shots of one variant differ only by angle, and their keys differ
    front = [k for k in base if k.endswith("--front")]
    assert len({base[k] for k in front}) == len(front)
    assert base["TT-MUG350-OAT-GZ--front"] != base["TT-MUG350-OAT-GZ--three-quarter-right"]


def _entry(out, shot, key, data=b"png bytes"):
    img = out / "shots" / f"{shot}.png"
    img.parent.mkdir(parents=True, exist_ok=True)
    img.write_bytes(data)
    return {"id": shot, "key": key, "status": "rendered", "image": f"shots/{shot}.png", "error": None,
            "images": [{"path": f"shots/{shot}.png", "format": "png", "width": 8, "height": 8,
                        "bytes": len(data), "sha256": hashlib.sha256(data).hexdigest()}]}


def test_status_against_the_manifest(demo):
    out = demo / "out"
    shots = plan_shots(demo / "catalog" / "demo.csv", out, Settings())
    a, b, c, d = shots[0], shots[1], shots[2], shots[3]
    entries = {a.id: _entry(out, a.id, a.key), b.id: _entry(out, b.id, "0" * 64), c.id: _entry(out, c.id, c.key),
               d.id: dict(_entry(out, d.id, d.key), status="failed")}
    (out / f"shots/{c.id}.png").write_bytes(b"altered")  # the image changed after the manifest
    manifest = {"format": 1, "renderer": "variantshot 0.1.0", "updated": "2026-01-01T00:00:00Z", "shots": entries}
    (out / "manifest.json").write_text(json.dumps(manifest))
    status = {s.id: s.status for s in plan_shots(demo / "catalog" / "demo.csv", out, Settings())}
    assert status[a.id] == "up-to-date"
    assert status[b.id] == "changed" and status[c.id] == "changed" and status[d.id] == "changed"
    assert {status[s.id] for s in shots[4:]} == {"new"}


def test_damaged_manifest_is_left_alone(demo):
    out = demo / "out"
    out.mkdir()
    (out / "manifest.json").write_text("{not json")
    shots = plan_shots(demo / "catalog" / "demo.csv", out, Settings())
    assert {s.status for s in shots} == {"new"}
    assert sorted(p.name for p in out.iterdir()) == ["manifest.json"]
