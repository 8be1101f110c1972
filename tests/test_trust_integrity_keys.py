"""Issue 11, defect 14 (integrity): with chunks that split the lattice, ``integrity`` names
the chunk that is missing, not its neighbour at site 0; a missing ``time`` chunk is
reported by ``integrity`` (zarr reads it as NaN, the fill value)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import zarr
from _audit_runs import write_run

from massarc.validators import audit


def _rechunk(run: Path, name: str, chunks: tuple[int, ...]) -> None:
    """Re-store array ``name`` with other chunks (e.g. ``mass`` split along the lattice, a
    layout other writers use; zarr-python reads it)."""
    g = zarr.open_group(str(run), mode="r+")
    old = g[name]
    data, attrs = old[:], dict(old.attrs)
    dims, fill = old.metadata.dimension_names, old.fill_value
    del g[name]
    new = g.create_array(
        name, shape=data.shape, chunks=chunks, dtype=data.dtype, fill_value=fill,
        dimension_names=dims,
    )  # fmt: skip
    new[:] = data
    new.attrs.update(attrs)


def _integrity(run: Path):
    return audit([run], checks=["integrity"]).runs[0].checks[0]


def test_missing_lattice_chunk_is_named(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=30, sites=(16,))
    _rechunk(run, "mass", (1, 10, 8))
    (run / "mass" / "c" / "1" / "2" / "1").unlink()  # replica 1, snapshots 20..29, sites 8..15
    res = _integrity(run)
    assert res.status == "fail"
    assert res.message.startswith("1 of 6 chunks unreadable: mass/c/1/2/1 is missing")
    assert res.where.chunk == "mass/c/1/2/1"
    assert "mass/c/1/2/0" not in res.message


def test_missing_time_chunk_fails_integrity(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=30)
    _rechunk(run, "time", (10,))
    (run / "time" / "c" / "1").unlink()  # snapshots 10..19
    res = _integrity(run)
    assert res.status == "fail"
    assert "time/c/1" in res.message and "missing" in res.message
    assert np.isnan(zarr.open_array(str(run / "time"))[:]).any()  # what zarr alone gives
