"""The manifest: the BRIEF's format 1, atomic rewrite, recovery from damage, consistency checks."""

import hashlib
import json

from variantshot.batch.manifest import (
    MANIFEST_NAME,
    check_manifest,
    entry_is_current,
    load_manifest,
    new_manifest,
    save_manifest,
)


def _entry(out, sid, data=b"\x89PNG fake"):
    path = out / "shots" / f"{sid}.png"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)
    h = hashlib.sha256(data).hexdigest()  # sha256 (FIPS 180-4) via hashlib as the reference
    return {
        "id": sid, "sku": sid.split("--")[0], "product": "p", "colourway": "c", "finish": "matte",
        "angle": sid.split("--")[1], "background": "white", "image": f"shots/{sid}.png",
        "images": [{"path": f"shots/{sid}.png", "format": "png", "width": 4, "height": 4, "bytes": len(data), "sha256": h}],
        "key": "k1", "status": "rendered", "error": None, "qa": {"status": "pass", "checks": []},
        "content_hash": h, "rendered_at": "2026-01-01T00:00:00+00:00", "seconds": 0.1,
    }


def test_round_trip_and_format(tmp_path):
    m = new_manifest()
    m["shots"]["B--front"] = _entry(tmp_path, "B--front")
    m["shots"]["A--front"] = _entry(tmp_path, "A--front")
    save_manifest(tmp_path, m)
    raw = json.loads((tmp_path / MANIFEST_NAME).read_text())
    assert raw["format"] == 1 and raw["renderer"].startswith("variantshot ")
    assert list(raw["shots"]) == ["A--front", "B--front"]
    assert load_manifest(tmp_path)["shots"] == raw["shots"]
    assert check_manifest(tmp_path) == []


def test_entry_currency_follows_key_and_bytes(tmp_path):
    e = _entry(tmp_path, "A--front")
    assert entry_is_current(tmp_path, e, "k1")
    assert not entry_is_current(tmp_path, e, "k2")
    (tmp_path / "shots" / "A--front.png").write_bytes(b"\x89PNG other")  # same size, other bytes
    assert not entry_is_current(tmp_path, e, "k1")
    (tmp_path / "shots" / "A--front.png").unlink()
    assert not entry_is_current(tmp_path, e, "k1")
    assert any("missing" in p for p in check_manifest(tmp_path, {"shots": {"A--front": e}}))


def test_damaged_manifest_is_moved_aside(tmp_path):
    (tmp_path / MANIFEST_NAME).write_text('{"format": 1, "shots": {"A": ')
    m = load_manifest(tmp_path)
    assert m["shots"] == {}
    assert len(list(tmp_path.glob(MANIFEST_NAME + ".damaged-*"))) == 1
    assert not (tmp_path / MANIFEST_NAME).exists()


def test_check_reports_temporaries_and_bad_fields(tmp_path):
    e = _entry(tmp_path, "A--front")
    e["content_hash"] = "0" * 64
    (tmp_path / "shots" / ".vs-tmp-abc.png").write_bytes(b"x")
    problems = check_manifest(tmp_path, {"shots": {"A--front": e}})
    assert any("content_hash" in p for p in problems)
    assert any("temporary" in p for p in problems)
