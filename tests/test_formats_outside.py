"""What we write, reference libraries read; what they write, we read.

Outside truth: numpy (np.load, np.savez), h5py, xarray and the netCDF4 C library,
Python's csv module and np.loadtxt read our exports; our importers read files those
libraries wrote, including a compressed .npz streamed from its zip member.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import h5py
import numpy as np
import pytest
import xarray as xr

from massarc.archive import create_run, open_run
from massarc.archive.formats import convert
from massarc.schema import parse_metadata

META = {
    "model": {"family": "zrp", "b": 2.5, "drift": "symmetric"},
    "lattice": {"sites": [6], "boundary": "periodic"},
    "run": {"regime": "stationary"},
}


@pytest.fixture
def run_path(tmp_path: Path) -> Path:
    rng = np.random.default_rng(11)
    mass = rng.multinomial(30, np.full(6, 1 / 6), size=(3, 5)).astype(np.uint8)
    path = tmp_path / "ring.zarr"
    with create_run(path, parse_metadata(META)) as w:
        w.append(np.linspace(0.0, 2.0, 5), mass)
    return path


def _full(run_path: Path) -> tuple[np.ndarray, np.ndarray]:
    run = open_run(run_path)
    return np.stack([run.read(r) for r in range(run.n_replicas)]), run.times


def test_numpy_reads_our_npy_and_npz(run_path, tmp_path):
    mass, times = _full(run_path)
    convert(run_path, tmp_path / "r.npy")
    np.testing.assert_array_equal(np.load(tmp_path / "r.npy"), mass)  # numpy reference reader
    for compress in ("false", "true"):
        out = tmp_path / f"r-{compress}.npz"
        convert(run_path, out, options={"compress": compress})
        with np.load(out) as z:  # numpy reference reader
            np.testing.assert_array_equal(z["mass"], mass)
            np.testing.assert_array_equal(z["time"], times)
            assert json.loads(str(z["metadata"]))["model"]["b"] == 2.5


@pytest.mark.parametrize("saver", [np.savez, np.savez_compressed])
def test_we_read_npz_written_by_numpy_in_both_layouts(saver, tmp_path):
    rng = np.random.default_rng(2)
    mass = rng.integers(0, 9, (2, 40, 6))
    saver(tmp_path / "a.npz", mass=mass, time=np.arange(40) * 0.25)
    (tmp_path / "meta.json").write_text(json.dumps(META))
    convert(tmp_path / "a.npz", tmp_path / "a.zarr", meta=tmp_path / "meta.json")
    got, times = _full(tmp_path / "a.zarr")
    np.testing.assert_array_equal(got, mass)
    np.testing.assert_array_equal(times, np.arange(40) * 0.25)
    # (time, replica, site) through the order option, uncompressed and compressed alike
    saver(tmp_path / "b.npz", mass=mass.transpose(1, 0, 2), time=np.arange(40) * 0.25)
    convert(
        tmp_path / "b.npz",
        tmp_path / "b.zarr",
        meta=tmp_path / "meta.json",
        options={"order": "time,replica,site"},
    )
    np.testing.assert_array_equal(_full(tmp_path / "b.zarr")[0], mass)


def test_h5py_reads_our_hdf5_and_we_read_its_files(run_path, tmp_path):
    mass, times = _full(run_path)
    convert(run_path, tmp_path / "r.h5")
    with h5py.File(tmp_path / "r.h5", "r") as f:  # h5py reference reader
        np.testing.assert_array_equal(f["mass"][()], mass)
        np.testing.assert_array_equal(f["time"][()], times)
        assert [d.label for d in f["mass"].dims] == ["replica", "time", "site"]
        assert json.loads(f.attrs["massarc_metadata"])["lattice"]["sites"] == [6]
    with h5py.File(tmp_path / "sim.h5", "w") as f:
        g = f.create_group("traj")
        g.create_dataset("mass", data=mass.transpose(1, 0, 2), chunks=(2, 3, 6))
        g.create_dataset("t", data=times)
        g.attrs["hop_b"] = 4.0
    (tmp_path / "m.json").write_text(json.dumps(META))
    convert(
        tmp_path / "sim.h5",
        tmp_path / "s.zarr",
        meta=tmp_path / "m.json",
        options={
            "mass": "/traj/mass",
            "time": "/traj/t",
            "order": "time,replica,site",
            "attrs.hop_b": "model.b",
        },
    )
    got, t = _full(tmp_path / "s.zarr")
    np.testing.assert_array_equal(got, mass)
    np.testing.assert_array_equal(t, times)
    assert open_run(tmp_path / "s.zarr").meta.model.b == 4.0  # mapped attribute beats --meta


def test_xarray_and_netcdf4_read_our_netcdf(run_path, tmp_path):
    import netCDF4

    mass, times = _full(run_path)
    convert(run_path, tmp_path / "r.nc")
    with xr.open_dataset(tmp_path / "r.nc") as ds:  # xarray reference reader
        assert ds["mass"].dims == ("replica", "time", "site")
        np.testing.assert_array_equal(ds["mass"].values, mass)
        np.testing.assert_array_equal(ds["time"].values, times)
    with netCDF4.Dataset(tmp_path / "r.nc") as nc:  # the netCDF-C library itself
        np.testing.assert_array_equal(nc.variables["mass"][:], mass)
        assert json.loads(nc.getncattr("massarc_metadata"))["model"]["family"] == "zrp"


def test_we_read_netcdf_written_by_xarray_in_another_dimension_order(tmp_path):
    rng = np.random.default_rng(4)
    mass = rng.integers(0, 5, (7, 6, 2))  # (time, site, replica)
    ds = xr.Dataset(
        {"occupancy": (("t", "site", "rep"), mass)},
        coords={"t": np.arange(7) * 0.5},
        attrs={"b": 3.5},
    )
    ds.to_netcdf(tmp_path / "x.nc")
    (tmp_path / "m.json").write_text(json.dumps(META))
    convert(
        tmp_path / "x.nc",
        tmp_path / "x.zarr",
        meta=tmp_path / "m.json",
        options={"var": "occupancy", "time-dim": "t", "replica-dim": "rep", "attrs.b": "model.b"},
    )
    run = open_run(tmp_path / "x.zarr")
    np.testing.assert_array_equal(
        np.stack([run.read(r) for r in range(2)]), mass.transpose(2, 0, 1)
    )
    np.testing.assert_array_equal(run.times, np.arange(7) * 0.5)
    assert run.meta.model.b == 3.5


def test_csv_module_and_loadtxt_read_our_text_exports(run_path, tmp_path):
    mass, times = _full(run_path)
    convert(run_path, tmp_path / "r.wide.csv")
    convert(run_path, tmp_path / "r.csv")
    convert(run_path, tmp_path / "r.txt")
    with open(tmp_path / "r.wide.csv", newline="") as f:  # Python's csv module
        rows = list(csv.DictReader(line for line in f if not line.startswith("#")))
    assert len(rows) == 15 and float(rows[6]["time"]) == times[1]
    assert [int(rows[6][f"m{k}"]) for k in range(6)] == mass[1, 1].tolist()
    with open(tmp_path / "r.csv", newline="") as f:
        long_rows = list(csv.DictReader(line for line in f if not line.startswith("#")))
    dense = np.zeros_like(mass)
    t_index = {float(t): i for i, t in enumerate(times)}
    for row in long_rows:
        dense[int(row["replica"]), t_index[float(row["time"])], int(row["site"])] = int(row["mass"])
    np.testing.assert_array_equal(dense, mass)
    table = np.loadtxt(tmp_path / "r.txt", comments="#")  # numpy's text reader
    np.testing.assert_array_equal(table[:, 0], np.tile(times, 3))
    np.testing.assert_array_equal(table[:, 1:].reshape(3, 5, 6), mass)
