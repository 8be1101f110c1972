"""``massarc check``: exit status 0 / 1 / 2, report formats, one-line errors."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import zarr
from _audit_runs import write_run
from click.testing import CliRunner

from massarc.cli import cli

BASIC = ["--only", "schema", "--only", "integrity", "--only", "conservation"]


def _run(*args: str):
    return CliRunner().invoke(cli, ["check", *args], catch_exceptions=False)


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    d = tmp_path_factory.mktemp("cli")

    def lose(m, t):  # replica 1 loses one unit at snapshot 30 (and keeps it lost)
        site = int(np.argmax(m[1, 30]))
        m[1, 30:, site] = np.maximum(m[1, 30:, site].astype(np.int64) - 1, 0)

    return {
        "good": write_run(d / "good.zarr"),
        "bad": write_run(d / "bad.zarr", edit=lose, strict=False),
        "dir": d,
    }


def test_clean_run_exits_0(runs) -> None:
    res = _run(str(runs["good"]), *BASIC)
    assert res.exit_code == 0, res.output
    assert "conservation" in res.stdout and "1 run audited" in res.stdout
    assert res.stderr == ""  # no progress bar off a terminal


def test_failing_run_exits_1_with_json(runs) -> None:
    res = _run(str(runs["good"]), str(runs["bad"]), *BASIC, "--as", "json")
    assert res.exit_code == 1
    doc = json.loads(res.stdout)
    assert [r["status"] for r in doc["runs"]] == ["pass", "fail"]
    cons = next(c for c in doc["runs"][1]["checks"] if c["id"] == "conservation")
    assert cons["where"] == {"replica": 1, "snapshot": 30}


def test_junit_to_a_file(runs, tmp_path) -> None:
    out = tmp_path / "report.xml"
    res = _run(str(runs["bad"]), *BASIC, "--as", "junit", "--output", str(out))
    assert res.exit_code == 1 and res.stdout == ""
    root = ET.parse(out).getroot()
    assert (root.get("tests"), root.get("failures")) == ("3", "1")


def test_collection_directory_gives_one_document(runs) -> None:
    res = _run(str(runs["dir"]), *BASIC, "--as", "json", "--quiet")
    assert res.exit_code == 1
    assert sorted(r["path"].rsplit("/", 1)[-1] for r in json.loads(res.stdout)["runs"]) == [
        "bad.zarr",
        "good.zarr",
    ]


def test_skip_and_set(runs) -> None:
    res = _run(str(runs["bad"]), *BASIC, "--skip", "conservation")
    assert res.exit_code == 0 and "skipped by configuration" in res.stdout
    res = _run(str(runs["bad"]), *BASIC, "--set", "conservation.tolerance=1", "-q")
    assert res.exit_code == 0


def test_config_file_beside_runs(runs, tmp_path) -> None:
    cfg = tmp_path / "ci.toml"
    cfg.write_text("[checks.conservation]\ntolerance = 1\n")
    assert _run(str(runs["bad"]), *BASIC, "--config", str(cfg)).exit_code == 0


def test_list(runs) -> None:
    res = _run("--list")
    assert res.exit_code == 0
    ids = [line.split()[0] for line in res.stdout.splitlines()]
    assert ids[:5] == ["schema", "integrity", "time-order", "nonnegative", "conservation"]
    assert "tolerance=0" in res.stdout


def _one_line_error(res, pattern: str) -> None:
    assert res.exit_code == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("massarc check: error: "), res.stderr
    assert pattern in lines[0]


def test_inputs_that_cannot_be_read_exit_2(tmp_path, runs) -> None:
    _one_line_error(_run(str(tmp_path / "absent.zarr")), "no such file or directory")
    zarr.open_group(str(tmp_path / "plain.zarr"), mode="w", zarr_format=3)
    _one_line_error(_run(str(tmp_path / "plain.zarr")), "holds no massarc run")
    (tmp_path / "not-zarr").mkdir()
    (tmp_path / "not-zarr" / "zarr.json").write_text("{broken")
    assert _run(str(tmp_path / "not-zarr")).exit_code == 2
    newer = write_run(tmp_path / "newer.zarr")
    g = zarr.open_group(str(newer), mode="r+")
    g.attrs["massarc"] = {**g.attrs["massarc"], "format_version": "2.1"}
    _one_line_error(_run(str(newer)), "format_version: expected 1.x")


def test_usage_and_config_errors_exit_2(tmp_path, runs) -> None:
    _one_line_error(_run(), "expected at least one RUN_OR_COLLECTION")
    _one_line_error(_run(str(runs["good"]), "--colour"), "No such option")
    _one_line_error(_run(str(runs["good"]), "--only", "nope"), "--only: expected one of")
    _one_line_error(_run(str(runs["good"]), "--as", "pdf"), "Invalid value for '--as'")
    bad = tmp_path / "massarc.toml"
    bad.write_text("strict = 'yes'\n")
    _one_line_error(_run(str(runs["good"]), "--config", str(bad)), "strict: expected true or false")
    _one_line_error(
        _run(str(runs["good"]), "--output", str(tmp_path / "no" / "dir.json"), *BASIC),
        "cannot write the report",
    )
