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
    rig: str = typer.Option(None, "--rig", help="Studio rig for rows without a rig cell (as for render)."),
    background: str = typer.Option(None, "--background", help="white, transparent or backdrop, for rows without "
                                   "a background cell (as for render)."),
    formats: str = typer.Option("png", "--format", help="Image formats, comma-separated (as for render)."),
    sizes: str = typer.Option("", "--sizes", help="Extra sizes, comma-separated (as for render)."),
    key_to_fill: float = typer.Option(None, "--key-to-fill", help="Rig key-to-fill override (as for render)."),
    rotation: float = typer.Option(None, "--rig-rotation", help="Rig rotation in degrees (as for render)."),
    templates: Path = typer.Option(None, "--templates", help="Templates folder (default: next to the catalog, "
                                   "or ../templates)."),
    as_json: bool = typer.Option(False, "--json", help="Write the plan as JSON on stdout."),
) -> None:
    """List every shot (variant x angle) with its status in OUT: new, changed or up-to-date.

    Give the options you would give `variantshot render` (quality, rig, background, formats,
    sizes, rig overrides): they enter the shot keys. Writes nothing. Exit status 2 for an
    invalid catalog.

    Example: variantshot plan catalog/demo.csv --out out/ --only 'TT-MUG*'
    """
    from ..batch.plan import batch_settings, plan_shots
    from ..batch.quality import OutputSpec, match_only, parse_formats, parse_sizes

    with _console.guarded():
        output = OutputSpec(formats=parse_formats(formats), sizes=parse_sizes(sizes) if sizes else ())
        if background is not None:
            output = output.replace(background=background)
        # the same settings object render_batch keys its shots with
        settings = batch_settings(quality, output)
        if key_to_fill is not None or rotation is not None:
            settings = (*settings, {"key_to_fill": key_to_fill, "rotation_deg": rotation})
        shots = plan_shots(catalog, out, settings, rig=rig, templates_dir=templates)
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
