"""``variantshot sheet``: contact sheets (PNG, PDF, HTML) and the export of approved shots."""

from __future__ import annotations

from pathlib import Path

import typer

from . import _console


def sheet(
    out_dir: Path = typer.Argument(..., help="The batch's output folder (holds manifest.json)."),
    approved_only: bool = typer.Option(
        False, "--approved-only", help="Only approved shots: the hand-over sheet for the web team."
    ),
    formats: str = typer.Option("png,pdf,html", "--format", help="Comma-separated: png, pdf, html."),
) -> None:
    """Build contact sheets into DIR/sheets/ plus approved.csv / approved.json for hand-over.

    One row per variant, one column per angle; each cell shows the thumbnail, SKU, colourway,
    finish, angle, the QA mark and the approval state.  The HTML sheet filters by product, QA
    state and approval state and needs no network.

    Example: variantshot sheet out/ --approved-only --format html,pdf
    """
    from ..review.qa import CAUTION
    from ..review.sheets import build_sheets

    with _console.guarded():
        written = build_sheets(out_dir, approved_only=approved_only, formats=formats.split(","))
    for path in written:
        typer.echo(str(path))
    typer.echo(f"caution: {CAUTION}", err=True)
