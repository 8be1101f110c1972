"""Issue 11, "what to build" 3: ``massarc convert --allow-missing`` exports an archive with a
missing or corrupt chunk by writing an explicit mask, never the fill value as data
(docs/formats.md, "Missing snapshots"):

* npz, HDF5, NetCDF: an extra ``mask`` array ``(replica, time)``, True where a snapshot is
  not data (numpy.ma's convention), the masses under it zeros;
* text, CSV (long and wide), positions: one ``# massarc-missing:`` comment line in place of
  the chunk's snapshots;
* npy and the archive itself cannot carry a mask: refused with one line.

The outside truth is the run as written before its chunk was damaged: every snapshot not
under the mask must equal it. A file with a mask is refused on import (an archive holds
whole runs only).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from _audit_runs import chunk_file, write_run
from click.testing import CliRunner

from massarc.archive import open_run
from massarc.cli import cli

R, T, CHUNK = 3, 60, 20
LOST = (1, slice(40, 60))  # replica 1, chunk 2 along time


@pytest.fixture
def damaged(tmp_path: Path) -> tuple[Path, np.ndarray, np.ndarray]:
    run = write_run(tmp_path / "run.zarr", replicas=R, snapshots=T, chunk=CHUNK)
    whole = open_run(run)
    truth, times = np.asarray(whole.mass[:]), whole.times
    chunk_file(run, 1, 2).unlink()
    return run, truth, times


def _convert(*args: str):
    return CliRunner().invoke(cli, ["convert", *args])


def _expected_mask() -> np.ndarray:
    mask = np.zeros((R, T), bool)
    mask[LOST] = True
    return mask


def _read_masked(path: Path) -> tuple[np.ndarray, np.ndarray]:
    if path.suffix == ".npz":
        with np.load(path) as z:
            return z["mass"], z["mask"]
    if path.suffix == ".h5":
        import h5py

        with h5py.File(path, "r") as f:
            return f["mass"][()], f["mask"][()]
    import xarray as xr

    with xr.open_dataset(path, engine="h5netcdf") as ds:
        return ds["mass"].values, ds["mask"].values


@pytest.mark.parametrize("suffix", [".npz", ".h5", ".nc"])
def test_array_formats_carry_a_mask(damaged, tmp_path: Path, suffix: str) -> None:
    run, truth, _ = damaged
    out = tmp_path / f"out{suffix}"
    res = _convert(str(run), str(out), "--allow-missing")
    assert res.exit_code == 0, res.output
    assert "1 chunk(s) missing or corrupt: 20 snapshot(s) not exported, marked in" in res.stderr
    mass, mask = _read_masked(out)
    np.testing.assert_array_equal(mask, _expected_mask())
    np.testing.assert_array_equal(mass[~mask], truth[~_expected_mask()])  # the data, exact
    assert not mass[mask].any()  # zeros under the mask, not the fill value 65535
    back = _convert(str(out), str(tmp_path / "back.zarr"))
    assert back.exit_code == 2
    assert "its 'mask' array marks 20 snapshot(s) as not data" in back.stderr
    assert not (tmp_path / "back.zarr").exists()


@pytest.mark.parametrize("suffix", [".txt", ".csv", ".wide.csv", ".pos"])
def test_line_formats_carry_a_marker_line(damaged, tmp_path: Path, suffix: str) -> None:
    run, truth, times = damaged
    out = tmp_path / f"out{suffix}"
    res = _convert(str(run), str(out), "--allow-missing")
    assert res.exit_code == 0, res.output
    lines = out.read_text().splitlines()
    marks = [ln for ln in lines if ln.startswith("# massarc-missing:")]
    assert len(marks) == 1
    assert marks[0].startswith("# massarc-missing: replica 1 snapshots 40..59: ")
    assert "mass/c/1/2/0" in marks[0] and "missing" in marks[0]
    if suffix == ".txt":  # one line per snapshot: the 20 lost ones are not there
        data = [ln for ln in lines if ln and not ln.startswith("#")]
        assert len(data) == R * T - 20
        first_of_replica_2 = data[2 * T - 20].split()
        assert float(first_of_replica_2[0]) == times[0]
        assert [int(v) for v in first_of_replica_2[1:]] == truth[2, 0].tolist()
    back = _convert(str(out), str(tmp_path / "back.zarr"))
    assert back.exit_code == 2
    assert "this file marks snapshots as missing (replica 1 snapshots 40..59)" in back.stderr
    assert not (tmp_path / "back.zarr").exists()


@pytest.mark.parametrize(("suffix", "name"), [(".npy", "npy"), (".zarr", "zarr")])
def test_formats_without_a_mask_refuse(damaged, tmp_path: Path, suffix: str, name: str) -> None:
    run, _, _ = damaged
    out = tmp_path / f"out{suffix}"
    res = _convert(str(run), str(out), "--allow-missing")
    assert res.exit_code == 2
    (line,) = res.stderr.strip().splitlines()
    assert f"--allow-missing: format {name} cannot carry a mask of missing snapshots" in line
    assert "npz" in line and "text" in line
    assert not out.exists()


def test_a_corrupt_chunk_is_masked_too(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=R, snapshots=T, chunk=CHUNK)
    truth = np.asarray(open_run(run).mass[:])
    target = chunk_file(run, 0, 1)
    raw = bytearray(target.read_bytes())
    raw[len(raw) // 2] ^= 0xFF  # the crc32c codec rejects it
    target.write_bytes(bytes(raw))
    out = tmp_path / "out.npz"
    res = _convert(str(run), str(out), "--allow-missing")
    assert res.exit_code == 0, res.output
    mass, mask = _read_masked(out)
    assert mask.sum() == 20 and mask[0, 20:40].all()
    np.testing.assert_array_equal(mass[~mask], truth[~mask])


def test_a_whole_run_gets_an_empty_mask_and_comes_back(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=R, snapshots=T, chunk=CHUNK)
    out = tmp_path / "out.npz"
    res = _convert(str(run), str(out), "--allow-missing")
    assert res.exit_code == 0 and "missing or corrupt" not in res.stderr
    _, mask = _read_masked(out)
    assert mask.shape == (R, T) and not mask.any()
    assert _convert(str(out), str(tmp_path / "back.zarr")).exit_code == 0
    np.testing.assert_array_equal(
        np.asarray(open_run(tmp_path / "back.zarr").mass[:]), np.asarray(open_run(run).mass[:])
    )


def test_allow_missing_applies_to_exports_only(tmp_path: Path) -> None:
    src = tmp_path / "in.npz"
    np.savez(src, mass=np.ones((2, 5, 4), np.uint8), time=np.arange(5.0))
    res = _convert(str(src), str(tmp_path / "out.txt"), "--allow-missing")
    assert res.exit_code == 2
    assert "applies to an export from an archive, not to reading npz" in res.stderr
