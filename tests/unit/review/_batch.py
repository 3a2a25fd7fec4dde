"""A synthetic batch output folder (manifest.json + shots/*.png) for the review tests.

The images are drawn with Pillow: a white frame with a product-shaped block in the variant's
colour and a grey contact shadow under it.  Nothing here is a check value: tests measure these
images with their own arithmetic (pixel counts) or run them through outside readers.
"""

from __future__ import annotations

import hashlib
import io
import json
from pathlib import Path

from PIL import Image, ImageDraw

DEFAULT_VARIANTS = [
    # sku, product, colourway, finish, #rrggbb
    ("MUG-001-RED", "mug", "Brick red", "gloss", "#B03A2E"),
    ("MUG-001-BLU", "mug", "Harbour blue", "matte", "#2E5E8C"),
    ("LAMP-7-OAK", "lamp", "Natural oak with a very long colourway name to wrap", "satin", "#A67B4F"),
]
DEFAULT_ANGLES = ["front", "three-quarter"]


def draw_shot(size: int, colour_hex: str, *, fill_frac: float = 0.85, dx: int = 0,
              transparent: bool = False) -> Image.Image:
    """A packshot-like image: the product's bounding box is ``fill_frac`` of the frame."""
    rgb = tuple(int(colour_hex[i:i + 2], 16) for i in (1, 3, 5))
    mode, bg = ("RGBA", (0, 0, 0, 0)) if transparent else ("RGB", (255, 255, 255))
    im = Image.new(mode, (size, size), bg)
    d = ImageDraw.Draw(im)
    side = round(fill_frac * size)
    x0 = (size - side) // 2 + dx
    y0 = (size - side) // 2
    if not transparent:  # contact shadow just under the product
        d.ellipse([x0 + side // 8, y0 + side - 4, x0 + side - side // 8, y0 + side + 1],
                  fill=(200, 200, 200))
    d.rectangle([x0 + side // 4, y0, x0 + 3 * side // 4 - 1, y0 + side - 1], fill=rgb)
    d.rectangle([x0, y0 + side // 3, x0 + side - 1, y0 + side - 1], fill=rgb)
    return im


def png_bytes(im: Image.Image) -> bytes:
    buf = io.BytesIO()
    im.save(buf, format="PNG")
    return buf.getvalue()


def write_shot(out: Path, shot_id: str, im: Image.Image) -> dict:
    data = png_bytes(im)
    rel = f"shots/{shot_id}.png"
    (out / "shots").mkdir(parents=True, exist_ok=True)
    (out / rel).write_bytes(data)
    sha = hashlib.sha256(data).hexdigest()
    return {"image": rel,
            "images": [{"path": rel, "format": "png", "width": im.size[0], "height": im.size[1],
                        "bytes": len(data), "sha256": sha}],
            "content_hash": sha}


def make_batch(out: Path, variants=DEFAULT_VARIANTS, angles=DEFAULT_ANGLES, *, size: int = 120,
               qa: bool = True, failed: tuple[str, ...] = ()) -> dict:
    """Write manifest.json and shots/ into ``out``; return the manifest's shots dict."""
    from variantshot.review.qa import run_qa_on_file

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    shots = {}
    for sku, product, colourway, finish, hexcode in variants:
        for angle in angles:
            sid = f"{sku}--{angle}"
            entry = {"id": sid, "sku": sku, "product": product, "colourway": colourway,
                     "finish": finish, "angle": angle, "background": "white", "key": "0" * 16,
                     "status": "rendered", "error": None, "rendered_at": "2026-01-01T00:00:00+00:00",
                     "seconds": 0.1}
            if sid in failed:
                entry.update(status="failed", error="RenderError: synthetic failure", image=None,
                             images=[], content_hash=None, qa=None)
            else:
                entry.update(write_shot(out, sid, draw_shot(size, hexcode,
                                                            dx=0 if angle == "front" else 0)))
                entry["qa"] = run_qa_on_file(out / entry["image"]).to_dict() if qa else None
            shots[sid] = entry
    write_manifest(out, shots)
    return shots


def write_manifest(out: Path, shots: dict) -> None:
    manifest = {"format": 1, "renderer": "variantshot test", "updated": "2026-01-01T00:00:00+00:00",
                "shots": shots}
    (Path(out) / "manifest.json").write_text(json.dumps(manifest, indent=2), encoding="utf-8")


def rerender(out: Path, shot_id: str, im: Image.Image) -> dict:
    """Replace one shot's image and manifest entry, as a re-render would."""
    out = Path(out)
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    manifest["shots"][shot_id].update(write_shot(out, shot_id, im))
    write_manifest(out, manifest["shots"])
    return manifest["shots"]
