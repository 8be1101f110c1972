"""Issue 11, "what to build" 3: no traceback reaches the user unless ``--debug`` is given.

An unexpected internal error (planted here by making a function every ``info`` call needs
raise) gives one line ``massarc info: internal error: ...`` and exit status 3 (README, exit
status); with ``massarc --debug`` or ``MASSARC_DEBUG=1`` the traceback comes instead. Bad
input stays one line and exit status 2 either way, with its traceback first under
``--debug``.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from _audit_runs import write_run
from click.testing import CliRunner

import massarc.cli.info as info_command
from massarc.cli import EXIT_INTERNAL, cli


@pytest.fixture
def run(tmp_path: Path) -> Path:
    return write_run(tmp_path / "run.zarr", replicas=2, snapshots=20)


@pytest.fixture
def broken(monkeypatch: pytest.MonkeyPatch) -> None:
    def explode(*args: object, **kwargs: object) -> None:
        raise ZeroDivisionError("planted\nsecond line of the planted error")

    monkeypatch.setattr(info_command, "run_facts", explode)


def test_an_internal_error_is_one_line_without_debug(run: Path, broken: None) -> None:
    res = CliRunner().invoke(cli, ["info", str(run)])
    assert res.exit_code == EXIT_INTERNAL == 3, res.output
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1, res.stderr
    assert lines[0].startswith("massarc info: internal error: ZeroDivisionError: planted")
    assert "--debug" in lines[0]
    assert "Traceback" not in res.stderr and res.stdout == ""


@pytest.mark.parametrize("how", ["option", "environment"])
def test_debug_shows_the_traceback(run: Path, broken: None, how: str) -> None:
    args, env = (
        (["--debug", "info", str(run)], {})
        if how == "option"
        else (
            ["info", str(run)],
            {"MASSARC_DEBUG": "1"},
        )
    )
    res = CliRunner().invoke(cli, args, env=env)
    # CliRunner keeps the exception that escaped the command: the traceback a user sees
    assert isinstance(res.exception, ZeroDivisionError), res.output
    assert res.exit_code not in (0, 2, EXIT_INTERNAL)
    assert "internal error" not in res.stderr


def test_debug_in_a_real_process_prints_the_traceback(tmp_path: Path) -> None:
    """Through the console entry point (a real interpreter), an internal error planted with
    a ``sitecustomize`` hook: one line without ``--debug``, a Python traceback with it."""
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=20)
    hook = tmp_path / "hook"
    hook.mkdir()
    (hook / "sitecustomize.py").write_text(
        "import massarc.cli.info as m\n"
        "def explode(*a, **k):\n    raise ZeroDivisionError('planted')\n"
        "m.run_facts = explode\n"
    )
    import os

    env = {**os.environ, "PYTHONPATH": f"{hook}{os.pathsep}{os.environ.get('PYTHONPATH', '')}"}
    code = "from massarc.cli import main; main()"
    plain = subprocess.run(
        [sys.executable, "-c", code, "info", str(run)], env=env, capture_output=True, text=True
    )
    assert plain.returncode == 3, plain.stderr
    assert plain.stderr.count("\n") == 1 and "Traceback" not in plain.stderr
    debug = subprocess.run(
        [sys.executable, "-c", code, "--debug", "info", str(run)],
        env=env,
        capture_output=True,
        text=True,
    )
    assert debug.returncode == 1, debug.stderr  # Python's own status for an uncaught error
    assert "Traceback (most recent call last)" in debug.stderr
    assert debug.stderr.rstrip().endswith("ZeroDivisionError: planted")


def test_bad_input_stays_one_line_and_debug_adds_its_traceback(tmp_path: Path) -> None:
    missing = tmp_path / "nothing.zarr"
    plain = CliRunner().invoke(cli, ["info", str(missing)])
    assert plain.exit_code == 2
    assert len(plain.stderr.strip().splitlines()) == 1 and "Traceback" not in plain.stderr
    debug = CliRunner().invoke(cli, ["--debug", "info", str(missing)])
    assert debug.exit_code == 2
    assert "Traceback (most recent call last)" in debug.stderr
    assert debug.stderr.strip().splitlines()[-1] == plain.stderr.strip()


def test_usage_errors_and_help_are_not_internal_errors() -> None:
    res = CliRunner().invoke(cli, ["info", "--no-such-option"])
    assert res.exit_code == 2 and "internal error" not in res.stderr
    res = CliRunner().invoke(cli, ["--help"])
    assert res.exit_code == 0 and "--debug" in res.stdout
