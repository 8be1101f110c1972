"""Issue 11, defect 7: the commit marker (``state``) is checked against the arrays, not
trusted. A marker beyond the arrays, or a complete run that commits nothing, fails
``schema`` instead of passing with every other check skipped."""

from __future__ import annotations

import json
from pathlib import Path

from _audit_runs import write_run

from massarc.validators import audit


def _set_state(run: Path, **state: object) -> None:
    """Rewrite the commit marker of ``run`` in place (the attack: edit zarr.json)."""
    node = run / "zarr.json"
    doc = json.loads(node.read_text())
    doc["attributes"]["massarc"]["state"].update(state)
    node.write_text(json.dumps(doc))


def _schema(run: Path):
    report = audit([run], checks=["schema", "integrity"])
    return report, report.runs[0].checks[0]


def test_marker_beyond_the_array_fails_schema(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", snapshots=60)
    _set_state(run, snapshots=5000)
    report, schema = _schema(run)
    assert schema.status == "fail"
    assert "state.snapshots: expected at most 60 (the length of mass); got 5000" in schema.message
    assert report.exit_code == 1


def test_marker_beyond_the_replicas_fails_schema(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=3)
    _set_state(run, replicas=7)
    _report, schema = _schema(run)
    assert schema.status == "fail"
    assert "state.replicas: expected at most 3 (the replicas of mass); got 7" in schema.message


def test_complete_run_with_nothing_committed_fails(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", snapshots=60)
    _set_state(run, snapshots=0, complete=True)
    report, schema = _schema(run)
    assert schema.status == "fail"
    assert "state: complete is true but 0 snapshots are committed" in schema.message
    assert report.exit_code == 1


def test_honest_marker_still_passes(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr")
    _report, schema = _schema(run)
    assert schema.status == "pass", schema.message
