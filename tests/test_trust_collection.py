"""Issue 11, defect 6: a collection lists every run it found. A run whose ``zarr.json`` is
truncated, or whose ``mass`` metadata zarr cannot parse (an unknown codec, a list instead
of an object), is reported as that run's ``schema`` failure; the sweep goes on."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from _audit_runs import write_run
from click.testing import CliRunner

from massarc.cli import cli
from massarc.validators import audit, open_for_audit


@pytest.fixture
def sweep(tmp_path: Path) -> Path:
    d = tmp_path / "sweep"
    for name in ("a", "b", "c", "d"):
        write_run(d / f"{name}.zarr", snapshots=20)
    head = d / "b.zarr" / "zarr.json"
    head.write_text(head.read_text()[:50])  # cut off mid-way
    node = d / "c.zarr" / "mass" / "zarr.json"
    doc = json.loads(node.read_text())
    doc["codecs"].append({"name": "no-such-codec"})
    node.write_text(json.dumps(doc))
    (d / "d.zarr" / "mass" / "zarr.json").write_text("[1, 2]")
    return d


def _by_run(report) -> dict[str, dict[str, object]]:
    return {Path(r.path).name: {c.id: c for c in r.checks} for r in report.runs}


def test_every_run_is_listed_and_broken_ones_fail_schema(sweep: Path) -> None:
    report = audit(open_for_audit(sweep), checks=["schema", "integrity", "conservation"])
    runs = _by_run(report)
    assert sorted(runs) == ["a.zarr", "b.zarr", "c.zarr", "d.zarr"]
    assert runs["a.zarr"]["schema"].status == "pass"
    assert runs["a.zarr"]["conservation"].status == "pass"
    b = runs["b.zarr"]["schema"]
    assert b.status == "fail" and "b.zarr/zarr.json" in b.message and "JSON" in b.message
    c = runs["c.zarr"]["schema"]
    assert c.status == "fail" and "mass" in c.message and "no-such-codec" in c.message
    d = runs["d.zarr"]["schema"]
    assert d.status == "fail" and "mass" in d.message
    for name in ("b.zarr", "c.zarr", "d.zarr"):
        assert runs[name]["conservation"].status == "skip"
    assert report.exit_code == 1


def test_check_command_reports_the_sweep_without_a_traceback(sweep: Path) -> None:
    res = CliRunner().invoke(cli, ["check", str(sweep), "--as", "json"], catch_exceptions=False)
    assert res.exit_code == 1, res.output
    doc = json.loads(res.stdout)
    assert len(doc["runs"]) == 4


def test_info_lists_the_broken_runs(sweep: Path) -> None:
    res = CliRunner().invoke(cli, ["info", str(sweep), "--as", "json"], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    facts = json.loads(res.stdout)["runs"]
    assert len(facts) == 4
    assert "problems" in facts[1] and "zarr.json" in facts[1]["problems"][0]
