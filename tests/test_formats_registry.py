"""The format registry: plugins, detection, option routing; and the text tokeniser."""

from __future__ import annotations

import warnings
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from massarc.archive import registry as registry_helper
from massarc.archive.formats import (
    Format,
    UnknownFormatError,
    available_formats,
    detect_format,
    get_format,
    registry,
)
from massarc.archive.formats._scan import scan_lines
from massarc.archive.formats.convert import split_options


class _PluginFormat(Format):
    name = "dune-log"
    suffixes = (".dune",)
    description = "a third-party test format"

    def sniff(self, head: bytes, path: Path) -> bool:
        return head.startswith(b"DUNE")

    def read(self, path, **options):  # pragma: no cover - never read here
        raise NotImplementedError


class _Clash(_PluginFormat):
    name = "text"


class _EP(SimpleNamespace):
    def load(self):
        if isinstance(self.target, Exception):
            raise self.target
        return self.target


@pytest.fixture
def plugins(monkeypatch):
    """Install fake entry points for the duration of a test."""

    def install(*eps):
        monkeypatch.setattr(registry, "FORMATS", registry.FORMATS.fresh())
        monkeypatch.setattr(
            registry_helper,
            "entry_points",
            lambda group: list(eps) if group == registry.ENTRY_POINT_GROUP else [],
        )

    return install


def test_plugins_load_lazily_broken_ones_warn_and_duplicates_lose(plugins):
    plugins(
        _EP(name="good", value="x:y", target=_PluginFormat),
        _EP(name="broken", value="x:z", target=ImportError("no module named dune")),
        _EP(name="clash", value="x:w", target=_Clash),
        _EP(name="not-a-format", value="x:v", target=object),
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        formats = available_formats()
    text = " | ".join(str(w.message) for w in caught)
    assert "dune-log" in formats and formats["text"] is not _Clash
    assert "skipping format plugin 'broken'" in text
    assert "reuses the name 'text'" in text and "first registered wins" in text
    assert "skipping format plugin 'not-a-format'" in text


def test_plugin_is_detected_by_content(plugins, tmp_path):
    plugins(_EP(name="good", value="x:y", target=_PluginFormat))
    f = tmp_path / "odd-name.bin"
    f.write_bytes(b"DUNE 1\n")
    assert detect_format(f).name == "dune-log"


def test_unknown_content_lists_formats_and_says_how_to_choose(tmp_path):
    f = tmp_path / "mystery.bin"
    f.write_bytes(b"\x00\x01 not a run")
    with pytest.raises(UnknownFormatError) as err:
        detect_format(f)
    msg = str(err.value)
    assert "--from NAME" in msg and "npz" in msg and "hdf5" in msg and "mystery.bin" in msg
    with pytest.raises(UnknownFormatError, match="--to NAME"):
        detect_format(tmp_path / "out.unknown", role="destination")
    with pytest.raises(UnknownFormatError, match="expected one of"):
        get_format("fortran-unformatted")


def test_content_wins_over_suffix(tmp_path):
    f = tmp_path / "really-npy.txt"
    np.save(f.with_suffix(".tmp.npy"), np.zeros((2, 3), np.uint8))
    f.write_bytes(f.with_suffix(".tmp.npy").read_bytes())
    assert detect_format(f).name == "npy"
    assert detect_format(tmp_path / "x.wide.csv", role="destination").name == "csv-wide"
    assert detect_format(tmp_path / "x.csv", role="destination").name == "csv-long"


def test_hdf5_files_are_told_from_netcdf_ones_by_their_marks(tmp_path):
    # a NetCDF-4 file is an HDF5 file with the netCDF library's marks (netCDF's own
    # conventions, from memory): the root attribute _NCProperties, or dimension scales
    # attached to a variable (DIMENSION_LIST); they are looked for in the file's first bytes,
    # never with the HDF5 library in massarc's process; without them the name decides
    import h5py

    plain, scaled, marked = tmp_path / "plain.h5", tmp_path / "scaled.h5", tmp_path / "m.h5"
    named = tmp_path / "plain.nc"
    for path in (plain, scaled, marked, named):
        with h5py.File(path, "w") as f:
            f["mass"] = np.zeros((2, 3), np.uint8)
            if path is scaled:
                f["time"] = np.arange(2.0)
                f["time"].make_scale("time")
                f["mass"].dims[0].attach_scale(f["time"])
            if path is marked:
                f.attrs["_NCProperties"] = "version=2"
    names = [detect_format(p).name for p in (plain, scaled, marked, named)]
    assert names == ["hdf5", "netcdf", "netcdf", "netcdf"]


def test_options_go_to_the_side_that_knows_them():
    npz, hdf5 = get_format("npz"), get_format("hdf5")
    r, w = split_options({"mass": "m", "compression": "lzf", "to.mass": "x"}, npz, hdf5)
    assert r == {"mass": "m"} and w == {"compression": "lzf", "mass": "x"}
    r, _ = split_options({"attrs.b": "model.b"}, hdf5, npz)
    assert r == {"attrs.b": "model.b"}
    with pytest.raises(ValueError, match="unknown option 'colour'"):
        split_options({"colour": "red"}, npz, hdf5)


_token = st.one_of(
    st.integers(-(10**18) + 1, 10**18 - 1).map(str),
    st.sampled_from(["1.5", "nan", "x", "", "-", "12a", "1e3", "0x10", "0000"]),
)
_line = st.one_of(
    st.lists(_token, min_size=0, max_size=6).map(lambda t: " ".join(t)),
    st.lists(_token, min_size=0, max_size=6).map(lambda t: "\t ".join(t) + " "),
    st.sampled_from(["# replica 2", "   # note", "", "   "]),
)


@settings(max_examples=150, deadline=None)
@given(lines=st.lists(_line, max_size=8), comma=st.booleans(), lead=st.integers(0, 2))
def test_compiled_and_python_tokenisers_agree(lines, comma, lead):
    text = "\n".join(ln.replace(" ", ",") if comma else ln for ln in lines)
    buf = (text + "\n").encode() if lines else b""
    a = scan_lines(buf, comma=comma, lead=lead, compiled=True)
    b = scan_lines(buf, comma=comma, lead=lead, compiled=False)
    assert (a.n, a.err_code) == (b.n, b.err_code)
    if a.err_code:
        assert a.err_pos == b.err_pos
    np.testing.assert_array_equal(a.kind[: a.n], b.kind[: b.n])
    np.testing.assert_array_equal(a.values, b.values)
    data = a.kind[: a.n] == 0
    np.testing.assert_array_equal(a.count[: a.n][data], b.count[: b.n][data])
    np.testing.assert_array_equal(a.lead[: a.n][data], b.lead[: b.n][data])


@pytest.mark.parametrize("compiled", [True, False])
def test_tokeniser_matches_python_int_on_every_token(compiled):
    # reference: Python's int() on the whitespace-split tokens (common practice)
    rng = np.random.default_rng(5)
    rows = rng.integers(0, 10**15, (50, 9))
    buf = "".join(f"{i * 0.5!r} " + " ".join(map(str, r)) + "\n" for i, r in enumerate(rows))
    sc = scan_lines(buf.encode(), compiled=compiled)
    ref = [int(t) for ln in buf.splitlines() for t in ln.split()[1:]]
    assert sc.values.tolist() == ref


def test_sequential_arrays_serve_storage_order_and_refuse_the_rest():
    import io

    from massarc.archive import DataError
    from massarc.archive.formats._arrays import SequentialArray

    ref = np.arange(2 * 5 * 3, dtype=np.uint16).reshape(2, 5, 3)
    seq = SequentialArray(io.BytesIO(ref.tobytes()), ref.shape, ref.dtype, "z.npz: array 'mass'")
    np.testing.assert_array_equal(seq[0, 0:2], ref[0, 0:2])  # C order, forward only
    np.testing.assert_array_equal(seq[0, 2:5], ref[0, 2:5])
    with pytest.raises(DataError, match="only be read in storage order"):
        seq[1, :, 0:1]  # not contiguous
    with pytest.raises(DataError, match="only be read in storage order"):
        seq[1, 3:5]  # skips ahead
    short = SequentialArray(io.BytesIO(ref.tobytes()[:20]), ref.shape, ref.dtype, "cut")
    with pytest.raises(DataError, match="truncated"):
        short[0]


def test_progress_reports_rise_to_the_total(tmp_path):
    import json

    from massarc.archive.formats import convert

    meta = tmp_path / "m.json"
    meta.write_text(
        json.dumps(
            {
                "model": {"family": "zrp", "b": 1.0},
                "lattice": {"sites": [4], "boundary": "periodic"},
                "run": {"regime": "transient"},
            }
        )
    )
    np.savez(tmp_path / "s.npz", mass=np.arange(120).reshape(4, 30) % 7)
    seen = []
    convert(
        tmp_path / "s.npz",
        tmp_path / "s.zarr",
        meta=meta,
        options={"order": "site,time"},
        progress=lambda done, total, unit: seen.append((done, total, unit)),
    )
    assert seen and seen[-1] == (30, 30, "snapshots")
    assert [d for d, _, _ in seen] == sorted(d for d, _, _ in seen)
