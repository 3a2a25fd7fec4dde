"""Terminal output for the CLI: error lines on stderr, exit-code mapping, Rich progress bars.

Only ``cli/`` writes to the terminal; the library reports through ``progress`` callbacks
``(done, total, label)`` and logging.
"""

from __future__ import annotations

import contextlib
import logging
import sys
import time
from typing import Callable, Iterator

import typer

from ..errors import InputError, LockedError, RenderError, VariantshotError
from .exit_codes import ExitCode


def error(message: str) -> None:
    """Print one diagnostic line on stderr."""
    typer.echo(message, err=True)


@contextlib.contextmanager
def guarded() -> Iterator[None]:
    """Turn library exceptions into one ``where: message`` line per issue and an exit status.

    No raw traceback reaches the user for errors we raise on purpose; anything unexpected
    still propagates (Typer prints it without locals).
    """
    try:
        yield
    except LockedError as exc:
        error(f"error: {exc}")
        raise typer.Exit(ExitCode.LOCKED) from None
    except InputError as exc:
        for line in exc.format().splitlines():
            error(f"error: {line}")
        raise typer.Exit(ExitCode.BAD_INPUT) from None
    except RenderError as exc:
        error(f"error: {exc}")
        raise typer.Exit(ExitCode.SHOTS_FAILED) from None
    except VariantshotError as exc:
        error(f"error: {exc}")
        raise typer.Exit(ExitCode.BAD_INPUT) from None


def setup_logging(quiet: bool = False, verbose: bool = False) -> None:
    level = logging.WARNING if quiet else (logging.DEBUG if verbose else logging.INFO)
    logging.basicConfig(level=level, format="%(levelname)s %(name)s: %(message)s", stream=sys.stderr)


@contextlib.contextmanager
def progress_bar(description: str, *, enabled: bool = True, delay_s: float = 1.0):
    """Yield a ``progress(done, total, label=None)`` callback drawing a Rich bar on stderr.

    The bar appears only once the work has run for ``delay_s`` seconds, so short jobs print
    nothing; with ``enabled=False`` the callback does nothing (quiet and JSON modes).
    """
    if not enabled or not sys.stderr.isatty():
        yield _null_progress
        return
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    console = Console(stderr=True)
    started = time.monotonic()
    state = {"progress": None, "task": None}

    def update(done: int, total: int, label: str | None = None) -> None:
        if state["progress"] is None:
            if time.monotonic() - started < delay_s:
                return
            prog = Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeRemainingColumn(),
                TextColumn("{task.fields[label]}"),
                console=console,
                transient=False,
            )
            prog.start()
            state["progress"] = prog
            state["task"] = prog.add_task(description, total=total, label="")
        state["progress"].update(state["task"], completed=done, total=total, label=label or "")

    try:
        yield update
    finally:
        if state["progress"] is not None:
            state["progress"].stop()


def _null_progress(done: int, total: int, label: str | None = None) -> None:
    return None


ProgressFn = Callable[..., None]
