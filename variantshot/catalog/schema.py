"""Catalog file format: read the CSV into rows with their line numbers, map SKUs to safe names.

This module only knows the *shape* of the catalog (header, columns, cells, where each row
starts in the file).  What the cells must contain is checked in :mod:`.validate`.

CSV rules
---------
* UTF-8, with or without a byte-order mark; any other encoding is an error naming each cell
  whose bytes are not UTF-8.  CRLF, LF and CR line ends are all accepted.
* The first non-empty line is the header.  Header names are normalised: surrounding spaces
  removed, lower case, runs of anything but letters and digits become ``_`` (so ``Cap Colour``
  reaches a template as ``row.cap_colour``).
* Quoted fields may hold commas, quotes (doubled) and line breaks (RFC 4180).
* Surrounding spaces of every cell are removed (also around a quoted field); empty lines (and lines of only commas or
  spaces) are skipped.
* Row numbers are the 1-based line on which the row *starts*, as an editor shows it (header =
  row 1 when it is the first line), so a quoted line break moves every later row down.
"""

from __future__ import annotations

import csv
import hashlib
import io
import re
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError

REQUIRED_COLUMNS = ("sku", "product", "colour", "finish")
# optional columns with a meaning of their own (every other column only reaches the template)
OPTIONAL_COLUMNS = ("colourway", "angles", "background", "rig", "material_variant")
BACKGROUNDS = ("white", "transparent", "backdrop")

# Windows device names: a file called CON.png cannot be created there (Microsoft's "Naming Files,
# Paths, and Namespaces" page; (from memory)).
RESERVED_FILE_STEMS = frozenset(
    ["con", "prn", "aux", "nul"] + [f"com{i}" for i in range(1, 10)] + [f"lpt{i}" for i in range(1, 10)]
)
SAFE_NAME_MAX = 96
_UNSAFE_CHARS = re.compile(r"[^A-Za-z0-9._-]")
_HEADER_RE = re.compile(r"[^0-9a-z]+")
# kept as is: safe characters, not starting with '.' or '-', not ending with '.', <= 96 long
_SAFE_RE = re.compile(r"[A-Za-z0-9_](?:[A-Za-z0-9._-]{0,94}[A-Za-z0-9_-])?")


def safe_file_name(text: str) -> str:
    """Map a SKU (or any label) to a file-name stem that is safe on every common file system.

    Kept as is when it consists of ASCII letters, digits, ``.``, ``_`` and ``-``, does not start
    with ``.`` or ``-``, does not end with ``.``, is not a reserved device name and is at most
    96 characters.  Otherwise every other character becomes ``_``, the leading/trailing
    problems are trimmed, and ``-`` plus the first 8 hex digits of the SHA-256 of the original
    text are appended, so two different SKUs never map to the same name (unless one of them is
    literally the other's mapped name, which :mod:`.validate` reports).

    Examples
    --------
    >>> safe_file_name("BTL-500-SAGE")
    'BTL-500-SAGE'
    >>> safe_file_name("../x")[:2]
    '_x'
    """
    if _SAFE_RE.fullmatch(text) and text.split(".", 1)[0].lower() not in RESERVED_FILE_STEMS:
        return text
    ascii_text = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    mapped = _UNSAFE_CHARS.sub("_", ascii_text).lstrip(".-").rstrip(".")
    mapped = re.sub(r"_+", "_", mapped)[: SAFE_NAME_MAX - 10] or "sku"
    if mapped.split(".")[0].lower() in RESERVED_FILE_STEMS:
        mapped = "_" + mapped  # NUL.txt is as reserved as NUL
    digest = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()[:8]
    return f"{mapped}-{digest}"


def normalise_header(name: str) -> str:
    """``' Cap Colour '`` -> ``'cap_colour'`` (see the module docstring)."""
    return _HEADER_RE.sub("_", name.strip().lower()).strip("_")


@dataclass
class CatalogTable:
    """The cells of a catalog CSV, before their meaning is checked.

    Attributes
    ----------
    file : str
        The path as the user gave it (used in messages).
    columns : list of str
        Normalised header names, in file order.
    header_line : int
        1-based line of the header.
    rows : list of (int, dict)
        ``(line, {column: stripped cell})`` per non-empty data row; ``line`` is where the row
        starts in the file.
    errors : list of InputError
        Problems found while reading (encoding, header, field counts).
    skipped_lines : set of int
        Rows whose cells cannot be trusted (too many fields); :mod:`.validate` skips them.
    """

    file: str
    columns: list[str] = field(default_factory=list)
    header_line: int = 1
    rows: list[tuple[int, dict[str, str]]] = field(default_factory=list)
    errors: list[InputError] = field(default_factory=list)
    skipped_lines: set[int] = field(default_factory=set)


def _has_surrogates(text: str) -> bool:
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return True
    return False


def _bad_bytes(text: str) -> str:
    bad = []
    for ch in text:
        if "\udc80" <= ch <= "\udcff":
            bad.append(f"0x{ord(ch) - 0xDC00:02X}")
    return " ".join(dict.fromkeys(bad))


def decode_catalog_bytes(data: bytes, file: str) -> tuple[str, list[InputError]]:
    """Decode catalog bytes as UTF-8 (BOM allowed); undecodable bytes are kept as surrogates.

    Returns the text and file-level errors (a UTF-16 or UTF-32 file is named as such).
    """
    errors: list[InputError] = []
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        errors.append(
            InputError(
                "the file is UTF-16 (or UTF-32) text",
                file=file,
                row=1,
                column=1,
                accepted="UTF-8 text, with or without a byte-order mark; re-save the file as UTF-8 CSV",
            )
        )
        return "", errors
    text = data.decode("utf-8", "surrogateescape")
    if text.startswith("\ufeff"):
        text = text[1:]
    return text, errors


def read_catalog_table(path, *, data: bytes | None = None) -> CatalogTable:
    """Read a catalog CSV into a :class:`CatalogTable`, collecting every reading problem.

    Parameters
    ----------
    path : str or Path
        The catalog file; named in messages as given.
    data : bytes, optional
        The file's bytes when already read (the file is not opened then).

    Returns
    -------
    CatalogTable
        ``errors`` is empty when the file could be read cleanly.
    """
    file = str(path)
    table = CatalogTable(file=file)
    if data is None:
        try:
            data = Path(path).read_bytes()
        except OSError as exc:
            table.errors.append(InputError(f"cannot read the catalog: {exc.strerror or exc}", file=file))
            return table
    text, errors = decode_catalog_bytes(data, file)
    table.errors.extend(errors)
    if errors:
        return table

    text_has_surrogates = _has_surrogates(text)
    reader = csv.reader(io.StringIO(text, newline=""), strict=False, skipinitialspace=True)
    header: list[str] | None = None
    raw_header: list[str] = []
    start = 1
    columns: list[str] = []
    for cells in reader:
        line = start
        start = reader.line_num + 1
        stripped = [c.strip() for c in cells]
        if not any(stripped):
            continue
        if header is None:
            raw_header = stripped
            header = [normalise_header(c) for c in stripped]
            table.header_line = line
            seen: dict[str, int] = {}
            for i, (raw, name) in enumerate(zip(raw_header, header), start=1):
                label = name or str(i)
                if _has_surrogates(raw):
                    table.errors.append(
                        InputError(
                            f"header cell has bytes that are not UTF-8 ({_bad_bytes(raw)})",
                            file=file, row=line, column=i,
                            accepted="UTF-8 text; re-save the file as UTF-8 CSV",
                        )
                    )
                elif not name:
                    table.errors.append(
                        InputError(f"column {i} has no name", file=file, row=line, column=i,
                                   accepted="a name of letters, digits and '_' for every column")
                    )
                elif name in seen:
                    table.errors.append(
                        InputError(
                            f"column '{name}' appears twice (columns {seen[name]} and {i})",
                            file=file, row=line, column=label, accepted="each column name once",
                        )
                    )
                seen.setdefault(name, i)
            columns = header
            table.columns = header
            for required in REQUIRED_COLUMNS:
                if required not in seen:
                    table.errors.append(
                        InputError(
                            f"required column '{required}' is missing",
                            file=file, row=line, column=required,
                            accepted="a header with the columns " + ", ".join(REQUIRED_COLUMNS)
                            + " (optional: " + ", ".join(OPTIONAL_COLUMNS) + ")",
                        )
                    )
            continue
        n_cols = len(columns)
        row = {name: (stripped[i] if i < len(stripped) else "") for i, name in enumerate(columns) if name}
        if len(stripped) > n_cols:
            extra = stripped[n_cols:]
            if any(extra):
                hint = ""
                if any(c.lower().startswith("lab") and ")" not in c for c in stripped):
                    hint = '; a lab(...) colour has commas, so it must be quoted: "lab(50, 10, -20)"'
                table.errors.append(
                    InputError(
                        f"row has {len(stripped)} fields but the header has {n_cols} columns{hint}",
                        file=file, row=line, column=n_cols + 1,
                        accepted=f"at most {n_cols} fields per row; quote fields that contain commas",
                    )
                )
                table.skipped_lines.add(line)
        for name, value in row.items() if text_has_surrogates else ():
            if _has_surrogates(value):
                table.errors.append(
                    InputError(
                        f"cell has bytes that are not UTF-8 ({_bad_bytes(value)})",
                        file=file, row=line, column=name,
                        accepted="UTF-8 text; re-save the file as UTF-8 CSV",
                    )
                )
                row[name] = value.encode("utf-8", "surrogateescape").decode("utf-8", "replace")
        table.rows.append((line, row))
    if header is None:
        table.errors.append(
            InputError(
                "the catalog is empty (no header row)",
                file=file, row=1, column=1,
                accepted="a header with the columns " + ", ".join(REQUIRED_COLUMNS),
            )
        )
    return table


@dataclass(frozen=True)
class Variant:
    """One catalog row, checked: what a template and the shot plan need.

    Attributes
    ----------
    sku : str
        As in the catalog.
    safe_sku : str
        :func:`safe_file_name` of the SKU: the stem of its scene and shot files.
    product, finish, colourway : str
    colour : ColourSpec
    angles : tuple of str
        The angles the row asks for (the product's default angles when the cell is empty).
    background : str
        ``white`` (default), ``transparent`` or ``backdrop``.
    rig : str or None
        Studio rig name (None: the batch's rig).
    material_variant : str or None
        A KHR_materials_variants name, ``*`` for all of them, or None.
    row : dict
        Every cell of the row by (normalised) column name; templates see it as ``row``.
    line : int
        The 1-based line the row starts on in the file.
    file : str
        The catalog file as the user named it.
    """

    sku: str
    safe_sku: str
    product: str
    colour: object
    finish: str
    colourway: str
    angles: tuple[str, ...]
    background: str
    rig: str | None
    material_variant: str | None
    row: dict
    line: int
    file: str
