"""``variantshot render``: the batch, rendering what is out of date in an output folder."""

from __future__ import annotations

import json
from pathlib import Path

import typer

from . import _console
from .exit_codes import ExitCode


def _summary(report, out: Path) -> list[str]:
    lines = [
        f"{out}: {len(report.rendered)} rendered, {len(report.skipped)} up to date, "
        f"{len(report.failed)} failed, {len(report.qa_failed)} failed QA, in {report.seconds:.1f} s"
    ]
    for sid, err in report.failed:
        first = (err or "").splitlines()[0] if err else "unknown error"
        lines.append(f"failed: {sid}: {first}")
    for sid in report.qa_failed:
        lines.append(f"qa fail: {sid} (see `variantshot qa {out}`)")
    return lines


def run_batch(catalog: Path, out: Path, *, quality: str, only, force: bool, workers: int, cluster: str | None,
              rig: str | None, background: str | None, formats: str, sizes: str, key_to_fill: float | None,
              rotation: float | None, quiet: bool, as_json: bool, templates: Path | None,
              sheet_formats=("png",), denoise: bool = True) -> None:
    """Shared by ``render`` and ``demo``: build the options, run the batch, print, exit."""
    _console.setup_logging(quiet=quiet or as_json)
    with _console.guarded():
        from ..batch.executors import make_executor
        from ..batch.quality import OutputSpec, parse_formats, parse_sizes, quality_preset
        from ..batch.runner import render_batch

        q = quality_preset(quality)
        if not denoise:
            import dataclasses

            q = dataclasses.replace(q, denoise=False)
        output = OutputSpec(formats=parse_formats(formats), sizes=parse_sizes(sizes) if sizes else ())
        if background is not None:
            output = output.replace(background=background)
        if cluster:  # Dask's own INFO chatter (workers joining, comms closing) is not ours to print
            import logging

            try:
                import distributed  # noqa: F401 - it sets its loggers' levels when imported
            except ImportError:
                pass  # make_executor says what to install
            for name in ("distributed", "tornado", "bokeh"):
                logging.getLogger(name).setLevel(logging.WARNING)
        executor = make_executor(workers, cluster)
        if cluster and not quiet:
            link = getattr(executor, "dashboard_link", None)
            if link and cluster.startswith("local:"):
                import importlib.util

                if importlib.util.find_spec("bokeh") is None:
                    link += " (its pages need: pip install bokeh)"
            _console.error(f"cluster {cluster}: {len(executor.worker_pids())} worker(s)"
                           + (f", dashboard {link}" if link else ""))

        def on_shot(entry: dict) -> None:
            if as_json:
                typer.echo(json.dumps({k: entry[k] for k in ("id", "sku", "angle", "status", "error", "image",
                                                               "key", "seconds")}
                                      | {"qa": (entry.get("qa") or {}).get("status")}, ensure_ascii=False))

        try:
            with _console.progress_bar("rendering", enabled=not (quiet or as_json)) as bar:
                report = render_batch(
                    catalog, out, quality=q, output=output, rig=rig, key_to_fill=key_to_fill, rotation_deg=rotation,
                    only=only or None, force=force, executor=executor, templates_dir=templates,
                    sheet_formats=sheet_formats, progress=bar, on_shot=on_shot,
                )
        finally:
            executor.close()  # a local:N cluster stops its workers even when the batch fails
    if not as_json:
        for line in _summary(report, out):
            if not quiet or not line.startswith(str(out)):
                _console.error(line)
    if not report.ok:
        raise typer.Exit(ExitCode.SHOTS_FAILED)


def render(
    catalog: Path = typer.Argument(..., help="The catalog CSV."),
    out: Path = typer.Option(..., "--out", help="Output folder: shots/, scenes/, manifest.json, sheets/."),
    quality: str = typer.Option("draft", "--quality", help="draft, proof or final."),
    only: list[str] = typer.Option(None, "--only", help="Only shot ids matching this glob (repeatable), e.g. 'TT-MUG*'."),
    force: bool = typer.Option(False, "--force", help="Render the selected shots even when up to date."),
    workers: int = typer.Option(1, "--workers", help="Worker processes on this machine (each gets cores/N threads)."),
    cluster: str = typer.Option(None, "--cluster", help="Render on Dask: a scheduler address (tcp://host:8786) "
                                "or local:N (N worker processes here); needs variantshot[cluster]."),
    rig: str = typer.Option(None, "--rig", help="Studio rig for rows without a rig cell (default soft-even)."),
    background: str = typer.Option(None, "--background", help="white, transparent or backdrop, for rows without "
                                   "a background cell (default white)."),
    formats: str = typer.Option("png", "--format", help="Comma-separated image formats: png, jpg, webp; the "
                                "first is the primary image."),
    sizes: str = typer.Option("", "--sizes", help="Extra sizes (longer side, px), comma-separated, e.g. 1600,1000."),
    key_to_fill: float = typer.Option(None, "--key-to-fill", help="Override every rig's key-to-fill ratio "
                                      "(key illuminance / fill illuminance)."),
    rotation: float = typer.Option(None, "--rig-rotation", help="Turn every rig about the vertical (degrees)."),
    no_denoise: bool = typer.Option(False, "--no-denoise", help="Keep the raw path-traced film (no denoiser)."),
    quiet: bool = typer.Option(False, "--quiet", help="No progress bar; only failures on stderr."),
    as_json: bool = typer.Option(False, "--json", help="One JSON object per finished shot on stdout."),
    templates: Path = typer.Option(None, "--templates", help="Templates folder (default: next to the catalog, "
                                   "or ../templates)."),
) -> None:
    """Render every out-of-date shot of CATALOG into OUT, run QA, write the manifest and a sheet.

    A shot is re-rendered only when its key (template, row, model bytes, rig, settings, renderer and
    image-library versions) changed; --force and --only widen or narrow the run. Files are written atomically
    and the manifest after every shot, so a killed run resumes where it stopped. Exit status 0
    all done; 1 some shots failed to render or failed QA; 2 bad input; 3 another run holds OUT.
    With --cluster the shots render on Dask workers (no shared file system needed); this
    process still writes every file and the manifest, so OUT behaves as in a local run.

    Example: variantshot render catalog/demo.csv --out out/ --quality proof --format png,jpg --sizes 1000
    """
    run_batch(catalog, out, quality=quality, only=only, force=force, workers=workers, cluster=cluster, rig=rig,
              background=background, formats=formats, sizes=sizes, key_to_fill=key_to_fill, rotation=rotation,
              quiet=quiet, as_json=as_json, templates=templates, denoise=not no_denoise)
