"""Compare two variantshot output folders image by image (bit for bit).

Usage: python compare_outputs.py BEFORE_DIR AFTER_DIR
Exit 0 when every file under shots/ has identical bytes in both folders (for images that
differ it says whether the decoded pixels are still equal); lists every difference (exit 1).
"""
import hashlib
import sys
from pathlib import Path

import numpy as np
from PIL import Image


def files(root: Path):
    return {p.relative_to(root).as_posix(): p for p in sorted((root / "shots").rglob("*")) if p.is_file()}


def main(before: str, after: str) -> int:
    a, b = files(Path(before)), files(Path(after))
    bad = 0
    for name in sorted(set(a) | set(b)):
        if name not in a or name not in b:
            print(f"only in {'after' if name in b else 'before'}: {name}")
            bad += 1
            continue
        ha = hashlib.sha256(a[name].read_bytes()).hexdigest()
        hb = hashlib.sha256(b[name].read_bytes()).hexdigest()
        if ha == hb:
            continue
        try:
            pa, pb = np.asarray(Image.open(a[name])), np.asarray(Image.open(b[name]))
            same_pixels = pa.shape == pb.shape and np.array_equal(pa, pb)
            diff = "" if pa.shape != pb.shape else f", max |diff| {np.abs(pa.astype(int) - pb.astype(int)).max()}"
        except Exception:  # not an image
            same_pixels, diff = False, ""
        print(f"{'bytes differ, pixels identical' if same_pixels else 'PIXELS DIFFER'}: {name}{diff}")
        bad += 1
    print(f"{len(set(a) & set(b))} files compared, {bad} differences")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(*sys.argv[1:3]))
