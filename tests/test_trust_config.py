"""Issue 11, defect 1 and "what to build" 1: audit rules come from the person running the
audit. A configuration file inside a run or a collection is never read, and ``check`` says
so on stderr and in every report; every report (table, JSON, JUnit) says where each option
that is not at its default came from.

The rule itself is common practice (an audit must not be configurable by the audited
data); the run that loses mass is the outside truth: conservation must fail on it.
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from _audit_runs import write_run
from click.testing import CliRunner

from massarc.cli import cli
from massarc.validators.engine.settings import resolve_settings, travelling_configs

BASIC = ["--only", "schema", "--only", "conservation"]
LENIENT = "[checks.conservation]\ntolerance = 100000\n"
LENIENT_PYPROJECT = "[tool.massarc.checks.conservation]\ntolerance = 100000\n"


def _lose(m: np.ndarray, t: np.ndarray) -> None:  # replica 1 loses one unit from snapshot 30
    site = int(np.argmax(m[1, 30]))
    m[1, 30:, site] -= 1


@pytest.fixture
def download(tmp_path: Path) -> Path:
    """A downloaded collection: a leaky run and an honest one, with lenient rules inside the
    leaky run, at the top of the collection, and beside the runs in a subfolder."""
    data = tmp_path / "download"
    write_run(data / "leaky.zarr", edit=_lose, strict=False)
    write_run(data / "honest" / "good.zarr")
    (data / "leaky.zarr" / "massarc.toml").write_text(LENIENT)
    (data / "pyproject.toml").write_text(LENIENT_PYPROJECT)
    (data / "honest" / "massarc.toml").write_text(LENIENT)
    return data


def _check(*args: str):
    return CliRunner().invoke(cli, ["check", *args], catch_exceptions=False)


def _warned(stderr: str) -> list[str]:
    return [line for line in stderr.splitlines() if line.startswith("massarc check: warning:")]


def test_configuration_inside_the_audited_collection_is_named_and_ignored(
    download: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(download / "leaky.zarr")  # the upward search starts inside the run
    res = _check(str(download), *BASIC, "--as", "json")
    assert res.exit_code == 1, res.output  # the lenient rules were not applied
    doc = json.loads(res.stdout)
    leaky = next(r for r in doc["runs"] if r["path"].endswith("leaky.zarr"))
    assert {c["id"]: c["status"] for c in leaky["checks"]}["conservation"] == "fail"
    expected = {
        str(download / "leaky.zarr" / "massarc.toml"),
        str(download / "pyproject.toml"),
        str(download / "honest" / "massarc.toml"),
    }
    assert set(doc["ignored"]) == expected
    assert doc["config"] is None and doc["options"] == []
    warnings = _warned(res.stderr)
    assert len(warnings) == 3
    for path in expected:
        assert any(f"ignored {path}:" in w for w in warnings), warnings


def test_a_run_audited_alone_warns_about_its_own_file(
    download: Path, monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    auditor = tmp_path / "auditor"
    auditor.mkdir()
    monkeypatch.chdir(auditor)
    res = _check(str(download / "leaky.zarr"), *BASIC)
    assert res.exit_code == 1
    (warning,) = _warned(res.stderr)
    assert str(download / "leaky.zarr" / "massarc.toml") in warning
    assert f"ignored {download / 'leaky.zarr' / 'massarc.toml'}" in res.stdout  # the table


def test_explicit_config_is_read_even_inside_the_run(download: Path) -> None:
    """--config is the auditor's own choice: it is read and not reported as ignored."""
    chosen = download / "leaky.zarr" / "massarc.toml"
    s = resolve_settings(config=chosen, runs=[download / "leaky.zarr"])
    assert s.source == str(chosen) and s.ignored == ()
    assert s.options == {"conservation": {"tolerance": 100000}}


def test_the_walk_stops_at_runs(download: Path) -> None:
    """Files deeper inside a run (an array's folder) are never candidates, so the walk of a
    collection costs one look per folder down to its runs."""
    (download / "leaky.zarr" / "mass" / "massarc.toml").write_text(LENIENT)
    found = {p.relative_to(download).as_posix() for p in travelling_configs([download])}
    assert found == {"pyproject.toml", "leaky.zarr/massarc.toml", "honest/massarc.toml"}


def test_every_report_says_where_each_non_default_option_came_from(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    run = write_run(tmp_path / "runs" / "run.zarr")
    project = tmp_path / "project"
    project.mkdir()
    (project / "pyproject.toml").write_text(
        "[tool.massarc.checks.conservation]\ntolerance = 2\n"
        "[tool.massarc.checks.steady-state]\nrhat_max = 1.2\n"
    )
    monkeypatch.chdir(project)
    args = [str(run), *BASIC, "--set", "steady-state.rhat_max=1.05"]
    file = str(project / "pyproject.toml")
    table = _check(*args)
    assert table.exit_code == 0, table.output
    assert "option conservation.tolerance = 2 (from " + file + "; default 0)" in table.stdout
    assert "option steady-state.rhat_max = 1.05 (from --set; default " in table.stdout
    assert f"settings from {file}" in " ".join(table.stdout.split())  # the summary may wrap
    assert _warned(table.stderr) == []

    doc = json.loads(_check(*args, "--as", "json").stdout)
    by_key = {(o["check"], o["option"]): o for o in doc["options"]}
    assert by_key[("conservation", "tolerance")] == {
        "check": "conservation",
        "option": "tolerance",
        "value": 2,
        "default": 0,
        "source": file,
    }
    assert by_key[("steady-state", "rhat_max")]["source"] == "--set"
    assert by_key[("steady-state", "rhat_max")]["value"] == 1.05
    assert doc["config"] == file and doc["ignored"] == []

    root = ET.fromstring(_check(*args, "--as", "junit").stdout)
    suite = root.find("testsuite")
    assert suite is not None and suite[0].tag == "properties"  # first child, as JUnit wants
    props = {p.get("name"): p.get("value") for p in suite[0]}
    assert props["massarc.config"] == file
    assert props["massarc.option.conservation.tolerance"] == f"2 (from {file}; default 0)"
    assert props["massarc.option.steady-state.rhat_max"].startswith("1.05 (from --set;")


def test_defaults_only_report_no_options(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    run = write_run(tmp_path / "run.zarr")
    monkeypatch.chdir(tmp_path)
    doc = json.loads(_check(str(run), *BASIC, "--as", "json").stdout)
    assert doc["options"] == [] and doc["ignored"] == [] and doc["config"] is None
