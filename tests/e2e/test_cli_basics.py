"""The command line's outer contract: --version, --help, and a fast start without numba."""

import subprocess
import sys

from typer.testing import CliRunner

import variantshot
from variantshot.cli.main import app


def test_version():
    result = CliRunner().invoke(app, ["--version"])
    assert result.exit_code == 0
    assert variantshot.__version__ in result.output


def test_help_lists_every_command_with_a_line_of_help():
    from variantshot.cli.main import COMMANDS

    result = CliRunner().invoke(app, ["--help"])
    assert result.exit_code == 0
    for name, _ in COMMANDS:
        assert name in result.output


def test_help_does_not_import_numba():
    # DESIGN.md: the CLI is light; heavy imports happen inside command functions.
    code = "import sys; from variantshot.cli.main import app; import variantshot; print('numba' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_demo_passes_cluster_through_and_rejects_a_bad_address(tmp_path):
    # DESIGN.md exit status 2: bad input or usage, nothing rendered, nothing written
    out = tmp_path / "demo"
    result = CliRunner().invoke(app, ["demo", "--out", str(out), "--cluster", "not-an-address", "--quiet"])
    assert result.exit_code == 2, result.output
    assert "not-an-address" in result.output
    assert not (out / "manifest.json").exists()
