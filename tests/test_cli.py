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


def test_no_command_module_imports_another() -> None:
    """Helpers shared by commands live in ``massarc.cli._common``, never in a command."""
    import ast
    from pathlib import Path

    import massarc.cli

    folder = Path(massarc.cli.__file__).parent
    commands = {module for module, _ in COMMANDS.values()}
    assert commands <= {p.stem for p in folder.glob("*.py")}
    offences = []
    for path in sorted(folder.glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom):
                if node.level == 1:
                    targets = {node.module} if node.module else {a.name for a in node.names}
                elif node.module and node.module.startswith("massarc.cli."):
                    targets = {node.module.removeprefix("massarc.cli.")}
                else:
                    continue
                offences += [f"{path.name} imports {t}" for t in targets & commands - {path.stem}]
    assert not offences


def test_info_renders_as_text_or_json() -> None:
    import json
    from pathlib import Path

    from massarc.archive import open_run

    sample = Path(__file__).parents[1] / "samples" / "depot-ring.zarr"
    run = open_run(sample)
    runner = CliRunner()
    text = runner.invoke(cli, ["info", str(sample)])
    assert text.exit_code == 0
    assert f"{run.n_replicas} replicas x {run.n_snapshots} snapshots" in text.output
    doc = runner.invoke(cli, ["info", "--as", "json", str(sample)])
    assert doc.exit_code == 0
    (facts,) = json.loads(doc.output)["runs"]
    assert (facts["n_replicas"], facts["n_snapshots"]) == (run.n_replicas, run.n_snapshots)
    assert runner.invoke(cli, ["info", "--as", "table", str(sample)]).exit_code == 2
