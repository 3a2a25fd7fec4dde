"""``variantshot expand``: write every variant's glTF scene to DIR/scenes/."""

from __future__ import annotations

import json
from pathlib import Path

import typer

from . import _console


def expand(
    catalog: Path = typer.Argument(..., help="The catalog CSV."),
    out: Path = typer.Option(..., "--out", help="Output folder; scenes go to OUT/scenes/."),
    templates: Path = typer.Option(None, "--templates", help="Templates folder (default: next to the catalog, "
                                   "or ../templates)."),
    as_json: bool = typer.Option(False, "--json", help="List the written files as JSON on stdout."),
) -> None:
    """Write the glTF scene of every variant to OUT/scenes/ (nothing is written if anything is invalid).

    One <sku>.gltf per variant with a camera node per angle; the model buffers are copied
    next to the scenes once. Exit status 2 (and nothing written) for an invalid catalog.

    Example: variantshot expand catalog/demo.csv --out out/
    """
    from ..catalog.expand import expand_catalog

    with _console.guarded():
        report, written = expand_catalog(catalog, out, templates_dir=templates)
    for w in report.warnings:
        _console.error(f"warning: {w.format()}")
    if as_json:
        typer.echo(json.dumps({"scenes": [str(p) for p in written]}, indent=2))
    else:
        _console.error(f"wrote {len(written)} scene(s) to {out / 'scenes'}")
