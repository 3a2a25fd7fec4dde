"""``variantshot demo``: render the bundled demo catalog end to end."""

from __future__ import annotations

from pathlib import Path

import typer

from .render import run_batch


def demo_catalog() -> tuple[Path, Path]:
    """``(catalog CSV, templates folder)`` of the bundled demo.

    Looked up next to the package first (a repository checkout: ``<repo>/catalog/demo.csv`` and
    ``<repo>/templates``), then where a wheel installs them (``<prefix>/share/variantshot``).
    """
    import sys

    package = Path(__file__).resolve().parent.parent
    for root in (package.parent, Path(sys.prefix) / "share" / "variantshot"):
        csv, templates = root / "catalog" / "demo.csv", root / "templates"
        if csv.is_file() and templates.is_dir():
            return csv, templates
    from ..errors import InputError

    raise InputError("the demo catalog is not installed", file=str(package.parent / "catalog" / "demo.csv"),
                     accepted="a repository checkout, or a wheel built with the demo data")


def demo(
    out: Path = typer.Option(Path("variantshot-demo"), "--out", help="Output folder."),
    quality: str = typer.Option("draft", "--quality", help="draft, proof or final."),
    force: bool = typer.Option(False, "--force", help="Render every shot again."),
    workers: int = typer.Option(1, "--workers", help="Worker processes on this machine."),
    cluster: str = typer.Option(None, "--cluster", help="Render on a Dask cluster: tcp://HOST:PORT or local:N "
                                "(needs the 'cluster' extra)."),
    no_denoise: bool = typer.Option(False, "--no-denoise", help="Keep the raw path-traced film (no denoiser)."),
    quiet: bool = typer.Option(False, "--quiet", help="No progress bar; only failures on stderr."),
    as_json: bool = typer.Option(False, "--json", help="One JSON object per finished shot on stdout."),
) -> None:
    """Render the bundled demo catalog into OUT: shots, manifest, QA and contact sheets.

    The demo is three products of an invented brand in eight variants each, two or three
    angles per variant, on white under the soft-even rig. A second run renders nothing.

    Example: variantshot demo --quality draft --out variantshot-demo
    """
    from . import _console

    with _console.guarded():
        catalog, templates = demo_catalog()
    run_batch(catalog, out, quality=quality, only=None, force=force, workers=workers, cluster=cluster, rig=None,
              background=None, formats="png", sizes="", key_to_fill=None, rotation=None, quiet=quiet,
              as_json=as_json, templates=templates, sheet_formats=("png", "pdf", "html"), denoise=not no_denoise)
