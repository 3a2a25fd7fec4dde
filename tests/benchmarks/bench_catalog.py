"""Catalog stage throughput: read + validate a 100,000-row catalog; check (templates expanded in
memory) a 2,000-row one; expand and plan the demo.

Run: ``python tests/benchmarks/bench_catalog.py [ROWS]``; prints one JSON line.
The generated catalog mixes hex, lab() and lab50() colours, quoted fields with commas and an
extra column, over the demo products and finishes (row generation is not timed).
"""

from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


def make_catalog(path: Path, rows: int) -> None:
    products = [("bottle", "matte"), ("mug", "satin"), ("speaker", "soft-touch"), ("bottle", "gloss")]
    lines = ["sku,product,colourway,colour,finish,angles,note"]
    for i in range(rows):
        product, finish = products[i % len(products)]
        k = i % 3
        colour = (f"#{(i * 2654435761) & 0xFFFFFF:06x}" if k == 0
                  else f'"lab({20 + i % 70}, {i % 50 - 25}, {i % 40 - 20})"' if k == 1
                  else f'"lab50({30 + i % 60}, {i % 30 - 15}, {i % 20 - 10})"')
        angles = "front;three-quarter-left" if i % 5 == 0 else ""
        lines.append(f'SKU-{i:07d},{product},Colourway {i % 11},{colour},{finish},{angles},"note, row {i}"')
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def time_read(path: Path) -> tuple[float, int]:
    from variantshot.catalog.validate import read_catalog

    t0 = time.perf_counter()
    catalog = read_catalog(path, templates_dir=REPO / "templates")
    return time.perf_counter() - t0, len(catalog.variants)


def time_check(tmp: Path, rows: int = 2000) -> dict:
    """Full ``check`` (every template expanded and checked in memory) of a smaller catalog."""
    from variantshot.catalog.validate import check_catalog

    path = tmp / "check.csv"
    make_catalog(path, rows)
    t0 = time.perf_counter()
    report = check_catalog(path, templates_dir=REPO / "templates")
    seconds = time.perf_counter() - t0
    return {"check_rows": len(report.scenes), "check_s": round(seconds, 3),
            "check_ms_per_row": round(1000 * seconds / rows, 2)}


def time_demo() -> dict:
    from variantshot.batch.plan import plan_shots
    from variantshot.catalog.expand import expand_catalog

    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        _, written = expand_catalog(REPO / "catalog" / "demo.csv", Path(tmp) / "out")
        t1 = time.perf_counter()
        shots = plan_shots(REPO / "catalog" / "demo.csv", Path(tmp) / "out", None)
        t2 = time.perf_counter()
    return {"demo_scenes": len(written), "demo_expand_s": round(t1 - t0, 3),
            "demo_shots": len(shots), "demo_plan_s": round(t2 - t1, 3)}


def main() -> None:
    rows = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "big.csv"
        make_catalog(path, rows)
        size = path.stat().st_size
        time_read(path)  # warm imports and the colour parser's code paths
        seconds, n = min((time_read(path) for _ in range(2)), key=lambda r: r[0])
        check = time_check(Path(tmp))
    result = {"bench": "catalog", "rows": n, "csv_bytes": size, "read_validate_s": round(seconds, 3),
              "rows_per_s": round(n / seconds), **check, **time_demo()}
    print(json.dumps(result))


if __name__ == "__main__":
    main()
