"""``variantshot check``: validate a catalog, its templates and models; render nothing."""

from __future__ import annotations

import json
from pathlib import Path

import typer

from . import _console


def check(
    catalog: Path = typer.Argument(..., help="The catalog CSV."),
    templates: Path = typer.Option(None, "--templates", help="Templates folder (default: next to the catalog, "
                                   "or ../templates)."),
    as_json: bool = typer.Option(False, "--json", help="Write the result as JSON on stdout."),
) -> None:
    """Validate the catalog, templates and models (every error at once); write nothing.

    Each problem is one line FILE:ROW:COLUMN: message (accepted: ...). Warnings (out-of-gamut
    colours, finishes using glTF extensions the renderer does not render yet) do not fail the
    check. Exit status 2 when anything is invalid.

    Example: variantshot check catalog/demo.csv
    """
    from ..catalog.validate import check_catalog

    with _console.guarded():
        report = check_catalog(catalog, templates_dir=templates)
    n_shots = sum(len(s.angles) for s in report.scenes)
    for w in report.warnings:
        _console.error(f"warning: {w.format()}")
    summary = {
        "catalog": str(catalog),
        "rows": len(report.catalog.variants),
        "scenes": len(report.scenes),
        "shots": n_shots,
        "products": sorted({s.variant.product for s in report.scenes}),
        "warnings": [w.format() for w in report.warnings],
        "ok": True,
    }
    if as_json:
        typer.echo(json.dumps(summary, indent=2, ensure_ascii=False))
    else:
        _console.error(f"{catalog}: ok: {summary['rows']} rows, {summary['scenes']} scenes, {n_shots} shots, "
                       f"{len(report.warnings)} warning(s)")
