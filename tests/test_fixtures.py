"""Frozen fixtures: every released archive version stays readable, bit-exact, forever.

Under tests/fixtures/v<version>/ each fixture (a run archive, a collection, a zip store, or
an interchange file) was written once by make_fixtures.py and is never regenerated; what it
must read back as sits beside it in ``<name>.expected.json``: masses and times drawn from a
seed (or replayed move by move from the drawn event log) and the metadata as declared. The
fixtures written before the ``kind`` key existed are runs named ``<name>.zarr``.
"""

from __future__ import annotations

import importlib.util
import json
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import zarr

from massarc.archive import NotARunError, Run, open_run, open_runs
from massarc.archive.formats import convert
from massarc.schema import ARCHIVE_VERSION, parse_metadata

ROOT = Path(__file__).parent / "fixtures"
EXPECTED = sorted(ROOT.glob("v*/*.expected.json"))
#: Name of the fixture of a summarised run, written by its own generator.
SUMMARIZED = "zrp-ring-summarized"
GENERATOR = ROOT / "make_fixtures.py"
#: What every archive version must have a frozen example of.
REQUIRED = {
    "run",
    "run with inflow/outflow",
    "run with an event log",
    "collection",
    "zip",
    "text",
    "csv-long",
    "csv-wide",
    "events",
}


def _load(path: Path) -> dict[str, Any]:
    doc = json.loads(path.read_text(encoding="utf-8"))
    stem = path.name.removesuffix(".expected.json")
    return {"kind": "run", "fixture": f"{stem}.zarr", **doc}


def _features(doc: dict[str, Any]) -> set[str]:
    out = {doc["kind"]}
    if "inflow" in doc:
        out.add("run with inflow/outflow")
    if "events" in doc:
        out.add("run with an event log")
    return out


def _same_run(run: Run, expected: dict[str, Any]) -> None:
    """The run holds exactly the expected masses, times, optional parts and metadata."""
    mass = np.asarray(expected["mass"])
    assert run.complete
    assert run.shape == mass.shape
    assert np.array_equal(np.asarray(run.mass[:]), mass)
    assert np.array_equal(run.times, np.asarray(expected["time"]))  # bit-exact floats
    declared = parse_metadata(expected["metadata"])
    assert run.meta.model == declared.model
    assert run.meta.lattice == declared.lattice
    assert run.meta.run.regime == declared.run.regime
    if declared.lattice.closed:
        assert run.meta.run.total_mass == int(mass[0, 0].sum())
    for key in ("inflow", "outflow"):
        if key in expected:
            assert np.array_equal(run.series(key), np.asarray(expected[key]))
        else:
            assert run.series(key) is None
    if "events" in expected:
        assert run.events is not None
        for key, values in expected["events"].items():
            assert np.array_equal(np.asarray(run.events[key][:]), np.asarray(values)), key
    else:
        assert run.events is None


def _plain_zarr(group: zarr.Group, expected: dict[str, Any]) -> None:
    """Without massarc, zarr-python sees the same numbers (FORMAT.md: any Zarr v3 reader)."""
    assert np.array_equal(group["mass"][:], np.asarray(expected["mass"]))
    assert np.array_equal(group["time"][:], np.asarray(expected["time"]))


@pytest.mark.parametrize(
    "path", EXPECTED, ids=lambda p: f"{p.parent.name}/{p.name.removesuffix('.expected.json')}"
)
def test_fixture_reads_back_exactly(path: Path, tmp_path: Path) -> None:
    expected = _load(path)
    fixture = path.parent / expected["fixture"]
    kind = expected["kind"]
    before = sorted(p.stat().st_mtime_ns for p in [fixture, *fixture.rglob("*")])
    if kind in ("run", "zip"):
        _same_run(open_run(fixture), expected)
        if kind == "run":
            _plain_zarr(zarr.open_group(fixture, mode="r"), expected)
    elif kind == "collection":
        runs = open_runs(fixture)
        assert [r.name.rsplit("/", 1)[-1] for r in runs] == sorted(expected["runs"])
        for run in runs:
            _same_run(run, expected["runs"][run.name.rsplit("/", 1)[-1]])
        with pytest.raises(NotARunError, match="collection"):
            open_run(fixture)
    else:  # an interchange format: found from the file alone, converted to an archive
        back = tmp_path / "back.zarr"
        report = convert(fixture, back, options=expected.get("options"))
        assert report.source_format == kind
        _same_run(open_run(back), expected)
    after = sorted(p.stat().st_mtime_ns for p in [fixture, *fixture.rglob("*")])
    assert after == before  # inputs are never modified


def test_the_current_version_has_every_kind_of_fixture() -> None:
    current = [_load(p) for p in EXPECTED if p.parent.name == f"v{ARCHIVE_VERSION}"]
    have = set().union(*map(_features, current))
    assert have >= REQUIRED, f"missing frozen fixtures: {sorted(REQUIRED - have)}"


def _generate(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, str(GENERATOR), *args], capture_output=True, text=True, timeout=300
    )


def test_the_generator_writes_what_is_missing_and_refuses_to_rewrite_a_released_one(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "v"
    done = _generate("--out", str(out))
    assert done.returncode == 0, done.stderr
    names = sorted(p.name for p in out.glob("*.expected.json"))
    committed = sorted(
        p.name
        for p in (ROOT / f"v{ARCHIVE_VERSION}").glob("*.expected.json")
        if not p.name.startswith(SUMMARIZED)  # written by make_summary_fixture.py
    )
    assert names == committed  # every committed fixture has its case in the generator
    for path in out.glob("*.expected.json"):
        expected = _load(path)
        if expected["kind"] == "run":
            _same_run(open_run(out / expected["fixture"]), expected)
    stamp = (out / "ring.txt").stat().st_mtime_ns
    again = _generate("--out", str(out))
    assert again.returncode == 0 and "wrote nothing" in again.stdout
    spec = importlib.util.spec_from_file_location("make_fixtures", GENERATOR)
    assert spec is not None and spec.loader is not None
    generator = importlib.util.module_from_spec(spec)
    monkeypatch.setitem(sys.modules, "make_fixtures", generator)  # dataclasses look it up
    spec.loader.exec_module(generator)
    released = sorted(generator.RELEASED)[0]
    with pytest.raises(SystemExit, match="frozen"):
        generator.write_fixtures(out, force=frozenset({"ring-text"}), version=released)
    assert (out / "ring.txt").stat().st_mtime_ns == stamp
