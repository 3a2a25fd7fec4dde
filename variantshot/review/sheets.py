"""Contact sheets of a batch (PNG, multi-page PDF, HTML) and the hand-over export of approved shots.

Everything is built from ``<out>/manifest.json``, ``<out>/approvals.json`` and the image files, so
a sheet can be rebuilt at any time.  Layout: one row per variant (in manifest order), one column
per angle; each cell is a fixed-size thumbnail box (the image scaled to fit, never cropped), its
caption (SKU, colourway, finish, angle), a QA badge and an approval badge.  Badges carry a drawn
symbol and a word as well as a colour, so they read without colour too.

Files written into ``<out>/sheets/``: ``contact-sheet.{png,pdf,html}`` (or ``approved-sheet.*``
with ``approved_only``), and always ``approved.csv`` / ``approved.json`` listing the approved
shots with their file paths, pixel sizes and byte sizes.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import json
import math
import urllib.parse
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._atomic import atomic_write
from ..errors import InputError
from . import approvals as _approvals
from .qa import CAUTION, FAIL, PASS, WARN

__all__ = ["SheetCell", "collect_cells", "build_sheets", "export_approved", "SHEET_FORMATS"]

SHEET_FORMATS = ("png", "pdf", "html")
EXPORT_FIELDS = ("id", "sku", "colourway", "finish", "angle", "primary", "path", "format", "width",
                 "height", "bytes", "sha256")

# --- layout (pixels) ---------------------------------------------------------------------------
THUMB = 220  # thumbnail box side
PAD = 12  # cell padding
CELL_W = THUMB + 2 * PAD
CAPTION_H = 146
CELL_H = PAD + THUMB + CAPTION_H
MARGIN = 24
HEADER_H = 136
ANGLE_HEADER_H = 28
PRODUCT_HEADER_H = 34
ROWS_PER_PDF_PAGE = 3

# colours: dark enough for white text (contrast >= 4.5:1 against white)
_INK = (28, 28, 30)
_MUTED = (92, 92, 98)
_PAPER = (255, 255, 255)
_CELL_BG = (246, 246, 248)
_LINE = (210, 210, 216)
_QA_COLOUR = {PASS: (22, 120, 55), WARN: (166, 94, 0), FAIL: (183, 28, 28), None: (110, 110, 116)}
_QA_WORD = {PASS: "QA PASS", WARN: "QA WARN", FAIL: "QA FAIL", None: "NO QA"}
_APPROVAL_COLOUR = {
    _approvals.APPROVED: (26, 82, 170),
    _approvals.REJECTED: (120, 30, 30),
    _approvals.PENDING: (110, 110, 116),
}
_APPROVAL_WORD = {_approvals.APPROVED: "APPROVED", _approvals.REJECTED: "REJECTED",
                  _approvals.PENDING: "PENDING"}


@dataclass(frozen=True)
class SheetCell:
    """One shot as a sheet shows it."""

    id: str
    sku: str
    product: str
    colourway: str
    finish: str
    angle: str
    status: str  # manifest status: "rendered" | "failed"
    qa_status: str | None
    qa_notes: tuple[tuple[str, str], ...]  # ("! noise 0.18", message) of checks that did not pass
    approval: str
    image: str | None  # relative to the output folder
    image_path: Path | None
    error: str | None
    transparent: bool = False  # the shot has a transparent background


def _qa_notes(qa: dict | None) -> tuple[tuple[str, str], ...]:
    """``("! noise 0.18", full message)`` for every check that did not pass."""
    notes = []
    for c in (qa or {}).get("checks", []) or []:
        st = c.get("status")
        if st in (WARN, FAIL):
            v = c.get("value")
            fig = "" if v is None else (f" {v:.2f}" if isinstance(v, (int, float)) else f" {v}")
            notes.append((f"{'!' if st == WARN else 'x'} {c.get('name', '?')}{fig}",
                          str(c.get("message", ""))))
    return tuple(notes)


def collect_cells(out_dir, *, approved_only: bool = False) -> list[SheetCell]:
    """Every shot of the manifest (or only the approved ones) as :class:`SheetCell`, in order."""
    out_dir = Path(out_dir)
    shots = _approvals.load_manifest(out_dir)
    states = _approvals.approval_states(out_dir, shots)
    cells = []
    for sid, e in shots.items():
        state = states[sid]
        if approved_only and state != _approvals.APPROVED:
            continue
        image = e.get("image")
        path = (out_dir / image) if image else None
        qa = e.get("qa") or None
        cells.append(SheetCell(
            id=sid,
            sku=str(e.get("sku", sid)),
            product=str(e.get("product", "")),
            colourway=str(e.get("colourway") or ""),
            finish=str(e.get("finish") or ""),
            angle=str(e.get("angle", "")),
            status=str(e.get("status", "rendered")),
            qa_status=(qa or {}).get("status"),
            qa_notes=_qa_notes(qa),
            approval=state,
            image=image,
            image_path=path if (path is not None and path.is_file()) else None,
            error=e.get("error"),
            transparent=e.get("background") == "transparent",
        ))
    return cells


def _groups(cells: list[SheetCell]) -> list[tuple[str, list[str], list[tuple[str, dict[str, SheetCell]]]]]:
    """The sheet's sections: one per product, each ``(product, angles, rows)``.

    Products differ in their angles (a mug is shown from the handle side, a bottle from the
    other), so one grid over every angle of a catalog would be mostly empty cells; each product
    gets its own columns instead.  Angles and rows keep their first-seen order; a row is
    ``(sku, {angle: cell})``.
    """
    groups: dict[str, tuple[list[str], dict[str, dict[str, SheetCell]]]] = {}
    for c in cells:
        angles, rows = groups.setdefault(c.product, ([], {}))
        if c.angle not in angles:
            angles.append(c.angle)
        rows.setdefault(c.sku, {})[c.angle] = c
    return [(product, angles, list(rows.items())) for product, (angles, rows) in groups.items()]


def _paginate(groups, rows_per_page: int):
    """Split the sections into pages of at most ``rows_per_page`` variant rows each."""
    pages, page, used = [], [], 0
    for product, angles, rows in groups:
        i = 0
        while i < len(rows):
            take = min(rows_per_page - used, len(rows) - i)
            page.append((product, angles, rows[i:i + take]))
            used += take
            i += take
            if used == rows_per_page:
                pages.append(page)
                page, used = [], 0
    if page or not pages:
        pages.append(page)
    return pages


# --- fonts and text fitting ----------------------------------------------------------------------
_FONT_CACHE: dict = {}


def _font(size: int, bold: bool = False):
    """DejaVu Sans when the system has it, else Pillow's built-in scalable font."""
    from PIL import ImageFont

    key = (size, bold)
    if key not in _FONT_CACHE:
        name = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
        try:
            _FONT_CACHE[key] = ImageFont.truetype(name, size)
        except OSError:
            _FONT_CACHE[key] = ImageFont.load_default(size=size)
    return _FONT_CACHE[key]


def _ellipsis(text: str, font, max_w: float) -> str:
    """``text`` shortened with a trailing ellipsis so that it fits ``max_w`` pixels."""
    if font.getlength(text) <= max_w:
        return text
    ell = "…" if font.getlength("…") > 0 else "..."
    lo, hi = 0, len(text)
    while lo < hi:  # longest prefix that fits with the ellipsis
        mid = (lo + hi + 1) // 2
        if font.getlength(text[:mid].rstrip() + ell) <= max_w:
            lo = mid
        else:
            hi = mid - 1
    return text[:lo].rstrip() + ell


def _wrap(text: str, font, max_w: float, max_lines: int) -> list[str]:
    """Word-wrap into at most ``max_lines`` lines; the last line is ellipsised if text remains."""
    words = text.split()
    lines: list[str] = []
    cur = ""
    i = 0
    while i < len(words):
        trial = f"{cur} {words[i]}".strip()
        if font.getlength(trial) <= max_w or not cur:
            cur = trial
            i += 1
        else:
            lines.append(cur)
            cur = ""
            if len(lines) == max_lines - 1:
                break
    rest = " ".join(([cur] if cur else []) + words[i:])
    if rest:
        lines.append(rest)
    lines = lines[:max_lines]
    return [_ellipsis(line, font, max_w) for line in lines]


# --- PNG / PDF drawing ---------------------------------------------------------------------------
def _thumbnail(path: Path | None):
    """The shot scaled to fit the THUMB box (transparent shots over a light checkerboard)."""
    from PIL import Image

    if path is None:
        return None
    try:
        with Image.open(path) as im:
            im.load()
            im = im.convert("RGBA")
    except (OSError, ValueError):
        return None
    # scale to fit the box, up as well as down, so every thumbnail has the same size
    from PIL import ImageOps

    im = ImageOps.contain(im, (THUMB, THUMB), Image.Resampling.LANCZOS)
    if im.getextrema()[3][0] < 255:  # some transparency: show it over a checkerboard
        w, h = im.size
        yy, xx = np.mgrid[0:h, 0:w]
        dark = ((xx // 8 + yy // 8) % 2).astype(bool)
        board = np.full((h, w, 4), 255, np.uint8)
        board[dark, :3] = (226, 226, 230)
        board = Image.fromarray(board, "RGBA")
        board.alpha_composite(im)
        im = board
    return im.convert("RGB")


def _badge_width(word: str) -> int:
    return int(_font(12, bold=True).getlength(word)) + 31


def _badge(draw, x: int, y: int, kind: str, word: str, colour, *, outline_only: bool = False) -> int:
    """Draw a rounded badge with a drawn symbol and a word; return its width."""
    font = _font(12, bold=True)
    h = 22
    w = _badge_width(word)
    fill = None if outline_only else colour
    draw.rounded_rectangle([x, y, x + w, y + h], radius=6, fill=fill, outline=colour, width=2)
    ink = colour if outline_only else (255, 255, 255)
    cx, cy = x + 11, y + h // 2
    if kind in ("pass", "approved"):  # tick
        draw.line([(cx - 5, cy), (cx - 1, cy + 4), (cx + 6, cy - 5)], fill=ink, width=3)
    elif kind in ("fail", "rejected"):  # cross
        draw.line([(cx - 5, cy - 5), (cx + 5, cy + 5)], fill=ink, width=3)
        draw.line([(cx - 5, cy + 5), (cx + 5, cy - 5)], fill=ink, width=3)
    elif kind == "warn":  # exclamation mark
        draw.line([(cx, cy - 6), (cx, cy + 2)], fill=ink, width=3)
        draw.ellipse([cx - 2, cy + 4, cx + 2, cy + 8], fill=ink)
    else:  # pending / no QA: an open circle
        draw.ellipse([cx - 5, cy - 5, cx + 5, cy + 5], outline=ink, width=2)
    draw.text((x + 22, cy), word, font=font, fill=ink, anchor="lm")
    return w


def _draw_cell(page, draw, x: int, y: int, cell: SheetCell | None) -> None:
    if cell is None:  # this variant has no shot from this angle: a quiet placeholder
        for i in range(x, x + CELL_W, 12):  # dashed outline
            draw.line([(i, y), (min(i + 6, x + CELL_W - 1), y)], fill=_LINE)
            draw.line([(i, y + CELL_H - 1), (min(i + 6, x + CELL_W - 1), y + CELL_H - 1)], fill=_LINE)
        for j in range(y, y + CELL_H, 12):
            draw.line([(x, j), (x, min(j + 6, y + CELL_H - 1))], fill=_LINE)
            draw.line([(x + CELL_W - 1, j), (x + CELL_W - 1, min(j + 6, y + CELL_H - 1))], fill=_LINE)
        draw.text((x + CELL_W // 2, y + PAD + THUMB // 2), "no shot from this angle", font=_font(12),
                  fill=(150, 150, 156), anchor="mm")
        return
    draw.rectangle([x, y, x + CELL_W - 1, y + CELL_H - 1], fill=_CELL_BG, outline=_LINE)
    bx, by = x + PAD, y + PAD
    draw.rectangle([bx - 1, by - 1, bx + THUMB, by + THUMB], fill=_PAPER, outline=_LINE)
    thumb = _thumbnail(cell.image_path)
    if thumb is not None:
        page.paste(thumb, (bx + (THUMB - thumb.size[0]) // 2, by + (THUMB - thumb.size[1]) // 2))
    else:
        msg = "render failed" if cell.status != "rendered" else "image missing"
        draw.text((bx + THUMB // 2, by + THUMB // 2 - 10), msg, font=_font(14, True),
                  fill=_QA_COLOUR[FAIL], anchor="mm")
        if cell.error:
            for i, line in enumerate(_wrap(cell.error, _font(11), THUMB - 16, 3)):
                draw.text((bx + 8, by + THUMB // 2 + 6 + 14 * i), line, font=_font(11), fill=_MUTED)
    ty = by + THUMB + 8
    tw = CELL_W - 2 * PAD
    draw.text((bx, ty), _ellipsis(cell.sku, _font(15, True), tw), font=_font(15, True), fill=_INK)
    ty += 20
    lines = _wrap(cell.colourway or "—", _font(13), tw, 2)
    for line in lines:
        draw.text((bx, ty), line, font=_font(13), fill=_INK)
        ty += 17
    ty += 17 * (2 - len(lines))  # keep the rows below aligned across cells
    draw.text((bx, ty), _ellipsis(f"finish: {cell.finish or '—'}", _font(12), tw), font=_font(12),
              fill=_INK)
    ty += 16
    draw.text((bx, ty), _ellipsis(f"angle: {cell.angle}", _font(12), tw), font=_font(12), fill=_MUTED)
    ty += 20
    if cell.status != "rendered":
        w = _badge(draw, bx, ty, FAIL, "NOT RENDERED", _QA_COLOUR[FAIL])
    else:
        qa_kind = cell.qa_status if cell.qa_status in (PASS, WARN, FAIL) else "none"
        qa_key = cell.qa_status if cell.qa_status in (PASS, WARN, FAIL) else None
        w = _badge(draw, bx, ty, qa_kind, _QA_WORD[qa_key], _QA_COLOUR[qa_key],
                   outline_only=qa_key is None)
    word = _APPROVAL_WORD[cell.approval]
    ax = bx + w + 6
    if cell.status == "rendered":  # a shot without an image has nothing to approve
        if ax + _badge_width(word) > bx + tw:  # no room beside the QA badge: the next line
            ax, ty = bx, ty + 26
        _badge(draw, ax, ty, cell.approval, word, _APPROVAL_COLOUR[cell.approval],
               outline_only=cell.approval == _approvals.PENDING)
    ty += 27
    if cell.qa_notes:
        note = ", ".join(short for short, _ in cell.qa_notes)
        colour = _QA_COLOUR[FAIL] if cell.qa_status == FAIL else _QA_COLOUR[WARN]
        draw.text((bx, ty), _ellipsis(note, _font(11), tw), font=_font(11), fill=colour)


def _draw_page(title: str, subtitle: str, groups, page_label: str = "", min_rows: int = 1):
    from PIL import Image, ImageDraw

    n_cols = max([1] + [len(angles) for _, angles, _ in groups])
    n_rows = sum(len(rows) for _, _, rows in groups)
    width = 2 * MARGIN + n_cols * CELL_W + (n_cols - 1) * 8
    width = max(width, 760)
    height = (HEADER_H + len(groups) * (PRODUCT_HEADER_H + ANGLE_HEADER_H)
              + max(1, min_rows, n_rows) * (CELL_H + 8) + MARGIN)
    page = Image.new("RGB", (width, height), _PAPER)
    draw = ImageDraw.Draw(page)
    tw = width - 2 * MARGIN
    title_w = tw - (int(_font(13).getlength(page_label)) + 16 if page_label else 0)  # room for "page i of n"
    draw.text((MARGIN, MARGIN), _ellipsis(title, _font(22, True), title_w), font=_font(22, True), fill=_INK)
    y = MARGIN + 32
    for line in _wrap(subtitle, _font(13), tw, 2):
        draw.text((MARGIN, y), line, font=_font(13), fill=_MUTED)
        y += 17
    y += 4
    for line in _wrap("Caution: " + CAUTION, _font(13, True), tw, 2):
        draw.text((MARGIN, y), line, font=_font(13, True), fill=(150, 60, 0))
        y += 17
    if page_label:
        draw.text((width - MARGIN, MARGIN + 6), page_label, font=_font(13), fill=_MUTED, anchor="ra")
    y = HEADER_H
    if not n_rows:
        draw.text((MARGIN, y + 20), "No shots to show.", font=_font(16, True), fill=_MUTED)
    for product, angles, rows in groups:
        draw.line((MARGIN, y + 2, width - MARGIN, y + 2), fill=_MUTED, width=1)
        draw.text((MARGIN, y + 8), _ellipsis(product or "(no product)", _font(16, True), tw),
                  font=_font(16, True), fill=_INK)
        y += PRODUCT_HEADER_H
        for j, angle in enumerate(angles):
            x = MARGIN + j * (CELL_W + 8)
            draw.text((x + PAD, y + 4), _ellipsis(angle.upper(), _font(13, True), CELL_W - 2 * PAD),
                      font=_font(13, True), fill=_MUTED)
        y += ANGLE_HEADER_H
        for _sku, by_angle in rows:
            for j, angle in enumerate(angles):
                _draw_cell(page, draw, MARGIN + j * (CELL_W + 8), y, by_angle.get(angle))
            y += CELL_H + 8
    return page


def _even_heights(pages):
    """Pad pages at the bottom with paper so they all have the tallest page's size."""
    from PIL import Image

    width = max(p.width for p in pages)
    height = max(p.height for p in pages)
    out = []
    for p in pages:
        if p.size != (width, height):
            canvas = Image.new("RGB", (width, height), _PAPER)
            canvas.paste(p, (0, 0))
            p = canvas
        out.append(p)
    return out


def _summary(cells: list[SheetCell]) -> str:
    n_var = len({c.sku for c in cells})
    counts = {k: sum(1 for c in cells if c.approval == k) for k in _APPROVAL_WORD}
    qa = {k: sum(1 for c in cells if c.qa_status == k) for k in (PASS, WARN, FAIL)}
    return (f"{len(cells)} shots, {n_var} variants · QA {qa[PASS]} pass, {qa[WARN]} warn, "
            f"{qa[FAIL]} fail · {counts['approved']} approved, {counts['rejected']} rejected, "
            f"{counts['pending']} pending")


# --- HTML --------------------------------------------------------------------------------------
def _html(out_dir: Path, cells: list[SheetCell], title: str, built: str) -> str:
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("variantshot.review", "templates"),
        autoescape=True,  # every catalog value is escaped (a '<script>' in a colourway stays text)
        undefined=jinja2.StrictUndefined,
    )
    def src(cell: SheetCell) -> str | None:
        if cell.image_path is None:
            return None
        rel = Path("..") / Path(cell.image)  # sheets/ sits next to shots/
        return urllib.parse.quote(rel.as_posix())

    sections = []
    for product, angles, rows in _groups(cells):
        view_rows = []
        for sku, by_angle in rows:
            first = next(iter(by_angle.values()))
            view_rows.append({
                "sku": sku,
                "product": first.product,
                "colourway": first.colourway,
                "finish": first.finish,
                "cells": [(a, by_angle.get(a), src(by_angle[a]) if a in by_angle else None)
                          for a in angles],
            })
        sections.append({"product": product, "angles": angles, "rows": view_rows})
    return env.get_template("sheet.html.j2").render(
        title=title,
        built=built,
        summary=_summary(cells),
        caution=CAUTION,
        sections=sections,
        products=sorted({c.product for c in cells}),
        qa_words={PASS: "pass", WARN: "warn", FAIL: "fail"},
        n_shots=len(cells),
    )


# --- export ------------------------------------------------------------------------------------
def export_approved(out_dir) -> list[Path]:
    """Write ``sheets/approved.csv`` and ``sheets/approved.json``: the approved shots for hand-over.

    One record per file of every approved shot (the primary image first, then the other formats
    and sizes the batch wrote): id, sku, colourway, finish, angle, primary (true for the image
    the approval was given on), path (relative to the output folder), format, width, height
    (pixels), bytes, sha256.  Sizes and hashes are read from the files themselves; a file the
    manifest lists but the folder lacks is left out.
    """
    import hashlib

    from PIL import Image

    out_dir = Path(out_dir)
    shots = _approvals.load_manifest(out_dir)
    records = []
    for c in collect_cells(out_dir, approved_only=True):
        entry = shots[c.id]
        paths = [c.image] + [i.get("path") for i in entry.get("images") or []]
        seen = set()
        for rel in paths:
            if not rel or rel in seen:
                continue
            seen.add(rel)
            f = out_dir / rel
            if not f.is_file():
                continue
            data = f.read_bytes()
            with Image.open(f) as im:
                w, h = im.size
                fmt = (im.format or f.suffix.lstrip(".")).lower()
            records.append({
                "id": c.id, "sku": c.sku, "colourway": c.colourway, "finish": c.finish,
                "angle": c.angle, "primary": rel == c.image, "path": Path(rel).as_posix(),
                "format": "jpg" if fmt == "jpeg" else fmt, "width": w, "height": h,
                "bytes": len(data), "sha256": hashlib.sha256(data).hexdigest(),
            })
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=EXPORT_FIELDS, lineterminator="\n")
    writer.writeheader()
    writer.writerows(records)
    sheets = out_dir / "sheets"
    return [
        atomic_write(sheets / "approved.csv", buf.getvalue()),
        atomic_write(sheets / "approved.json",
                     json.dumps({"format": 1, "files": records}, indent=2, ensure_ascii=False) + "\n"),
    ]


def build_sheets(out_dir, approved_only: bool = False, formats=SHEET_FORMATS, *,
                 rows_per_page: int = ROWS_PER_PDF_PAGE) -> list[Path]:
    """Build the contact sheets of a batch into ``<out_dir>/sheets/`` and export the approved shots.

    Parameters
    ----------
    out_dir : path
        A batch output folder (``manifest.json``, ``shots/``, optionally ``approvals.json``).
    approved_only : bool
        Only approved shots (the hand-over sheet, ``approved-sheet.*``); otherwise every shot
        (``contact-sheet.*``).
    formats : iterable of {"png", "pdf", "html"}
    rows_per_page : int
        Variants per PDF page.

    Returns
    -------
    list of Path
        The files written, sheets first, then ``approved.csv`` and ``approved.json``.

    Raises
    ------
    InputError
        Unknown format, or a folder without a manifest.
    """
    out_dir = Path(out_dir)
    formats = tuple(dict.fromkeys(f.strip().lower() for f in formats if f.strip()))
    bad = [f for f in formats if f not in SHEET_FORMATS]
    if bad or not formats:
        raise InputError(f"unknown sheet format {', '.join(bad) or '(none)'}",
                         accepted=", ".join(SHEET_FORMATS))
    if rows_per_page < 1:
        raise InputError(f"rows_per_page must be >= 1, got {rows_per_page}")
    cells = collect_cells(out_dir, approved_only=approved_only)
    stem = "approved-sheet" if approved_only else "contact-sheet"
    kind = "approved shots" if approved_only else "contact sheet"
    built = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    title = f"{out_dir.resolve().name} — {kind}"
    subtitle = f"{_summary(cells)} · built {built}"
    sheets = out_dir / "sheets"
    written: list[Path] = []
    groups = _groups(cells)
    if "png" in formats:
        page = _draw_page(title, subtitle, groups)
        buf = io.BytesIO()
        page.save(buf, format="PNG", optimize=True)
        written.append(atomic_write(sheets / f"{stem}.png", buf.getvalue()))
    if "pdf" in formats:
        n_rows = sum(len(rows) for _, _, rows in groups)
        page_groups = _paginate(groups, rows_per_page)
        pages = [
            _draw_page(title, subtitle, pg, page_label=f"page {i + 1} of {len(page_groups)}",
                       min_rows=min(rows_per_page, max(1, n_rows)))
            for i, pg in enumerate(page_groups)
        ]
        pages = _even_heights(pages)  # every page the same size, the last one too
        buf = io.BytesIO()
        pages[0].save(buf, format="PDF", save_all=True, append_images=pages[1:], resolution=110.0,
                      title=title, producer="variantshot")
        written.append(atomic_write(sheets / f"{stem}.pdf", buf.getvalue()))
    if "html" in formats:
        written.append(atomic_write(sheets / f"{stem}.html", _html(out_dir, cells, title, built)))
    written.extend(export_approved(out_dir))
    return written
