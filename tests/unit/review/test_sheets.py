"""review.sheets: PNG grid, multi-page PDF (read back with pypdf), HTML (parsed with html.parser), exports."""

import csv
import dataclasses
import html.parser
import json

import numpy as np
import pytest
from PIL import Image

from unit.review._batch import DEFAULT_VARIANTS, make_batch
from variantshot.errors import InputError
from variantshot.review import approvals, sheets

SCRIPT = "<script>alert('x')</script>"


@pytest.fixture
def batch(tmp_path):
    out = tmp_path / "out"
    variants = DEFAULT_VARIANTS + [
        ("CUP-9", "cup", f"Ink {SCRIPT}", "matte", "#223344"),
        ("CUP-10", "cup", "Chalk", "matte", "#E0E0D8"),
    ]
    make_batch(out, variants=variants, failed=("LAMP-7-OAK--three-quarter",))
    approvals.record_decision(out, ["MUG-001-RED*", "CUP-9--front"], "approved", by="ana")
    return out


class _Collect(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.imgs, self.scripts, self.selects, self.text = [], 0, [], []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.imgs.append(a)
        elif tag == "script":
            self.scripts += 1
        elif tag == "select":
            self.selects.append(a.get("id"))

    def handle_data(self, data):
        self.text.append(data)


def test_png_sheet_has_one_fixed_size_cell_per_variant_and_angle(batch):
    paths = sheets.build_sheets(batch, formats=("png",))
    png = batch / "sheets/contact-sheet.png"
    assert png in paths
    with Image.open(png) as im:
        w, h = im.size
    manifest = approvals.load_manifest(batch)
    products = {e["product"] for e in manifest.values()}
    n_rows = len({e["sku"] for e in manifest.values()})
    n_cols = max(len({e["angle"] for e in manifest.values() if e["product"] == p}) for p in products)
    assert w == max(760, 2 * sheets.MARGIN + n_cols * sheets.CELL_W + (n_cols - 1) * 8)
    # one section per product: its name, its own angle columns, then one row per variant
    assert h == (sheets.HEADER_H + len(products) * (sheets.PRODUCT_HEADER_H + sheets.ANGLE_HEADER_H)
                 + n_rows * (sheets.CELL_H + 8) + sheets.MARGIN)


def test_each_product_gets_its_own_angle_columns(tmp_path):
    # a mug shown from front and top and a bottle from front and back: two sections of two
    # columns each, rather than one grid of three columns with empty cells
    out = tmp_path / "out"
    make_batch(out, variants=DEFAULT_VARIANTS[:1], angles=["front", "top"])
    groups = sheets._groups(sheets.collect_cells(out))
    assert [(p, a) for p, a, _ in groups] == [(DEFAULT_VARIANTS[0][1], ["front", "top"])]
    cells = sheets.collect_cells(out)
    other = [dataclasses.replace(c, product="bottle", sku="BTL-1", angle=a)
             for c, a in zip(cells, ["front", "back"])]
    groups = sheets._groups(cells + other)
    assert [a for _, a, _ in groups] == [["front", "top"], ["front", "back"]]
    assert all(len(by_angle) == len(a) for _, a, rows in groups for _, by_angle in rows)


def test_pdf_has_expected_pages_and_images(batch):
    pypdf = pytest.importorskip("pypdf")
    sheets.build_sheets(batch, formats=("pdf",), rows_per_page=2)
    reader = pypdf.PdfReader(str(batch / "sheets/contact-sheet.pdf"))
    assert len(reader.pages) == 3  # 5 variants, 2 per page
    assert [len(p.images) for p in reader.pages] == [1, 1, 1]  # each page is one raster
    sizes = {(round(float(p.mediabox.width)), round(float(p.mediabox.height))) for p in reader.pages}
    assert len(sizes) == 1  # pages of even size, the last one too


def test_html_escapes_catalog_values_and_links_every_image(batch):
    sheets.build_sheets(batch, formats=("html",))
    text = (batch / "sheets/contact-sheet.html").read_text(encoding="utf-8")
    p = _Collect()
    p.feed(text)
    manifest = approvals.load_manifest(batch)
    rendered = [sid for sid, e in manifest.items() if e["status"] == "rendered"]
    assert len(p.imgs) == len(rendered)
    for img in p.imgs:  # relative paths that resolve from sheets/ to the files
        assert not img["src"].startswith(("http:", "https:", "/", "file:"))
        assert (batch / "sheets" / img["src"]).resolve().is_file()
    assert p.scripts == 1  # only our own filter script; the catalog value stayed text
    assert SCRIPT not in text and "&lt;script&gt;" in text
    assert any(SCRIPT in t for t in p.text)
    assert p.selects == ["f-product", "f-qa", "f-approval"]
    assert "http://" not in text and "https://" not in text  # no network resources


def test_approved_only_and_export(batch):
    import hashlib

    # an extra, smaller JPEG of one approved shot, listed in the manifest as the batch lists sizes
    small = batch / "shots/CUP-9--front@60.jpg"
    with Image.open(batch / "shots/CUP-9--front.png") as im:
        im.convert("RGB").resize((60, 60)).save(small, format="JPEG")
    manifest = json.loads((batch / "manifest.json").read_text())
    manifest["shots"]["CUP-9--front"]["images"].append(
        {"path": "shots/CUP-9--front@60.jpg", "format": "jpg", "width": 60, "height": 60})
    (batch / "manifest.json").write_text(json.dumps(manifest))

    paths = sheets.build_sheets(batch, approved_only=True, formats=("png", "html"))
    assert batch / "sheets/approved-sheet.png" in paths
    p = _Collect()
    p.feed((batch / "sheets/approved-sheet.html").read_text(encoding="utf-8"))
    assert len(p.imgs) == 3
    rows = list(csv.DictReader((batch / "sheets/approved.csv").open(encoding="utf-8")))
    data = json.loads((batch / "sheets/approved.json").read_text(encoding="utf-8"))["files"]
    assert [r["path"] for r in rows] == [d["path"] for d in data] == [
        "shots/MUG-001-RED--front.png", "shots/MUG-001-RED--three-quarter.png",
        "shots/CUP-9--front.png", "shots/CUP-9--front@60.jpg"]
    assert [d["primary"] for d in data] == [True, True, True, False]
    for r in data:  # sizes and hashes as the files, Pillow and hashlib report them
        f = batch / r["path"]
        assert r["bytes"] == f.stat().st_size
        assert r["sha256"] == hashlib.sha256(f.read_bytes()).hexdigest()
        with Image.open(f) as im:
            assert (r["width"], r["height"]) == im.size
    assert data[3]["format"] == "jpg" and data[3]["width"] == 60
    assert rows[2]["colourway"] == f"Ink {SCRIPT}"


def test_bad_format_is_an_input_error(batch):
    with pytest.raises(InputError, match="tiff"):
        sheets.build_sheets(batch, formats=("png", "tiff"))


def test_text_fitting_never_exceeds_width():
    font = sheets._font(13)
    long = "Natural oak with a very long colourway name that will never fit in one cell"
    for line in sheets._wrap(long, font, 200, 2):
        assert font.getlength(line) <= 200
    assert sheets._ellipsis(long, font, 120).endswith("…")
    assert font.getlength(sheets._ellipsis(long, font, 120)) <= 120
    assert sheets._ellipsis("short", font, 120) == "short"


def test_transparent_shots_show_a_checkerboard_and_opaque_ones_do_not(tmp_path):
    from unit.review._batch import draw_shot, rerender, write_manifest

    out = tmp_path / "out"
    make_batch(out, variants=DEFAULT_VARIANTS[:1], angles=["front", "back"])
    shots = rerender(out, "MUG-001-RED--back", draw_shot(120, "#B03A2E", transparent=True))
    shots["MUG-001-RED--back"]["background"] = "transparent"
    write_manifest(out, shots)
    sheets.build_sheets(out, formats=("png",))
    with Image.open(out / "sheets/contact-sheet.png") as im:
        arr = np.asarray(im.convert("RGB"))
    y0 = sheets.HEADER_H + sheets.PRODUCT_HEADER_H + sheets.ANGLE_HEADER_H + sheets.PAD
    x_front = sheets.MARGIN + sheets.PAD
    x_back = x_front + sheets.CELL_W + 8
    box = (slice(y0, y0 + 20), slice(None))  # the top band of the thumbnails: background only
    checker = np.all(arr[box] == (226, 226, 230), axis=2)
    assert not checker[:, x_front:x_front + sheets.THUMB].any()
    assert checker[:, x_back:x_back + sheets.THUMB].mean() > 0.3
