"""Archive format v1: bit-exact round trips, what plain zarr-python and xarray see, stores,
collections, and the layout rules of schema/FORMAT.md."""

from __future__ import annotations

import json
import shutil
import zipfile
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
import zarr
from conftest import make_meta, multinomial_run

from massarc.archive import (
    ArchiveError,
    DataError,
    NotARunError,
    create_run,
    open_run,
    open_runs,
)
from massarc.archive.layout import TARGET_CHUNK_BYTES


def write(path, meta, data, times=None, step=7, **kw):
    times = np.arange(data.shape[1], dtype=float) * 0.5 if times is None else times
    with create_run(path, meta, **kw) as w:
        for s in range(0, data.shape[1], step):
            w.append(times[s : s + step], data[:, s : s + step])
    return times


@pytest.mark.parametrize("sites", [(24,), (6, 10)])
def test_round_trip_is_bit_exact(tmp_path: Path, sites: tuple[int, ...]) -> None:
    meta = make_meta(sites=sites)
    data = multinomial_run(3, 41, sites, mass=60, seed=1)
    times = write(tmp_path / "r.zarr", meta, data)
    run = open_run(tmp_path / "r.zarr")
    assert run.complete and run.shape == data.shape
    assert np.array_equal(np.asarray(run.mass[:]), data)
    assert np.array_equal(run.times, times)
    assert run.dtype == np.uint8  # smallest type whose max (the sentinel) exceeds M = 60
    assert run.meta.run.total_mass == 60 and run.meta.run.density == 60 / np.prod(sites)
    # reading chunk by chunk gives the same data, one whole-lattice chunk at a time
    got = np.zeros_like(data)
    for block in run.chunks():
        assert block.mass.shape[1:] == sites
        got[block.replica, block.start : block.stop] = block.mass
    assert np.array_equal(got, data)


def test_replica_by_replica_equals_lockstep(tmp_path: Path) -> None:
    meta = make_meta(sites=(12,))
    data = multinomial_run(3, 30, (12,), mass=20, seed=2)
    times = np.linspace(0, 3, 30)
    with create_run(tmp_path / "a.zarr", meta) as w:
        for r in range(3):
            for s in range(0, 30, 11):
                w.append(times[s : s + 11], data[r, s : s + 11], replica=r)
    run = open_run(tmp_path / "a.zarr")
    assert np.array_equal(np.asarray(run.mass[:]), data)
    assert np.array_equal(run.times, times)


def test_plain_zarr_and_xarray_see_labelled_arrays(tmp_path: Path) -> None:
    for sites, dims in [
        ((20,), ("replica", "time", "site")),
        ((4, 5), ("replica", "time", "y", "x")),
    ]:
        path = tmp_path / f"run{len(sites)}.zarr"
        data = multinomial_run(2, 9, sites, mass=30)
        times = write(path, make_meta(sites=sites), data)
        # zarr-python alone, no massarc: group, arrays, dimension names, attributes
        g = zarr.open_group(path, mode="r")
        assert g["mass"].metadata.dimension_names == dims
        assert g["time"].metadata.dimension_names == ("time",)
        assert g.attrs["massarc"]["format"] == "massarc-run"
        assert np.array_equal(g["mass"][:], data)
        # xarray (the labelled-array reference library)
        ds = xr.open_zarr(path, consolidated=False)
        assert ds["mass"].dims == dims
        assert np.array_equal(ds["time"].values, times)
        assert np.array_equal(ds["mass"].values, data)
        assert ds["mass"].dtype == np.uint8


def test_layout_codecs_fill_value_and_chunk_size(tmp_path: Path) -> None:
    sites = (512,)
    data = multinomial_run(1, 20000, sites, mass=300, seed=3)
    write(tmp_path / "big.zarr", make_meta(sites=sites), data, step=5000)
    meta = json.loads((tmp_path / "big.zarr" / "mass" / "zarr.json").read_text())
    names = [c["name"] for c in meta["codecs"]]
    assert names == ["bytes", "blosc", "crc32c"]
    blosc = meta["codecs"][1]["configuration"]
    assert blosc["cname"] == "zstd" and blosc["shuffle"] == "bitshuffle"
    assert meta["data_type"] == "uint16" and meta["fill_value"] == 65535  # M = 300 > 254
    chunk = meta["chunk_grid"]["configuration"]["chunk_shape"]
    assert chunk[0] == 1 and chunk[2:] == list(sites)
    assert 1 << 20 <= chunk[1] * 512 * 2 <= 8 << 20 and chunk[1] * 512 * 2 <= TARGET_CHUNK_BYTES


def test_a_lost_chunk_is_detectable_not_silent(tmp_path: Path) -> None:
    data = multinomial_run(2, 30, (8,), mass=10)
    write(tmp_path / "r.zarr", make_meta(sites=(8,)), data, snapshots_hint=10)
    (tmp_path / "r.zarr" / "mass" / "c" / "1" / "1" / "0").unlink()
    block = open_run(tmp_path / "r.zarr").read(1, 10, 20)
    assert (block == 255).all()  # the sentinel: never a real mass of this run


def test_stores_memory_file_url_and_read_only_zip(tmp_path: Path) -> None:
    meta = make_meta(sites=(10,))
    data = multinomial_run(2, 12, (10,), mass=15)
    write("memory://massarc-test-store", meta, data, overwrite=True)
    assert np.array_equal(np.asarray(open_run("memory://massarc-test-store").mass[:]), data)
    url = (tmp_path / "deep" / "r.zarr").as_uri()
    write(url, meta, data)
    assert np.array_equal(np.asarray(open_run(url).mass[:]), data)
    # a zip of a directory archive, entries relative to the group root
    zpath = tmp_path / "r.zip"
    root = tmp_path / "deep" / "r.zarr"
    with zipfile.ZipFile(zpath, "w", compression=zipfile.ZIP_STORED) as zf:
        for f in sorted(root.rglob("*")):
            if f.is_file():
                zf.write(f, f.relative_to(root).as_posix())
    run = open_run(zpath)
    assert np.array_equal(np.asarray(run.mass[:]), data)
    with pytest.raises(ArchiveError, match="zip archives are read-only"):
        create_run(tmp_path / "new.zip", meta)


def test_collections_group_and_directory(tmp_path: Path) -> None:
    meta = make_meta(sites=(6,))
    sweep = tmp_path / "sweep"
    for i in range(3):
        write(sweep / f"rho{i}.zarr", meta, multinomial_run(1, 5, (6,), mass=4 + i, seed=i))
    (sweep / "notes.txt").write_text("not a run")
    runs = open_runs(sweep)
    assert [Path(r.name).name for r in runs] == ["rho0.zarr", "rho1.zarr", "rho2.zarr"]
    assert [r.meta.run.total_mass for r in runs] == [4, 5, 6]
    # a Zarr group of runs
    grp = tmp_path / "group.zarr"
    zarr.open_group(
        grp,
        mode="w",
        attributes={"massarc": {"format": "massarc-collection", "format_version": "1.0"}},
    )
    for i in range(2):
        shutil.copytree(sweep / f"rho{i}.zarr", grp / f"b{i}")
    runs = open_runs(grp)
    assert [r.name.rsplit("/", 1)[-1] for r in runs] == ["b0", "b1"]
    with pytest.raises(NotARunError):
        open_run(grp)
    with pytest.raises(NotARunError, match="holds no massarc run"):
        open_runs(_empty(tmp_path))


def _fraction(d: np.ndarray) -> np.ndarray:
    out = d.astype(float)
    out[0, 3, 2] = 0.5
    return out


def _empty(tmp_path: Path) -> Path:
    d = tmp_path / "empty"
    d.mkdir()
    return d


@pytest.mark.parametrize(
    ("mutate", "message"),
    [
        (lambda d, t: (d, t[::-1]), "snapshot 1: time 4.0 is not after the previous 4.5"),
        (
            lambda d, t: (_fraction(d), t),
            "replica 0, snapshot 3, site 2: mass 0.5 is not an integer",
        ),
        (
            lambda d, t: (d[..., :5], t),
            "expected mass shaped (replica, time, *lattice) with lattice [6]",
        ),
    ],
)
def test_writer_refuses_bad_blocks(tmp_path: Path, mutate, message: str) -> None:
    data = multinomial_run(1, 10, (6,), mass=4).astype(np.int64)
    times = np.arange(10) * 0.5
    d, t = mutate(data, times)
    w = create_run(tmp_path / "bad.zarr", make_meta(sites=(6,)))
    with pytest.raises(DataError) as err:
        w.append(t, d)
    assert message in str(err.value)
    assert not open_run(tmp_path / "bad.zarr").complete


def test_declared_total_mass_must_match_first_snapshot(tmp_path: Path) -> None:
    meta = make_meta(sites=(6,)).model_copy(update={})
    meta = meta.model_copy(update={"run": meta.run.model_copy(update={"total_mass": 5})})
    w = create_run(tmp_path / "m.zarr", meta)
    with pytest.raises(DataError, match=r"run\.total_mass is 5 but replica 0, snapshot 0 holds 4"):
        w.append([0.0], multinomial_run(1, 1, (6,), mass=4))


def test_existing_archive_is_not_overwritten(tmp_path: Path) -> None:
    write(tmp_path / "r.zarr", make_meta(sites=(6,)), multinomial_run(1, 3, (6,), mass=4))
    with pytest.raises(ArchiveError, match="already exists"):
        create_run(tmp_path / "r.zarr", make_meta(sites=(6,)))


def test_commits_at_chunk_boundaries_without_an_explicit_dtype(tmp_path: Path) -> None:
    data = multinomial_run(2, 50, (8,), mass=10)
    w = create_run(tmp_path / "r.zarr", make_meta(sites=(8,)), snapshots_hint=10)
    for s in range(0, 35, 5):
        w.append(np.arange(s, s + 5, dtype=float), data[:, s : s + 5])
    # 35 snapshots appended, chunks of 10: three whole chunks are committed already
    assert open_run(tmp_path / "r.zarr").n_snapshots == 30
    w.close()
    assert open_run(tmp_path / "r.zarr").n_snapshots == 35
