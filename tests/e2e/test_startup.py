"""Start-up contract: ``variantshot --help`` (and every command's ``--help``) runs without numba.

Timings (warm start to the first sample, cold compile) are measured by
``tests/benchmarks/bench_startup.py``, never here.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

from variantshot.cli.main import COMMANDS

_PROBE = """
import sys
from variantshot.cli.main import app
try:
    app(prog_name="variantshot", args={args!r})
except SystemExit as exc:
    code = exc.code
else:
    code = 0
print("EXIT", code)
print("NUMBA", "numba" in sys.modules)
"""


def _run(args):
    out = subprocess.run([sys.executable, "-c", _PROBE.format(args=list(args))], capture_output=True, text=True,
                         timeout=120)
    lines = dict(line.split(" ", 1) for line in out.stdout.splitlines() if line.startswith(("EXIT", "NUMBA")))
    return out, lines


def test_top_level_help_prints_the_commands_without_importing_numba():
    # DESIGN.md / team brief: heavy imports happen inside command functions
    out, lines = _run(["--help"])
    assert lines.get("EXIT") in ("0", "None"), out.stderr
    assert lines.get("NUMBA") == "False"
    for name, _ in COMMANDS:
        assert name in out.stdout


@pytest.mark.parametrize("command", [name for name, _ in COMMANDS])
def test_command_help_does_not_import_numba(command):
    out, lines = _run([command, "--help"])
    assert lines.get("EXIT") in ("0", "None"), out.stderr
    assert lines.get("NUMBA") == "False", f"variantshot {command} --help imported numba"
