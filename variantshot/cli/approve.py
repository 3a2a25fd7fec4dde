"""``variantshot approve`` and ``variantshot reject``: review decisions bound to image content."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from . import _console
from .exit_codes import ExitCode


def approve(
    out_dir: Path = typer.Argument(..., help="The batch's output folder (holds manifest.json)."),
    shots: Optional[List[str]] = typer.Argument(
        None, help="Shot ids or globs on ids, e.g. 'MUG-001*'. Optional with --passing."
    ),
    passing: bool = typer.Option(
        False, "--passing", help="Approve every shot whose QA all passed (only among SHOTs if given)."
    ),
    by: Optional[str] = typer.Option(None, "--by", help="Reviewer name (default: the OS user)."),
    note: str = typer.Option("", "--note", help="A note kept with the decision."),
) -> None:
    """Approve shots: records who, when, a note and the image's content hash in approvals.json.

    A decision holds for the image it was made on: when a re-render changes the image, the shot
    is pending again.

    Example: variantshot approve out/ 'MUG-001*' --note "colour checked against the sample"
    """
    from ..review import approvals

    with _console.guarded():
        manifest = approvals.load_manifest(out_dir)
        if not shots and not passing:
            _console.error("error: name at least one SHOT (id or glob), or use --passing")
            raise typer.Exit(ExitCode.BAD_INPUT)
        ids = approvals.resolve_shots(shots, manifest, file=out_dir / approvals.MANIFEST_FILE) if shots else None
        if passing:
            done = approvals.approve_passing(out_dir, by=by, note=note, among=ids)
            skipped = [sid for sid in (ids or manifest) if sid not in {d.shot_id for d in done}]
        else:
            done = approvals.record_decision(out_dir, ids, approvals.APPROVED, by=by, note=note)
            skipped = []
    _report(done, "approved")
    if passing and skipped:
        typer.echo(f"{len(skipped)} shot(s) left as they were: QA did not all pass or no image", err=True)
    for d in done:
        if d.qa_status not in (None, "pass"):
            typer.echo(f"warning: {d.shot_id} approved although its QA is '{d.qa_status}'", err=True)


def reject(
    out_dir: Path = typer.Argument(..., help="The batch's output folder (holds manifest.json)."),
    shots: List[str] = typer.Argument(..., help="Shot ids or globs on ids."),
    note: str = typer.Option(..., "--note", help="Why the shots are rejected (required)."),
    by: Optional[str] = typer.Option(None, "--by", help="Reviewer name (default: the OS user)."),
) -> None:
    """Reject shots with a note saying why; bound to the image's content hash like approvals.

    Example: variantshot reject out/ MUG-001--front --note "handle clipped"
    """
    from ..review import approvals

    if not note.strip():
        _console.error("error: --note must say why the shots are rejected")
        raise typer.Exit(ExitCode.BAD_INPUT)
    with _console.guarded():
        manifest = approvals.load_manifest(out_dir)
        ids = approvals.resolve_shots(shots, manifest, file=out_dir / approvals.MANIFEST_FILE)
        done = approvals.record_decision(out_dir, ids, approvals.REJECTED, by=by, note=note)
    _report(done, "rejected")


def _report(done, word: str) -> None:
    for d in done:
        change = "" if d.previous == "pending" else f" (was {d.previous})"
        typer.echo(f"{word}: {d.shot_id}{change}")
    typer.echo(f"{len(done)} shot(s) {word}", err=True)
