"""Issue 11, defect 3: absurd declared shapes. A few-KB run whose header and arrays claim
10^15 snapshots, or 10^9 replicas, is refused before any chunk list is built: a run cannot
declare more snapshots than its chunks could contain at the maximum compression ratio.
``check`` fails it (schema), ``info`` names the problem without printing the count; both
finish quickly under an address-space cap (tests/_hostile.py)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from _audit_runs import write_run
from _hostile import capped_massarc

RULE = "a run cannot declare more snapshots than its chunks could contain"


def _claim(run: Path, replicas: int, snapshots: int) -> None:
    """Rewrite the shapes and the commit marker (the attack: edit three small files)."""
    for rel, shape in (("mass", [replicas, snapshots, 16]), ("time", [snapshots])):
        node = run / rel / "zarr.json"
        doc = json.loads(node.read_text())
        doc["shape"] = shape
        node.write_text(json.dumps(doc))
    head = run / "zarr.json"
    doc = json.loads(head.read_text())
    doc["attributes"]["massarc"]["state"].update(replicas=replicas, snapshots=snapshots)
    head.write_text(json.dumps(doc))


@pytest.mark.parametrize(("replicas", "snapshots"), [(3, 10**15), (10**9, 20)])
def test_absurd_shape_is_refused_before_reading(
    tmp_path: Path, replicas: int, snapshots: int
) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=3, snapshots=20)
    _claim(run, replicas, snapshots)
    assert sum(f.stat().st_size for f in run.rglob("*") if f.is_file()) < 20_000
    check = capped_massarc("check", str(run), "--as", "json", timeout=60)
    assert check.returncode == 1, check.stderr[-2000:]
    (report,) = json.loads(check.stdout)["runs"]
    schema = next(c for c in report["checks"] if c["id"] == "schema")
    assert schema["status"] == "fail" and RULE in schema["message"]
    info = capped_massarc("info", str(run), timeout=60)
    assert info.returncode == 0, info.stderr[-2000:]
    assert RULE in info.stdout
    assert str(max(replicas, snapshots)) not in info.stdout + info.stderr
    convert = capped_massarc("convert", str(run), str(tmp_path / "out.npz"), timeout=60)
    assert convert.returncode == 2 and RULE in convert.stderr
    assert len(convert.stderr.strip().splitlines()) == 1
