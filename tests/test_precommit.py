"""The pre-commit hook: its definition (.pre-commit-hooks.yaml), the mapping from changed
files to the runs that hold them, and the command it runs.

Outside truth: the manifest keys and languages pre-commit documents for
`.pre-commit-hooks.yaml` (from memory: https://pre-commit.com/#new-hooks), read with the
YAML library pre-commit itself uses (PyYAML); the file lists a pre-commit hook receives are
the paths `git` reports, relative to the repository root.
"""

from __future__ import annotations

import re
import shlex
import tomllib
from pathlib import Path

import numpy as np
import pytest
import yaml
from _audit_runs import write_run
from click.testing import CliRunner

from massarc.archive.enclosing import enclosing_runs
from massarc.cli import cli

ROOT = Path(__file__).resolve().parents[1]
FIXTURES = Path(__file__).parent / "fixtures" / "v1.1"

# pre-commit's manifest schema (from memory, https://pre-commit.com/#new-hooks)
REQUIRED = {"id": str, "name": str, "entry": str, "language": str}
OPTIONAL = {
    "alias": str,
    "files": str,
    "exclude": str,
    "types": list,
    "types_or": list,
    "exclude_types": list,
    "always_run": bool,
    "fail_fast": bool,
    "verbose": bool,
    "pass_filenames": bool,
    "require_serial": bool,
    "description": str,
    "language_version": str,
    "minimum_pre_commit_version": str,
    "args": list,
    "stages": list,
    "additional_dependencies": list,
    "log_file": str,
}
LANGUAGES = {"conda", "docker", "docker_image", "golang", "node", "python", "script", "system"}


def _hooks() -> list[dict]:
    hooks = yaml.safe_load((ROOT / ".pre-commit-hooks.yaml").read_text(encoding="utf-8"))
    assert isinstance(hooks, list) and hooks, "expected a YAML list of hooks"
    return hooks


def test_the_hook_definition_follows_the_manifest_schema() -> None:
    hooks = _hooks()
    assert len({h["id"] for h in hooks}) == len(hooks)
    for hook in hooks:
        for key, kind in REQUIRED.items():
            assert isinstance(hook.get(key), kind), f"{hook.get('id')}: {key}"
        for key, value in hook.items():
            assert key in REQUIRED or key in OPTIONAL, f"{hook['id']}: unknown key {key!r}"
            assert isinstance(value, (REQUIRED | OPTIONAL)[key]), f"{hook['id']}: {key}"
        assert hook["language"] in LANGUAGES
        for key in ("files", "exclude"):
            if key in hook:
                re.compile(hook[key])


def test_the_hook_runs_our_console_script_once_over_all_files() -> None:
    (hook,) = _hooks()
    scripts = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["scripts"]
    words = shlex.split(hook["entry"])
    assert words[0] in scripts  # installed by `language: python` from this repository
    assert hook["pass_filenames"] is True and hook["require_serial"] is True


def _leak(m: np.ndarray, _t: np.ndarray) -> None:
    site = int(np.argmax(m[0, 20]))
    m[0, 20:, site] = np.maximum(m[0, 20:, site].astype(np.int64) - 1, 0)


@pytest.fixture
def repo(tmp_path, monkeypatch) -> Path:
    """A repository that keeps runs: a clean one and a leaking one under data/."""
    write_run(tmp_path / "data" / "clean.zarr", seed=1)
    write_run(tmp_path / "data" / "leak.zarr", seed=2, edit=_leak, strict=False)
    (tmp_path / "notes.md").write_text("a file outside any run\n")
    # the repository's own audit rules (the test runs are not physical trajectories)
    (tmp_path / "pyproject.toml").write_text(
        '[tool.massarc]\nskip = ["steady-state", "boundary", "stationary-law", "drift", '
        '"independence"]\n'
    )
    monkeypatch.chdir(tmp_path)
    return tmp_path


def _files(run: str) -> list[str]:
    """The files of a run as git names them (relative, '/'-separated)."""
    return sorted(p.as_posix() for p in Path(run).rglob("*") if p.is_file())


def test_changed_files_map_to_their_runs_once(repo) -> None:
    files = ["notes.md", *_files("data/leak.zarr"), "data/clean.zarr/mass/zarr.json"]
    files.append("data/leak.zarr/mass/c/0/9/0")  # a chunk deleted in the commit
    assert enclosing_runs(files) == ["data/leak.zarr", "data/clean.zarr"]
    assert enclosing_runs(["notes.md", "data"]) == []


def test_a_collection_covers_its_runs_and_summaries_stay_with_their_run(monkeypatch) -> None:
    monkeypatch.chdir(FIXTURES)  # relative names, as git gives them
    sweep = _files("sweep.zarr")
    assert enclosing_runs(sweep) == ["sweep.zarr"]  # its own metadata changed: the whole
    assert enclosing_runs([f for f in sweep if "/b4.0/" in f]) == ["sweep.zarr/b4.0"]
    summarized = _files("zrp-ring-summarized.zarr")
    assert any("/summaries/" in f for f in summarized)
    assert enclosing_runs(summarized) == ["zrp-ring-summarized.zarr"]


def test_the_hook_command_fails_a_commit_that_changes_a_leaking_run(repo) -> None:
    (hook,) = _hooks()
    args = shlex.split(hook["entry"])[1:]
    runner = CliRunner()
    leak = runner.invoke(cli, [*args, "notes.md", *_files("data/leak.zarr")])
    assert leak.exit_code == 1, leak.output
    assert "data/leak.zarr" in leak.stdout and "conservation" in leak.stdout
    assert "data/clean.zarr" not in leak.stdout  # unchanged runs are not audited
    clean = runner.invoke(cli, [*args, *_files("data/clean.zarr")])
    assert clean.exit_code == 0, clean.output


def test_a_commit_without_runs_passes_the_hook(repo) -> None:
    (hook,) = _hooks()
    args = shlex.split(hook["entry"])[1:]
    got = CliRunner().invoke(cli, [*args, "notes.md"])
    assert got.exit_code == 0 and "no massarc run holds any of the 1 files" in got.stderr
