"""The basic checks catch planted faults at the planted place, and pass clean runs.

Every fault below is planted at a (replica, snapshot, site) chosen by the test, so the
expected location is known by construction (common practice: fault injection).
"""

from __future__ import annotations

import numpy as np
import pytest
from _audit_runs import chunk_file, write_run
from conftest import make_meta

from massarc.archive import create_run, open_run
from massarc.validators import audit

BASIC = ["schema", "integrity", "time-order", "nonnegative", "conservation"]


def _checks(path, **kw):
    report = audit([path], checks=BASIC, workers=2, **kw)
    return {c.id: c for c in report.runs[0].checks}, report


def _where(c):
    return c.where.model_dump(exclude_none=True) if c.where else {}


@pytest.mark.parametrize(
    ("sites", "dtype", "replicas"), [((16,), None, 3), ((5, 7), "uint16", 2), ((33,), "int32", 1)]
)
def test_clean_runs_pass(tmp_path, sites, dtype, replicas) -> None:
    path = write_run(tmp_path / "r.zarr", sites=sites, dtype=dtype, replicas=replicas)
    checks, report = _checks(path)
    assert {c.id: c.status for c in checks.values()} == dict.fromkeys(BASIC, "pass"), report
    assert report.status == "pass" and report.exit_code == 0


def test_clean_simulated_runs_pass(tmp_path) -> None:
    from massarc.simulate import simulate, snapshot_times

    for family, kw in (("zrp", {"b": 4.0}), ("cmam", {})):
        meta = make_meta(family, sites=(12,), **kw)
        loc = tmp_path / f"{family}.zarr"
        simulate(meta, snapshot_times(4.0, 30), replicas=2, seed=5, mass=18, location=loc)
        checks, report = _checks(loc)
        assert all(c.status == "pass" for c in checks.values()), report


def test_lost_particle_is_located(tmp_path) -> None:
    def lose(m, t):  # replica 2 loses one unit from snapshot 37 on
        site = int(np.argmax(m[2, 37]))
        m[2, 37:, site] -= 1
        m[2, 37:, site] = np.maximum(m[2, 37:, site], 0)

    path = write_run(tmp_path / "r.zarr", edit=lose, strict=False)
    checks, _ = _checks(path)
    c = checks["conservation"]
    assert c.status == "fail" and _where(c) == {"replica": 2, "snapshot": 37}
    assert c.values["discrepancy"] < 0 and c.values["affected_replicas"] == 1
    assert c.values["reference"] == "declared total mass"
    assert checks["nonnegative"].status == "pass" and checks["integrity"].status == "pass"


def test_duplicated_particle_counts_affected_snapshots(tmp_path) -> None:
    def dup(m, t):
        m[1, 5, 3] += 1  # one snapshot of replica 1 holds one unit too many

    meta = make_meta(sites=(16,))
    path = write_run(tmp_path / "r.zarr", edit=dup, strict=False, meta=meta)
    c = _checks(path)[0]["conservation"]
    assert c.status == "fail" and _where(c) == {"replica": 1, "snapshot": 5}
    assert (c.values["discrepancy"], c.values["affected_snapshots"]) == (1, 1)


def test_undeclared_total_uses_first_snapshot(tmp_path) -> None:
    def vary(m, t):
        m[0, 0, 0] += 2  # replicas start with different totals: nothing is declared
        m[0, 9, 1] += 1

    path = write_run(tmp_path / "r.zarr", edit=vary, strict=False)
    c = _checks(path)[0]["conservation"]
    assert c.values["reference"] == "first snapshot of each replica"
    assert c.status == "fail" and _where(c) == {"replica": 0, "snapshot": 1}


def test_negative_mass_in_int32_archive(tmp_path) -> None:
    def plant(m, t):
        keep = int(m[1, 12, 3])
        m[1, 12, 3] = -2
        m[1, 12, 4] += keep + 2  # the total stays the same

    path = write_run(tmp_path / "r.zarr", dtype="int32", edit=plant, strict=False)
    checks, _ = _checks(path)
    c = checks["nonnegative"]
    assert c.status == "fail" and _where(c) == {"replica": 1, "snapshot": 12, "site": 3}
    assert c.values["value"] == -2 and c.values["negative"] == 1
    assert checks["conservation"].status == "pass"


def test_negative_mass_in_2d_reports_coordinates(tmp_path) -> None:
    def plant(m, t):
        keep = int(m[0, 7, 2, 3])
        m[0, 7, 2, 3] = -1
        m[0, 7, 0, 0] += keep + 1

    path = write_run(tmp_path / "r.zarr", sites=(4, 5), dtype="int16", edit=plant, strict=False)
    c = _checks(path)[0]["nonnegative"]
    assert c.status == "fail" and _where(c) == {"replica": 0, "snapshot": 7, "site": [2, 3]}


def test_swapped_times(tmp_path) -> None:
    def swap(m, t):
        t[[20, 21]] = t[[21, 20]]

    checks, _ = _checks(write_run(tmp_path / "r.zarr", edit=swap, strict=False))
    c = checks["time-order"]
    assert c.status == "fail" and _where(c) == {"snapshot": 21}
    assert c.values["offending"] == 1
    assert checks["conservation"].status == "pass"


def test_non_finite_time(tmp_path) -> None:
    def nan(m, t):
        t[33] = np.nan

    c = _checks(write_run(tmp_path / "r.zarr", edit=nan, strict=False))[0]["time-order"]
    assert c.status == "fail" and _where(c) == {"snapshot": 33}


@pytest.mark.parametrize(("how", "kind"), [("flip", "corrupt"), ("delete", "missing")])
def test_damaged_chunk_file(tmp_path, how, kind) -> None:
    path = write_run(tmp_path / "r.zarr", replicas=3, snapshots=60, chunk=10)
    f = chunk_file(path, 1, 2)
    if how == "delete":
        f.unlink()
    else:
        raw = bytearray(f.read_bytes())
        raw[len(raw) // 2] ^= 0xFF
        f.write_bytes(bytes(raw))
    checks, _ = _checks(path)
    c = checks["integrity"]
    assert c.status == "fail" and c.values[kind] == 1
    assert _where(c) == {"replica": 1, "snapshot": 20, "chunk": "mass/c/1/2/0"}
    assert "snapshots 20..29" in c.message
    # the other checks go on without the chunk
    assert checks["conservation"].status == "pass" and "integrity" in checks["conservation"].message
    assert checks["nonnegative"].status == "pass"


def test_never_written_values(tmp_path) -> None:
    def plant(m, t):
        m[0, 44, 6] = 255  # the fill value of uint8: what a missing chunk would read as

    path = write_run(tmp_path / "r.zarr", dtype="uint8", edit=plant, strict=False)
    c = _checks(path)[0]["integrity"]
    assert c.status == "fail" and _where(c) == {"replica": 0, "snapshot": 44, "site": 6}
    assert c.values["never_written"] == 1


def test_schema_problems(tmp_path) -> None:
    meta = make_meta(sites=(16,))
    meta = meta.model_copy(
        update={"run": meta.run.model_copy(update={"total_mass": 41, "seeds": [1, 2]})}
    )
    path = write_run(tmp_path / "r.zarr", meta=meta, strict=False)
    c = _checks(path)[0]["schema"]
    assert c.status == "fail"
    problems = c.values["problems"]
    assert any(
        "run.total_mass is 41" in p and "replica 0, snapshot 0 holds 40" in p for p in problems
    )
    assert any("run.seeds: expected 3 seeds" in p for p in problems)
    assert _where(c) == {"replica": 0, "snapshot": 0}


def test_incomplete_archive_is_a_warning_with_extent(tmp_path) -> None:
    path = write_run(tmp_path / "r.zarr", close=False)
    c = _checks(path)[0]["schema"]
    assert c.status == "warn" and "3 replicas x 60 snapshots committed" in c.message
    assert _checks(path, strict=True)[0]["schema"].status == "fail"


def test_invalid_metadata_fails_schema_and_skips_dependent_checks(tmp_path) -> None:
    import zarr

    path = write_run(tmp_path / "r.zarr")
    g = zarr.open_group(str(path), mode="r+")
    header = dict(g.attrs["massarc"])
    header["metadata"] = {**header["metadata"], "lattice": {"sites": [16], "boundary": "ring"}}
    g.attrs["massarc"] = header
    checks, _ = _checks(path)
    assert checks["schema"].status == "fail" and "lattice.boundary" in checks["schema"].message
    assert checks["conservation"].status == "skip"
    assert checks["integrity"].status == "pass"


def test_open_boundary_with_and_without_flow_series(tmp_path) -> None:
    meta = make_meta(sites=(10,), boundary="open")
    rng = np.random.default_rng(3)
    x = rng.integers(0, 4, size=(2, 30, 10))
    total = x.reshape(2, 30, -1).sum(axis=2)
    delta = np.diff(total, axis=1, prepend=total[:, :1])
    inflow = np.cumsum(np.where(delta > 0, delta, 0), axis=1)
    outflow = np.cumsum(np.where(delta < 0, -delta, 0), axis=1)
    outflow[1, 17:] += 1  # replica 1 books one unit leaving that did not leave
    for name, series in (("flows", {"inflow": inflow, "outflow": outflow}), ("bare", {})):
        with create_run(tmp_path / f"{name}.zarr", meta, snapshots_hint=8) as w:
            w.append(np.arange(30.0), x, **series)
    c = _checks(tmp_path / "flows.zarr")[0]["conservation"]
    assert c.status == "fail" and _where(c) == {"replica": 1, "snapshot": 17}
    assert c.values["affected_snapshots"] == 13
    c = _checks(tmp_path / "bare.zarr")[0]["conservation"]
    assert c.status == "skip" and "inflow or outflow" in c.message


def test_empty_run_skips_data_checks(tmp_path) -> None:
    w = create_run(tmp_path / "r.zarr", make_meta())
    w.close()
    checks, _ = _checks(tmp_path / "r.zarr")
    assert {k: c.status for k, c in checks.items() if k != "schema"} == dict.fromkeys(
        ["integrity", "time-order", "nonnegative", "conservation"], "skip"
    )
    assert open_run(tmp_path / "r.zarr").n_snapshots == 0
