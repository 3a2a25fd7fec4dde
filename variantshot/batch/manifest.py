"""The batch manifest ``<out>/manifest.json``: one entry per shot, rewritten atomically after each.

Format (a contract between the batch, QA, approvals and sheets)::

    {"format": 1, "renderer": "variantshot X.Y.Z", "updated": ISO8601,
     "shots": {SHOT_ID: {"id", "sku", "product", "colourway", "finish", "angle", "background",
                         "image": "shots/<id>.png", "images": [{"path", "format", "width",
                         "height", "bytes", "sha256"}], "key", "status": "rendered"|"failed",
                         "error", "qa", "content_hash", "rendered_at", "seconds"}}}

Recovery policy: a missing manifest is an empty one.  A manifest that cannot be parsed (it can
only be damaged from outside, since every write is atomic) is moved aside to
``manifest.json.damaged-<timestamp>`` with a warning and the batch starts from an empty one: every
shot is then re-rendered, because the shot keys cannot be recovered from the images alone.  An
entry whose image files are missing or whose bytes no longer match their sha256 is not up to date
(:func:`entry_is_current`), so the next run renders it again.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import logging
import os
from pathlib import Path

from .. import __version__
from .._atomic import atomic_write

__all__ = [
    "MANIFEST_NAME",
    "FORMAT",
    "new_manifest",
    "load_manifest",
    "save_manifest",
    "entry_is_current",
    "check_manifest",
    "now_iso",
    "sha256_hex",
]

MANIFEST_NAME = "manifest.json"
FORMAT = 1
ENTRY_FIELDS = (
    "id", "sku", "product", "colourway", "finish", "angle", "background", "image", "images",
    "key", "status", "error", "qa", "content_hash", "rendered_at", "seconds",
)
log = logging.getLogger(__name__)


def now_iso() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def new_manifest() -> dict:
    return {"format": FORMAT, "renderer": f"variantshot {__version__}", "updated": now_iso(), "shots": {}}


def load_manifest(out_dir) -> dict:
    """Read ``<out>/manifest.json``; a missing or damaged one gives an empty manifest (see the
    module docstring)."""
    path = Path(out_dir) / MANIFEST_NAME
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return new_manifest()
    try:
        data = json.loads(text)
        if not isinstance(data, dict) or not isinstance(data.get("shots"), dict) or data.get("format") != FORMAT:
            raise ValueError("not a format-1 variantshot manifest")
    except (ValueError, json.JSONDecodeError) as exc:
        aside = path.with_name(f"{MANIFEST_NAME}.damaged-{_dt.datetime.now().strftime('%Y%m%dT%H%M%S')}")
        os.replace(path, aside)
        log.warning("%s: cannot be read (%s); moved to %s, every shot will be rendered again", path, exc, aside.name)
        return new_manifest()
    return data


def save_manifest(out_dir, manifest: dict) -> Path:
    """Write the manifest atomically (sorted shot ids, stable key order)."""
    manifest = dict(manifest)
    manifest["format"] = FORMAT
    manifest["renderer"] = f"variantshot {__version__}"
    manifest["updated"] = now_iso()
    manifest["shots"] = {k: manifest["shots"][k] for k in sorted(manifest["shots"])}
    text = json.dumps(manifest, indent=1, ensure_ascii=False) + "\n"
    return atomic_write(Path(out_dir) / MANIFEST_NAME, text)


def entry_is_current(out_dir, entry: dict | None, key: str, *, verify_hash: bool = True) -> bool:
    """Whether a manifest entry is a finished render of ``key`` whose files are intact."""
    if not entry or entry.get("status") != "rendered" or entry.get("key") != key:
        return False
    images = entry.get("images") or []
    if not images:
        return False
    out = Path(out_dir)
    for img in images:
        p = out / img["path"]
        try:
            if p.stat().st_size != img["bytes"]:
                return False
        except OSError:
            return False
        if verify_hash and sha256_hex(p.read_bytes()) != img["sha256"]:
            return False
    return True


def check_manifest(out_dir, manifest: dict | None = None) -> list[str]:
    """Every inconsistency between the manifest and the files (empty list: consistent).

    Checks that each rendered entry's images exist with the recorded size and sha256, that the
    primary image's sha256 is the entry's ``content_hash``, that every required field is present,
    and that no temporary file is left in the folder.
    """
    out = Path(out_dir)
    m = load_manifest(out) if manifest is None else manifest
    problems = []
    for sid, e in m["shots"].items():
        missing = [f for f in ENTRY_FIELDS if f not in e]
        if missing:
            problems.append(f"{sid}: missing fields {missing}")
            continue
        if e["id"] != sid:
            problems.append(f"{sid}: id field is {e['id']!r}")
        if e["status"] == "rendered":
            for img in e["images"]:
                p = out / img["path"]
                if not p.is_file():
                    problems.append(f"{sid}: {img['path']} is missing")
                elif sha256_hex(p.read_bytes()) != img["sha256"]:
                    problems.append(f"{sid}: {img['path']} does not match its sha256")
            if e["images"] and e["images"][0]["path"] != e["image"]:
                problems.append(f"{sid}: image is not the first of images")
            if e["images"] and e["content_hash"] != e["images"][0]["sha256"]:
                problems.append(f"{sid}: content_hash is not the primary image's sha256")
        elif e["status"] == "failed":
            if not e["error"]:
                problems.append(f"{sid}: failed without an error message")
        else:
            problems.append(f"{sid}: unknown status {e['status']!r}")
    from .._atomic import TEMP_PREFIX

    for p in out.rglob(TEMP_PREFIX + "*"):
        problems.append(f"temporary file left: {p.relative_to(out)}")
    return problems
