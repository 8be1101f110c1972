"""Runs and collections as lazy xarray trees (``Run.to_xarray``, ``open_collection``).

Outside truth: the frozen fixtures' ``.expected.json`` files (masses, times and metadata
written from the specification when the fixture was made), zarr-python reading the raw
Zarr arrays (a general-purpose reference library), the header as plain JSON, and NumPy
for the largest mass of a snapshot (FORMAT.md section 6: "largest site mass").
"""

from __future__ import annotations

import json
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
import zarr
from conftest import make_meta

import massarc
from massarc.archive.errors import ChunkError

FIXTURES = Path(__file__).parent / "fixtures" / "v1.1"
SAMPLES = Path(__file__).resolve().parents[1] / "samples"


def _expected(name: str) -> dict:
    return json.loads((FIXTURES / f"{name}.expected.json").read_text(encoding="utf-8"))


def _header(path: Path) -> dict:
    return json.loads((path / "zarr.json").read_text(encoding="utf-8"))["attributes"]["massarc"]


@pytest.mark.parametrize(
    ("name", "dims"),
    [
        ("zrp-ring-1d", ("replica", "time", "site")),
        ("cmam-box-2d", ("replica", "time", "y", "x")),
        ("open-strip-1d", ("replica", "time", "site")),
    ],
)
def test_tree_matches_the_fixture_value_by_value(name: str, dims: tuple[str, ...]) -> None:
    want = _expected(name)  # frozen fixture, written from the specification
    tree = massarc.open_run(FIXTURES / f"{name}.zarr").to_xarray()
    mass = tree["mass"]
    assert mass.dims == dims
    assert mass.chunks is not None  # Dask-backed: nothing decoded yet
    np.testing.assert_array_equal(mass.values, np.asarray(want["mass"]))
    np.testing.assert_array_equal(tree["time"].values, np.asarray(want["time"]))
    np.testing.assert_array_equal(tree["replica"].values, np.arange(len(want["mass"])))
    for dim, n in zip(dims[2:], np.asarray(want["mass"]).shape[2:], strict=True):
        np.testing.assert_array_equal(tree[dim].values, np.arange(n))
    header = _header(FIXTURES / f"{name}.zarr")  # the stored header as plain JSON
    for section in ("model", "lattice", "run"):
        assert tree.attrs[section] == header["metadata"][section]
    assert tree.attrs["complete"] is header["state"]["complete"]
    json.dumps(tree.attrs)  # JSON-serialisable
    if "inflow" in tree:  # zarr-python reads the same series
        raw = zarr.open_array(FIXTURES / f"{name}.zarr" / "inflow", mode="r")
        np.testing.assert_array_equal(tree["inflow"].values, raw[...])


def test_only_committed_snapshots_are_visible(tmp_path: Path) -> None:
    run_dir = tmp_path / "ring.zarr"
    shutil.copytree(SAMPLES / "dune-strip.zarr", run_dir)
    doc = json.loads((run_dir / "zarr.json").read_text())
    doc["attributes"]["massarc"]["state"]["snapshots"] = 100  # as a writer killed at 100
    (run_dir / "zarr.json").write_text(json.dumps(doc))
    tree = massarc.open_run(run_dir).to_xarray()
    assert tree["mass"].shape == (4, 100, 64)
    raw = zarr.open_array(run_dir / "mass", mode="r")  # zarr-python, the whole array
    assert raw.shape[1] == 512
    np.testing.assert_array_equal(tree["mass"].values, raw[:, :100])
    np.testing.assert_array_equal(tree["time"].values, zarr.open_array(run_dir / "time")[:100])


def _flip(chunk: Path) -> None:
    data = bytearray(chunk.read_bytes())
    data[len(data) // 2] ^= 0xFF
    chunk.write_bytes(bytes(data))


def test_lazy_and_checksummed(tmp_path: Path) -> None:
    run_dir = tmp_path / "dune.zarr"
    shutil.copytree(SAMPLES / "dune-strip.zarr", run_dir)
    _flip(run_dir / "mass" / "c" / "2" / "0" / "0")
    tree = massarc.open_run(run_dir).to_xarray()  # lazy: the damage is not read yet
    good = zarr.open_array(SAMPLES / "dune-strip.zarr" / "mass", mode="r")[1]
    np.testing.assert_array_equal(tree["mass"][1].values, good)
    with pytest.raises(ChunkError, match=r"mass/c/2/0/0 \(replica 2, snapshots 0..511\)"):
        tree["mass"][2].values  # noqa: B018


def test_a_chunk_that_claims_too_much_is_refused_before_decoding(tmp_path: Path) -> None:
    run_dir = tmp_path / "dune.zarr"
    shutil.copytree(SAMPLES / "dune-strip.zarr", run_dir)
    chunk = run_dir / "mass" / "c" / "0" / "0" / "0"
    data = bytearray(chunk.read_bytes())
    data[4:8] = (1 << 30).to_bytes(4, "little")  # Blosc 1 header: nbytes (from memory)
    body = bytes(data[:-4])
    import google_crc32c

    chunk.write_bytes(body + google_crc32c.value(body).to_bytes(4, "little"))
    tree = massarc.open_run(run_dir).to_xarray()
    with pytest.raises(ChunkError, match="decoded bytes"):
        tree["mass"][0].values  # noqa: B018


def test_stored_summaries_are_a_child_node() -> None:
    path = FIXTURES / "zrp-ring-summarized.zarr"
    want = np.asarray(_expected("zrp-ring-summarized")["mass"])
    tree = massarc.open_run(path).to_xarray()
    summ = tree["summaries"]
    assert summ["largest_mass"].dims == ("replica", "time")
    # FORMAT.md 6: largest site mass, from NumPy on the frozen masses
    np.testing.assert_array_equal(summ["largest_mass"].values, want.max(axis=2))
    raw = zarr.open_group(path / "summaries", mode="r")  # zarr-python on the stored group
    for name in ("occupation", "extreme_sample", "correlation"):
        np.testing.assert_array_equal(summ[name].values, raw[name][...])
        assert summ[name].dims == tuple(raw[name].metadata.dimension_names)
    assert summ.attrs["extent"] == dict(raw.attrs["massarc"])["extent"]
    assert "summaries" not in massarc.open_run(path).to_xarray(summaries=False).children


def test_summaries_of_another_extent_are_left_out_and_said(tmp_path: Path) -> None:
    run_dir = tmp_path / "ring.zarr"
    shutil.copytree(FIXTURES / "zrp-ring-summarized.zarr", run_dir)
    doc = json.loads((run_dir / "zarr.json").read_text())
    doc["attributes"]["massarc"]["state"]["snapshots"] = 30
    (run_dir / "zarr.json").write_text(json.dumps(doc))
    tree = massarc.open_run(run_dir).to_xarray()
    assert "summaries" not in tree.children
    assert "40 snapshots" in tree.attrs["summaries_note"]


def _write(path: Path, b: float, masses: np.ndarray, times: np.ndarray) -> None:
    with massarc.create_run(path, make_meta(b=b, sites=(masses.shape[-1],))) as w:
        w.append(times, masses)


def test_collection_stacks_runs_that_line_up(tmp_path: Path) -> None:
    rng = np.random.default_rng(5)
    times = np.linspace(0.0, 9.0, 10)
    data = {b: rng.multinomial(20, np.full(8, 1 / 8), size=(3, 10)) for b in (2.5, 4.0)}
    for b, masses in data.items():
        _write(tmp_path / "sweep" / f"b{b}.zarr", b, masses, times)
    sweep = massarc.open_collection(tmp_path / "sweep")
    assert len(sweep) == 2 and sweep[1] is sweep[sweep.names[1]]
    tree = sweep.to_xarray()
    assert isinstance(tree, xr.DataTree)
    assert tree["mass"].dims == ("run", "replica", "time", "site")
    assert tree["b"].values.tolist() == [2.5, 4.0]
    for i, b in enumerate((2.5, 4.0)):
        np.testing.assert_array_equal(tree["mass"][i].values, data[b])
    assert [m["model"]["b"] for m in tree.attrs["runs"].values()] == [2.5, 4.0]


def test_collection_that_does_not_line_up_is_a_mapping() -> None:
    sweep = massarc.open_collection(FIXTURES / "sweep.zarr")  # the runs' times differ
    trees = sweep.to_xarray()
    assert isinstance(trees, dict) and list(trees) == sweep.names
    want = _expected("sweep")["runs"]
    for key, tree in trees.items():
        np.testing.assert_array_equal(tree["mass"].values, want[key.rsplit("/", 1)[1]]["mass"])


def test_missing_xarray_names_the_extra(monkeypatch: pytest.MonkeyPatch) -> None:
    run = massarc.open_run(SAMPLES / "dune-strip.zarr")
    monkeypatch.setitem(sys.modules, "xarray", None)
    with pytest.raises(ImportError, match=r"massarc\[xarray\]"):
        run.to_xarray()


def test_run_html_holds_the_facts_and_is_escaped(tmp_path: Path) -> None:
    page = massarc.open_run(SAMPLES / "depot-ring.zarr")._repr_html_()
    for fact in ("zrp", "b=4.0", "[64] periodic", "4 replicas x 12288 snapshots", "hours"):
        assert fact in page
    hostile = "<script>alert('x')</script>"
    path = tmp_path / "a&b<i>.zarr"
    meta = make_meta(family="custom", description=hostile)
    with massarc.create_run(path, meta) as w:
        w.append(np.arange(2.0), np.ones((1, 2, 16), dtype=np.int64))
    page = massarc.open_run(path)._repr_html_()
    assert "<script>" not in page and "<i>" not in page
    assert "&lt;script&gt;" in page and "a&amp;b&lt;i&gt;.zarr" in page
    sweep = massarc.open_collection(tmp_path)._repr_html_()
    assert "&lt;script&gt;" in sweep and "<script>" not in sweep


def test_report_html_holds_the_facts_and_is_escaped() -> None:
    from massarc.validators import AuditReport, CheckResult, RunReport, Where

    hostile = CheckResult(
        id="conservation",
        status="fail",
        message="mass <b>changed</b> & more",
        where=Where(replica=1, snapshot=7),
    )
    report = AuditReport(
        runs=[RunReport(path="runs/<x>.zarr", status="fail", checks=[hostile])],
        status="fail",
        massarc_version="0",
    )
    page = report._repr_html_()
    assert "<b>" not in page and "<x>" not in page
    assert "mass &lt;b&gt;changed&lt;/b&gt; &amp; more" in page
    assert "runs/&lt;x&gt;.zarr" in page and "replica 1, snapshot 7" in page
    real = massarc.audit([SAMPLES / "depot-ring-unsettled.zarr"], checks=["steady-state"])
    page = real._repr_html_()  # the mislabelled sample fails steady-state (samples/README.md)
    assert "steady-state" in page and ">fail<" in page


def test_a_run_without_its_mass_array_is_refused(tmp_path: Path) -> None:
    run_dir = tmp_path / "dune.zarr"
    shutil.copytree(SAMPLES / "dune-strip.zarr", run_dir)
    shutil.rmtree(run_dir / "mass")
    run = massarc.open_run(run_dir)
    with pytest.raises(massarc.ArchiveError, match="no 'mass' array"):
        run.to_xarray()
