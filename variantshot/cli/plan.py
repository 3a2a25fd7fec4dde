"""``variantshot plan``: list every shot and whether it is new, changed or up to date."""

from __future__ import annotations

import json
from pathlib import Path

import typer

from . import _console


def plan(
    catalog: Path = typer.Argument(..., help="The catalog CSV."),
    out: Path = typer.Option(..., "--out", help="The batch's output folder (compared with its manifest.json)."),
    quality: str = typer.Option("draft", "--quality", help="Quality preset the shots would be rendered at: "
                                "draft, proof or final."),
    only: list[str] = typer.Option(None, "--only", help="Only shot ids matching this glob (repeatable)."),
    templates: Path = typer.Option(None, "--templates", help="Templates folder (default: next to the catalog, "
                                   "or ../templates)."),
    as_json: bool = typer.Option(False, "--json", help="Write the plan as JSON on stdout."),
) -> None:
    """List every shot (variant x angle) with its status in OUT: new, changed or up-to-date.

    Writes nothing. Exit status 2 for an invalid catalog.

    Example: variantshot plan catalog/demo.csv --out out/ --only 'TT-MUG*'
    """
    from ..batch.plan import batch_settings, plan_shots
    from ..batch.quality import match_only

    with _console.guarded():
        shots = plan_shots(catalog, out, batch_settings(quality), templates_dir=templates)
    if only:
        shots = [s for s in shots if match_only(s.id, only)]
    counts = {k: sum(1 for s in shots if s.status == k) for k in ("new", "changed", "up-to-date")}
    if as_json:
        typer.echo(json.dumps({"shots": [s.as_dict() for s in shots], "counts": counts}, indent=2,
                              ensure_ascii=False))
        return
    width = max([len(s.id) for s in shots] + [4])
    for s in shots:
        _console.error(f"{s.id:<{width}}  {s.status:<10}  {s.key[:12]}  {s.scene}")
    _console.error(f"{len(shots)} shot(s): {counts['new']} new, {counts['changed']} changed, "
                   f"{counts['up-to-date']} up to date")
