"""The command line as a whole: every listed command loads, and start-up stays light."""

from __future__ import annotations

import subprocess
import sys

from click.testing import CliRunner

from massarc.cli import COMMANDS, cli
from massarc.schema.version import __version__


def test_every_listed_command_loads_under_its_name() -> None:
    for name in COMMANDS:
        command = cli.get_command(None, name)  # type: ignore[arg-type]
        assert command is not None and command.name == name


def test_version_and_help() -> None:
    runner = CliRunner()
    assert runner.invoke(cli, ["--version"]).output.strip() == f"massarc, version {__version__}"
    out = runner.invoke(cli, ["--help"]).output
    assert all(name in out for name in COMMANDS)
    bad = runner.invoke(cli, ["no-such-command"])
    assert bad.exit_code == 2


def test_help_does_not_import_the_heavy_layers() -> None:
    code = (
        "import sys; from massarc.cli import cli\n"
        "try:\n    cli(['--help'], standalone_mode=False)\nexcept SystemExit:\n    pass\n"
        "print(sorted(m for m in ('zarr', 'scipy', 'numba', 'pydantic') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip().splitlines()[-1] == "[]"
