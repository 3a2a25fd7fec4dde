"""Catalog reading and validation: a table of bad catalogs, each with its exact FILE:ROW:COLUMN.

Row numbers follow RFC 4180 (a quoted field may hold line breaks; the row number is the line
the record starts on, header = 1) and count lines the way an editor does (LF, CRLF, CR).
Each bad case goes through ``expand_catalog`` and must leave the output folder unwritten.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from variantshot.catalog.expand import expand_catalog
from variantshot.catalog.schema import safe_file_name
from variantshot.catalog.validate import read_catalog
from variantshot.errors import InputErrors

HEADER = "sku,product,colour,finish"
GOOD = "B-1,bottle,#112233,matte"


def _crlf(text: str) -> bytes:
    return text.replace("\n", "\r\n").encode("utf-8")


# (case id, catalog bytes, expected [(row, column, message fragment)])
BAD_CATALOGS = [
    ("duplicate-sku", f"{HEADER}\n{GOOD}\nB-2,mug,#445566,satin\nB-1,mug,#445566,satin\n".encode(),
     [(4, "sku", "duplicate SKU 'B-1' (first on row 2)")]),
    ("missing-required-column", b"sku,product,finish\nB-1,bottle,matte\n",
     [(1, "colour", "required column 'colour' is missing")]),
    ("misspelt-required-column", b"sku,product,color,finish\nB-1,bottle,#112233,matte\n",
     [(1, "colour", "the header has 'color'")]),
    ("non-utf8-bytes", f"{HEADER},colourway\n{GOOD},Sea\nB-2,mug,#445566,satin,Caf".encode() + b"\xe9\n",
     [(3, "colourway", "not UTF-8 (0xE9)")]),
    ("utf16-file", f"{HEADER}\n{GOOD}\n".encode("utf-16"), [(1, 1, "UTF-16")]),
    ("quoted-newline-moves-rows",
     f'{HEADER},note\n{GOOD},"two\nlines"\nB-2,mug,#445566,satn,x\n'.encode(),
     [(4, "finish", "did you mean 'satin'")]),
    ("quoted-comma-and-quote",
     f'{HEADER},note\nB-1,bottle,#112233,matte,"a, ""b"", c"\nB-2,mugg,#445566,satin,"d,\ne"\nB-3,mug,#1,satin,\n'.encode(),
     [(3, "product", "did you mean 'mug'"), (5, "colour", "#RRGGBB")]),
    ("bom-and-crlf", b"\xef\xbb\xbf" + _crlf(f"{HEADER}\n{GOOD}\nB-2,botle,#445566,satin\n"),
     [(3, "product", "'botle' is not a known product; did you mean 'bottle'?")]),
    ("cr-only-line-ends", f"{HEADER}\r{GOOD}\rB-2,mug,#44556,satin\r".encode(),
     [(3, "colour", "six hexadecimal digits")]),
    ("empty-lines-are-skipped", f'\n{HEADER}\n\n{GOOD}\n\n , , , \nB-2,mug,"lab(50,0)",satin\n'.encode(),
     [(7, "colour", "three numbers")]),
    ("unknown-angle-suggests", f"{HEADER},angles\n{GOOD},front;thre-quarter-left\n".encode(),
     [(2, "angles", "did you mean 'three-quarter-left'")]),
    ("empty-sku", f"{HEADER}\n{GOOD}\n ,mug,#445566,satin\n".encode(), [(3, "sku", "SKU is empty")]),
    ("sku-case-clash", f"{HEADER}\nabc,bottle,#112233,matte\nABC,mug,#445566,satin\n".encode(),
     [(3, "sku", "same file name")]),
    ("lab-out-of-range", f'{HEADER}\nB-1,bottle,"lab(101, 0, 0)",matte\n'.encode(),
     [(2, "colour", "L* = 101 is outside [0, 100]")]),
    ("unquoted-lab", f"{HEADER}\nB-1,bottle,lab(50, 0, 0),matte\n".encode(),
     [(2, 5, "must be quoted")]),
    ("bad-background", f"{HEADER},background\n{GOOD},whte\n".encode(),
     [(2, "background", "did you mean 'white'")]),
    ("unknown-material-variant", f"{HEADER},material_variant\nS-1,speaker,#112233,matte,sand\n".encode(),
     [(2, "material_variant", "did you mean 'sand-grille'")]),
    ("header-only", f"{HEADER}\n".encode(), [(2, "sku", "no rows")]),
    ("every-error-in-one-pass",
     f"{HEADER}\nB-1,bottle,#zzzzzz,matte\nB-2,kettle,#112233,matte\nB-3,mug,#112233,glossy\n".encode(),
     [(2, "colour", "six hexadecimal"), (3, "product", "'kettle' is not a known product"),
      (4, "finish", "did you mean 'gloss'")]),
]


@pytest.mark.parametrize("case, data, expected", BAD_CATALOGS, ids=[c[0] for c in BAD_CATALOGS])
def test_bad_catalog_reports_exact_place_and_writes_nothing(case, data, expected, tmp_path, repo_dir):
    path = tmp_path / "catalog.csv"
    path.write_bytes(data)
    out = tmp_path / "out"
    with pytest.raises(InputErrors) as info:
        expand_catalog(path, out, templates_dir=repo_dir / "templates")
    lines = [e.format() for e in info.value.errors]
    assert len(lines) == len(expected), lines
    for (row, column, fragment), line in zip(expected, lines):
        assert line.startswith(f"{path}:{row}:{column}: "), line
        assert fragment in line, line
        assert "(accepted: " in line, line
    assert not out.exists()


def test_every_error_line_names_what_is_accepted(tmp_path, repo_dir):
    path = tmp_path / "c.csv"
    path.write_bytes(BAD_CATALOGS[-1][1])
    with pytest.raises(InputErrors) as info:
        read_catalog(path, templates_dir=repo_dir / "templates")
    for e in info.value.errors:
        assert e.accepted, e.format()


def test_spaces_bom_crlf_and_extra_columns_are_accepted(tmp_path, repo_dir):
    text = (" SKU , Product ,Colour, finish ,Colourway, Cap Colour ,angles\n"
            ' B-1 , bottle , "lab(50, 10, -20)" , matte , Deep Sea , #ffffff , front ; top \n')
    path = tmp_path / "c.csv"
    path.write_bytes(b"\xef\xbb\xbf" + _crlf(text))
    cat = read_catalog(path, templates_dir=repo_dir / "templates")
    (v,) = cat.variants
    assert (v.sku, v.product, v.finish, v.colourway, v.angles) == ("B-1", "bottle", "matte", "Deep Sea", ("front", "top"))
    assert v.row["cap_colour"] == "#ffffff"  # an unknown column reaches the template as row.cap_colour
    assert v.line == 2


@pytest.mark.parametrize("sku", ["../x", "a/b", "a\\b", "CON", "nul.txt", "..", ".hidden", "x" * 300, "é/ü", "a:b*c?"])
def test_unsafe_skus_map_to_safe_names(sku):
    name = safe_file_name(sku)
    assert name and "/" not in name and "\\" not in name
    assert not name.startswith((".", "-")) and len(name) <= 96
    assert name.split(".")[0].lower() not in {"con", "nul"}
    assert all(c.isascii() and (c.isalnum() or c in "._-") for c in name)


def test_unsafe_skus_never_write_outside_the_output_folder(tmp_path, repo_dir):
    skus = ["../x", "a/b", "a_b", "CON", "..", "/etc/passwd", "ok-1"]
    rows = "\n".join(f'"{s}",bottle,#112233,matte' for s in skus)
    path = tmp_path / "c.csv"
    path.write_text(f"{HEADER}\n{rows}\n", encoding="utf-8")
    out = tmp_path / "out"
    before = {p for p in tmp_path.rglob("*")}
    _, written = expand_catalog(path, out, templates_dir=repo_dir / "templates")
    assert len(written) == len(skus) and len({p.name for p in written}) == len(skus)
    new = {p for p in tmp_path.rglob("*")} - before
    scenes = (out / "scenes").resolve()
    for p in new:
        assert p == out or p.resolve() == scenes or p.resolve().parent == scenes, p
    assert (out / "scenes" / "ok-1.gltf").is_file() and (out / "scenes" / "a_b.gltf").is_file()
    cat = read_catalog(path, templates_dir=repo_dir / "templates")
    mapped = [w.format() for w in cat.warnings]
    assert len(mapped) == 5 and all("is not a safe file name; its files are named" in w for w in mapped)
    assert mapped[0].startswith(f"{path}:2:sku: SKU '../x'")


def test_row_numbers_stay_exact_over_many_multiline_rows(tmp_path, repo_dir):
    # every third row holds a quoted two-line note, so row k starts on line 2 + k + (k + 2) // 3
    # (RFC 4180 records; the speed of big catalogs is measured by tests/benchmarks/bench_catalog.py)
    rows, line, starts = [], 2, []
    for i in range(3000):
        note = '"two\nlines"' if i % 3 == 0 else "one"
        rows.append(f"SKU-{i:05d},bottle,#{i:06x},matte,{note}")
        starts.append(line)
        line += 2 if i % 3 == 0 else 1
    rows[-1] = rows[-1].replace(",matte,", ",mattte,")
    path = tmp_path / "big.csv"
    path.write_text(f"{HEADER},note\n" + "\n".join(rows) + "\n", encoding="utf-8")
    with pytest.raises(InputErrors) as info:
        read_catalog(path, templates_dir=repo_dir / "templates")
    (err,) = info.value.errors
    assert (err.row, err.column) == (starts[-1], "finish")
    assert starts[-1] == len(path.read_text().splitlines())  # the last row starts on the last line


def test_libraries_are_found_next_to_the_catalog(tmp_path, repo_dir):
    # the demo catalog finds ../templates by itself
    cat = read_catalog(repo_dir / "catalog" / "demo.csv")
    assert Path(cat.library.templates_dir).resolve() == (repo_dir / "templates").resolve()
    assert {"bottle", "mug", "speaker"} <= set(cat.library.products)


def test_a_flood_of_errors_is_capped_with_a_count(tmp_path, repo_dir):
    from variantshot.catalog.validate import MAX_REPORTED_ERRORS

    rows = "\n".join(f"S-{i},bottle,#12,matte" for i in range(MAX_REPORTED_ERRORS + 40))
    path = tmp_path / "c.csv"
    path.write_text(f"{HEADER}\n{rows}\n")
    with pytest.raises(InputErrors) as info:
        read_catalog(path, templates_dir=repo_dir / "templates")
    errors = info.value.errors
    assert len(errors) == MAX_REPORTED_ERRORS + 1
    assert errors[-1].format() == f"{path}: ... and 40 more error(s) not shown (the first {MAX_REPORTED_ERRORS} are above)"
