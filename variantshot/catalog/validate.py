"""Catalog validation: check every cell against the product, finish, angle and rig libraries.

Every problem is collected in one pass and reported as ``FILE:ROW:COLUMN: what is wrong
(accepted: ...)``, with the closest known name suggested for unknown products, finishes and
angles.  :func:`read_catalog` raises :class:`~variantshot.errors.InputErrors` with all of them;
:func:`check_catalog` additionally expands every template in memory (see :mod:`.expand`) so
that template, glTF and angle problems are found before anything is written.

Where the libraries are found
-----------------------------
The *templates folder* is ``templates_dir`` when given, else ``$VARIANTSHOT_TEMPLATES``, else
the first existing of ``<catalog folder>/templates`` and ``<catalog folder>/../templates``.
It holds

* ``<product>.gltf.j2``: one Jinja template per product;
* ``products.toml`` (optional): per product ``template``, ``model`` (its glTF file; relative
  buffer URIs in the template are resolved next to it) and default ``angles``; a template
  without an entry is a product of that name with the default angles ``front`` and
  ``three-quarter-left``;
* ``finishes/*.toml``: the finish library (see :mod:`.finishes`); a ``finishes/`` folder next
  to the catalog file adds to it and overrides finishes of the same name;
* ``rigs/*.toml``: the studio rigs (see :mod:`variantshot.geometry.rig`).
"""

from __future__ import annotations

import difflib
import hashlib
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError, InputErrors
from .colour import ColourSyntaxError, parse_colours
from .finishes import Finish, load_finishes
from .schema import (
    BACKGROUNDS,
    OPTIONAL_COLUMNS,
    REQUIRED_COLUMNS,
    Variant,
    read_catalog_table,
    safe_file_name,
)

DEFAULT_PRODUCT_ANGLES = ("front", "three-quarter-left")
TEMPLATE_SUFFIX = ".gltf.j2"


def closest(name: str, choices) -> str | None:
    """The closest of ``choices`` to ``name``, or None.

    difflib's ratio >= 0.6 first; failing that, the only choice that contains ``name`` (3+
    characters), so ``sand`` suggests ``sand-grille``.
    """
    lowered = {c.lower(): c for c in choices}
    match = difflib.get_close_matches(name.lower(), list(lowered), n=1, cutoff=0.6)
    if match:
        return lowered[match[0]]
    containing = [c for c in lowered if len(name) >= 3 and name.lower() in c]
    return lowered[containing[0]] if len(containing) == 1 else None


def unknown_name_message(kind: str, name: str, choices) -> str:
    hint = closest(name, choices)
    text = f"{name!r} is not a known {kind}"
    return f"{text}; did you mean {hint!r}?" if hint else text


def _accepted_list(choices, limit: int = 12) -> str:
    items = sorted(choices)
    shown = ", ".join(items[:limit])
    return shown + (f", ... ({len(items)} in all)" if len(items) > limit else "")


@dataclass(frozen=True)
class Product:
    """A product: its template, its model and its default angles."""

    name: str
    template: Path
    model: Path | None = None
    angles: tuple[str, ...] = DEFAULT_PRODUCT_ANGLES
    description: str = ""

    @property
    def base_dir(self) -> Path:
        """Folder the template's relative buffer and image URIs are resolved against."""
        return self.model.parent if self.model is not None else self.template.parent


@dataclass
class Library:
    """Everything a catalog refers to: products, finishes, rigs, and where they came from."""

    templates_dir: Path
    products: dict[str, Product] = field(default_factory=dict)
    finishes: dict[str, Finish] = field(default_factory=dict)
    rigs: dict[str, Path] = field(default_factory=dict)


def find_templates_dir(catalog_path, templates_dir=None) -> Path:
    """The templates folder for a catalog (see the module docstring)."""
    if templates_dir is not None:
        return Path(templates_dir)
    env = os.environ.get("VARIANTSHOT_TEMPLATES")
    if env:
        return Path(env)
    folder = Path(catalog_path).resolve().parent
    for candidate in (folder / "templates", folder.parent / "templates"):
        if candidate.is_dir():
            return candidate
    return folder / "templates"


def load_library(templates_dir, extra_finish_dirs=()) -> Library:
    """Read ``products.toml``, the templates, the finishes and the rig names of a templates folder.

    Raises
    ------
    InputErrors
        A missing folder, a bad ``products.toml`` or bad finish files (all at once).
    """
    tdir = Path(templates_dir)
    if not tdir.is_dir():
        raise InputErrors([InputError("templates folder not found", file=tdir,
                                      accepted="a folder of <product>.gltf.j2 templates (--templates DIR)")])
    errors: list[InputError] = []
    lib = Library(templates_dir=tdir)
    for path in sorted(tdir.glob("*" + TEMPLATE_SUFFIX)):
        name = path.name[: -len(TEMPLATE_SUFFIX)]
        lib.products[name] = Product(name=name, template=path)
    products_file = tdir / "products.toml"
    if products_file.is_file():
        try:
            data = tomllib.loads(products_file.read_text(encoding="utf-8"))
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            errors.append(InputError(f"is not valid TOML: {exc}", file=products_file, accepted="TOML 1.0"))
            data = {}
        for name, entry in data.items():
            where = f"[{name}]"
            if not isinstance(entry, dict):
                errors.append(InputError(f"{where} must be a table", file=products_file))
                continue
            template = tdir / str(entry.get("template", name + TEMPLATE_SUFFIX))
            if not template.is_file():
                errors.append(InputError(f"{where} template {template.name!r} not found in {tdir}",
                                         file=products_file, accepted="a file in the templates folder"))
            model = entry.get("model")
            model_path = (products_file.parent / model).resolve() if model else None
            if model_path is not None and not model_path.is_file():
                errors.append(InputError(f"{where} model {model!r} not found", file=products_file,
                                         accepted="a glTF file path relative to products.toml"))
            angles = entry.get("angles", list(DEFAULT_PRODUCT_ANGLES))
            if not (isinstance(angles, list) and angles and all(isinstance(a, str) for a in angles)):
                errors.append(InputError(f"{where} angles must be a non-empty list of names", file=products_file))
                angles = list(DEFAULT_PRODUCT_ANGLES)
            lib.products[name] = Product(name=name, template=template, model=model_path,
                                         angles=tuple(angles), description=str(entry.get("description", "")))
    try:
        lib.finishes = load_finishes(tdir / "finishes", *extra_finish_dirs)
    except InputErrors as exc:
        errors.extend(exc.errors)
    rig_dir = tdir / "rigs"
    if rig_dir.is_dir():
        lib.rigs = {p.stem: p for p in sorted(rig_dir.glob("*.toml"))}
    if errors:
        raise InputErrors(errors)
    return lib


@dataclass
class Catalog:
    """A read and row-checked catalog.

    Attributes
    ----------
    file : str
        The catalog as the user named it.
    path : Path
    columns : list of str
        Normalised header names.
    variants : list of Variant
        One per data row, in file order.
    library : Library
    warnings : list of InputError
        Non-fatal findings (out-of-gamut colours, columns that look misspelt, ...).
    sha256 : str
        Of the catalog file's bytes.
    """

    file: str
    path: Path
    columns: list[str]
    variants: list[Variant]
    library: Library
    warnings: list[InputError] = field(default_factory=list)
    sha256: str = ""


def validate_rows(table, library: Library) -> tuple[list[Variant], list[InputError], list[InputError]]:
    """Check every row of a :class:`~.schema.CatalogTable`; return ``(variants, errors, warnings)``."""
    file = table.file
    errors: list[InputError] = []
    warnings: list[InputError] = []
    variants: list[Variant] = []
    known_columns = set(REQUIRED_COLUMNS) | set(OPTIONAL_COLUMNS)
    for col in table.columns:
        if col and col not in known_columns:
            hint = closest(col, known_columns)
            if hint and hint not in table.columns:
                warnings.append(InputError(
                    f"column '{col}' is passed to templates as row.{col}; did you mean '{hint}'?",
                    file=file, row=table.header_line, column=col))
    has = set(table.columns)
    if not set(REQUIRED_COLUMNS) <= has:
        for err in table.errors:  # point a misspelt required column at its likely spelling
            if err.column in REQUIRED_COLUMNS and err.message.startswith("required column"):
                hint = closest(err.column, [c for c in table.columns if c not in known_columns])
                if hint:
                    err.message += f"; the header has '{hint}'"
                    err.args = (err.format(),)
        return variants, errors, warnings

    products = library.products
    finishes = library.finishes
    colours = parse_colours(row.get("colour", "") for line, row in table.rows if line not in table.skipped_lines)
    first_line_of_sku: dict[str, int] = {}
    safe_owner: dict[str, tuple[str, int]] = {}
    for line, row in table.rows:
        if line in table.skipped_lines:
            continue
        row_errors_before = len(errors)

        def err(column, message, accepted=None, line=line):
            errors.append(InputError(message, file=file, row=line, column=column, accepted=accepted))

        sku = row.get("sku", "")
        product = row.get("product", "")
        finish = row.get("finish", "")
        safe = ""
        if not sku:
            err("sku", "SKU is empty", "a non-empty, unique SKU")
        elif sku in first_line_of_sku:
            err("sku", f"duplicate SKU {sku!r} (first on row {first_line_of_sku[sku]})", "each SKU on one row")
        else:
            first_line_of_sku[sku] = line
            safe = safe_file_name(sku)
            owner = safe_owner.get(safe.lower())
            if owner is not None:
                err("sku", f"SKU {sku!r} gives the same file name {safe!r} as SKU {owner[0]!r} on row {owner[1]}",
                    "SKUs whose file names differ in more than letter case")
            else:
                safe_owner[safe.lower()] = (sku, line)
                if safe != sku:
                    warnings.append(InputError(
                        f"SKU {sku!r} is not a safe file name; its files are named {safe!r}",
                        file=file, row=line, column="sku",
                        accepted="letters, digits, '.', '_' and '-' keep a SKU's own name"))
        if not product:
            err("product", "product is empty", _accepted_list(products) or "a product template name")
        elif product not in products:
            err("product", unknown_name_message("product", product, products),
                _accepted_list(products) or f"a {TEMPLATE_SUFFIX} template in {library.templates_dir}")
        colour = None
        text = row.get("colour", "")
        parsed = colours[text]
        if isinstance(parsed, ColourSyntaxError):
            err("colour", str(parsed), parsed.accepted)
        else:
            colour = parsed
        if colour is not None and not colour.in_gamut:
            warnings.append(InputError(
                f"{text!r} is outside the sRGB gamut; mapped to {colour.hex} at the same L* and hue "
                f"(CIEDE2000 {colour.delta_e_mapping:.1f})", file=file, row=line, column="colour",
                accepted="colours inside sRGB render exactly"))
        if not finish:
            err("finish", "finish is empty", _accepted_list(finishes))
        elif finish not in finishes:
            err("finish", unknown_name_message("finish", finish, finishes), _accepted_list(finishes))
        angles_cell = row.get("angles", "")
        names = tuple(a.strip() for a in angles_cell.split(";") if a.strip()) if angles_cell else ()
        seen_angles = set()
        for a in names:
            if a in seen_angles:
                err("angles", f"angle {a!r} is listed twice", "each angle once")
            seen_angles.add(a)
        # names that are not presets may be camera nodes of the template: checked by expand
        if not names and product in products:
            names = tuple(products[product].angles)
        background = row.get("background", "") or "white"
        if background not in BACKGROUNDS:
            err("background", unknown_name_message("background", background, BACKGROUNDS), ", ".join(BACKGROUNDS))
        rig = row.get("rig", "") or None
        if rig is not None and library.rigs and rig not in library.rigs:
            err("rig", unknown_name_message("studio rig", rig, library.rigs), _accepted_list(library.rigs))
        mv = row.get("material_variant", "") or None
        if len(errors) == row_errors_before and colour is not None:
            variants.append(Variant(
                sku=sku, safe_sku=safe, product=product, colour=colour, finish=finish,
                colourway=row.get("colourway", "") or text, angles=names, background=background,
                rig=rig, material_variant=mv, row=row, line=line, file=file,
            ))
    return variants, errors, warnings


MAX_REPORTED_ERRORS = 500


def _capped(errors: list[InputError], file: str) -> list[InputError]:
    """The first :data:`MAX_REPORTED_ERRORS` errors and one line saying how many more there are."""
    if len(errors) <= MAX_REPORTED_ERRORS:
        return errors
    more = len(errors) - MAX_REPORTED_ERRORS
    return errors[:MAX_REPORTED_ERRORS] + [InputError(
        f"... and {more} more error(s) not shown (the first {MAX_REPORTED_ERRORS} are above)", file=file)]


def read_catalog(path, *, templates_dir=None, library: Library | None = None, data: bytes | None = None) -> Catalog:
    """Read and row-check a catalog CSV.

    Parameters
    ----------
    path : str or Path
        The catalog; messages name it as given.
    templates_dir : str or Path, optional
        The templates folder (see the module docstring for the default).
    library : Library, optional
        Already loaded libraries (then ``templates_dir`` is ignored).
    data : bytes, optional
        The file's bytes, when already read.

    Returns
    -------
    Catalog

    Raises
    ------
    InputErrors
        Every problem of the file, one ``FILE:ROW:COLUMN: message (accepted: ...)`` each.
    """
    path = Path(path)
    if data is None:
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise InputErrors([InputError(f"cannot read the catalog: {exc.strerror or exc}", file=path,
                                          accepted="a readable UTF-8 CSV file")]) from None
    table = read_catalog_table(path, data=data)
    errors = list(table.errors)
    if library is None:
        finish_dirs = [path.resolve().parent / "finishes"]
        library = load_library(find_templates_dir(path, templates_dir), extra_finish_dirs=finish_dirs)
    variants, row_errors, warnings = validate_rows(table, library)
    errors.extend(row_errors)
    if not errors and not variants:
        errors.append(InputError("the catalog has a header but no rows", file=str(path), row=table.header_line + 1,
                                 column="sku", accepted="one row per variant"))
    if errors:
        errors.sort(key=lambda e: (e.row if isinstance(e.row, int) else 0))
        raise InputErrors(_capped(errors, str(path)))
    return Catalog(file=str(path), path=path, columns=table.columns, variants=variants, library=library,
                   warnings=warnings, sha256=hashlib.sha256(data).hexdigest())


def check_catalog(path, *, templates_dir=None):
    """Validate a catalog, its templates and models without writing anything.

    Returns
    -------
    CheckReport
        ``catalog``, ``scenes`` (the expanded scenes, reduced to their ``asset`` and
        ``extensionsUsed``) and ``warnings`` (including finishes whose extensions the renderer
        does not render yet).

    Raises
    ------
    InputErrors
        Every error found.
    """
    from .expand import check_expanded  # noqa: PLC0415  (expand imports this module)

    catalog = read_catalog(path, templates_dir=templates_dir)
    return check_expanded(catalog, keep_documents=False)
