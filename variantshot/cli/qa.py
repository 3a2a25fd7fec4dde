"""``variantshot qa``: the QA table of a batch (from the manifest; image-only QA where it has none)."""

from __future__ import annotations

import json
from pathlib import Path

import typer

from . import _console
from .exit_codes import ExitCode


def qa(
    out_dir: Path = typer.Argument(..., help="The batch's output folder (holds manifest.json)."),
    as_json: bool = typer.Option(False, "--json", help="Write the QA results as JSON on stdout."),
) -> None:
    """Show the QA of every shot: colour ΔE2000, fill, centring, edges, background, highlights, noise.

    Exit status 1 when a shot failed QA or failed to render.  Shots the batch left without QA are
    checked from their image file (framing, background, highlights only).

    Example: variantshot qa out/ --json > qa.json
    """
    from ..review import approvals
    from ..review.qa import CAUTION, run_qa_on_file

    with _console.guarded():
        shots = approvals.load_manifest(out_dir)
        states = approvals.approval_states(out_dir, shots)
    results = {}
    for sid, e in shots.items():
        qa_dict = e.get("qa")
        source = "manifest"
        if not qa_dict and e.get("status", "rendered") == "rendered" and e.get("image"):
            path = out_dir / e["image"]
            if path.is_file():
                qa_dict = run_qa_on_file(path, background=e.get("background") or "white").to_dict()
                source = "image file"
        results[sid] = {
            "id": sid,
            "sku": e.get("sku"),
            "angle": e.get("angle"),
            "status": e.get("status", "rendered"),
            "error": e.get("error"),
            "approval": states[sid],
            "qa_source": source if qa_dict else None,
            "qa": qa_dict,
        }
    failed = [r for r in results.values()
              if r["status"] != "rendered" or (r["qa"] or {}).get("status") == "fail"]
    if as_json:
        typer.echo(json.dumps({"caution": CAUTION, "shots": results}, indent=2, ensure_ascii=False))
    else:
        _print_table(results)
        typer.echo(f"caution: {CAUTION}", err=True)
    if failed:
        raise typer.Exit(ExitCode.SHOTS_FAILED)


_MARK = {"pass": "✓ pass", "warn": "! warn", "fail": "✗ fail"}
_HEAD = {"colour_delta_e": "ΔE2000", "fill": "fill", "centring": "centre", "edge_clipping": "edge",
         "background_purity": "white bg", "clipped_highlights": "blown", "noise": "noise"}
_STYLE = {"pass": "green", "warn": "yellow", "fail": "bold red"}


def _cell(check: dict | None) -> str:
    if not check:
        return "[dim]–[/dim]"
    v = check.get("value")
    fig = "" if v is None else (f"{v:.3f}" if isinstance(v, (int, float)) else str(v))
    st = check.get("status")
    sym = {"pass": "✓", "warn": "!", "fail": "✗"}.get(st, "?")
    return f"[{_STYLE.get(st, 'red')}]{sym} {fig}[/]"


def _print_table(results: dict) -> None:
    from rich.console import Console
    from rich.markup import escape
    from rich.table import Table

    names = []
    for r in results.values():
        for c in (r["qa"] or {}).get("checks", []):
            if c["name"] not in names:
                names.append(c["name"])
    table = Table(title="QA", show_lines=False)
    table.add_column("shot", no_wrap=True)
    table.add_column("QA", no_wrap=True)
    for n in names:
        table.add_column(_HEAD.get(n, n.replace("_", " ")), no_wrap=True, justify="right")
    table.add_column("approval", no_wrap=True)
    for sid, r in results.items():
        if r["status"] != "rendered":
            table.add_row(escape(sid), "[bold red]✗ render failed[/]",
                          *([""] * len(names)), escape(r["approval"]))
            continue
        qa_d = r["qa"] or {}
        by_name = {c["name"]: c for c in qa_d.get("checks", [])}
        st = qa_d.get("status")
        table.add_row(
            escape(sid),
            f"[{_STYLE.get(st, 'dim')}]{_MARK.get(st, '– none')}[/]",
            *[_cell(by_name.get(n)) for n in names],
            escape(r["approval"]),
        )
    console = Console(stderr=True)
    if not console.is_terminal:  # piped or captured: do not squeeze the table into 80 columns
        console = Console(stderr=True, width=200)
    console.print(table)
