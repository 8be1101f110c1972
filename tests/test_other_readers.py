"""Another Zarr v3 implementation reads massarc archives: tensorstore (C++, not zarr-python).

The format is only shared if a reader that knows nothing of massarc gets the same numbers.
tensorstore opens ``mass``, ``time`` and the summaries with its own ``zarr3`` driver, reads
the group headers through its own key-value store, and is compared value by value with our
reader. A flipped byte in a chunk's compressed payload must make it report the checksum
error, as our reader does (schema/FORMAT.md, "Other readers").

Outside truth: tensorstore itself (an independent implementation of the Zarr v3
specification and its crc32c codec).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import tensorstore as ts
import zarr
from zarr.codecs import BloscCodec, Crc32cCodec, GzipCodec, TransposeCodec, ZstdCodec

import massarc
from massarc.archive.errors import ChunkError
from massarc.schema.spec import mass_dimensions

ROOT = Path(__file__).resolve().parents[1]
FIXTURES = ROOT / "tests" / "fixtures" / "v1.1"
RUNS = [
    ROOT / "samples" / "dune-strip.zarr",
    FIXTURES / "cmam-box-2d.zarr",
    FIXTURES / "open-strip-1d.zarr",
    FIXTURES / "zrp-ring-summarized.zarr",
]


def _ts_array(path: Path) -> Any:
    spec = {"driver": "zarr3", "kvstore": {"driver": "file", "path": str(path)}}
    return ts.open(spec, read=True).result()


def _ts_json(directory: Path) -> dict[str, Any]:
    """A node's zarr.json read through tensorstore's own key-value store."""
    kv = ts.KvStore.open({"driver": "file", "path": f"{directory}/"}).result()
    return json.loads(kv.read("zarr.json").result().value)


@pytest.mark.parametrize("path", RUNS, ids=lambda p: p.name)
def test_tensorstore_reads_what_we_read(path: Path) -> None:
    run = massarc.open_run(path)
    header = _ts_json(path)["attributes"]["massarc"]
    assert header["state"]["snapshots"] == run.n_snapshots
    assert header["state"]["replicas"] == run.n_replicas
    assert header["metadata"]["model"]["family"] == run.meta.model.family
    assert header["metadata"]["lattice"]["sites"] == list(run.sites)
    r, t = run.n_replicas, run.n_snapshots
    mass = _ts_array(path / "mass")
    assert mass.domain.labels == mass_dimensions(len(run.sites))
    meta = mass.spec().to_json()["metadata"]
    assert meta["attributes"] == dict(run.mass.attrs)
    ours = np.stack([c.mass for c in run.chunks()]).reshape(run.shape)
    np.testing.assert_array_equal(mass[:r, :t].read().result(), ours)
    time = _ts_array(path / "time")
    assert time.domain.labels == ("time",)
    np.testing.assert_array_equal(time[:t].read().result(), run.times)
    for key in ("inflow", "outflow"):
        if run.array(key) is not None:
            got = _ts_array(path / key)
            assert got.domain.labels == ("replica", "time")
            np.testing.assert_array_equal(got[:r, :t].read().result(), run.series(key))
    stored = run.summaries
    if stored is not None:
        assert _ts_json(path / "summaries")["attributes"]["massarc"] == stored.provenance
        for name in stored:
            got = _ts_array(path / "summaries" / name)
            assert got.domain.labels == stored.dims(name)
            np.testing.assert_array_equal(got.read().result(), stored.array(name))


# Codec chains FORMAT.md section 2.1 says readers MUST accept, each with the checksum.
CHAINS = {
    "zstd": dict(compressors=[ZstdCodec(level=3), Crc32cCodec()]),
    "gzip": dict(compressors=[GzipCodec(level=5), Crc32cCodec()]),
    "transpose-blosc-lz4": dict(
        filters=[TransposeCodec(order=(1, 0, 3, 2))],
        compressors=[BloscCodec(cname="lz4", clevel=5, shuffle="shuffle"), Crc32cCodec()],
    ),
}


def _recode(src: Path, dst: Path, chain: dict[str, Any]) -> None:
    """A copy of run ``src`` whose ``mass`` is stored with another codec chain."""
    shutil.copytree(src, dst)
    old = zarr.open_array(src / "mass", mode="r")
    shutil.rmtree(dst / "mass")
    new = zarr.create_array(
        dst / "mass",
        shape=old.shape,
        dtype=old.dtype,
        chunks=old.chunks,
        fill_value=old.fill_value,
        dimension_names=old.metadata.dimension_names,
        attributes=dict(old.attrs),
        config={"write_empty_chunks": True},
        **chain,
    )
    new[...] = old[...]


@pytest.mark.parametrize("chain", list(CHAINS))
def test_other_codec_chains_read_alike(tmp_path: Path, chain: str) -> None:
    run_dir = tmp_path / "box.zarr"
    _recode(FIXTURES / "cmam-box-2d.zarr", run_dir, CHAINS[chain])
    run = massarc.open_run(run_dir)
    ours = np.stack([c.mass for c in run.chunks()]).reshape(run.shape)
    want = zarr.open_array(FIXTURES / "cmam-box-2d.zarr" / "mass", mode="r")[...]
    np.testing.assert_array_equal(ours, want[: run.n_replicas, : run.n_snapshots])
    got = _ts_array(run_dir / "mass")[: run.n_replicas, : run.n_snapshots].read().result()
    np.testing.assert_array_equal(got, ours)


def _flip(chunk: Path, at: int) -> None:
    data = bytearray(chunk.read_bytes())
    data[at % len(data)] ^= 0x5A
    chunk.write_bytes(bytes(data))


def _corrupt_copy(tmp_path: Path, chain: str | None) -> tuple[Path, Path]:
    run_dir = tmp_path / "dune.zarr"
    src = ROOT / "samples" / "dune-strip.zarr"
    if chain is None:
        shutil.copytree(src, run_dir)  # as massarc writes it: bytes, blosc, crc32c
    else:
        _recode(src, run_dir, CHAINS[chain])
    return src, run_dir


DIGEST = r"DATA_LOSS.*(?i:digest mismatch)"


@pytest.mark.parametrize(
    ("chain", "at", "error"),
    [
        # the compressed payload (not the 4 checksum bytes at the end): the checksum is
        # verified before Blosc decodes the chunk
        (None, "payload", DIGEST),
        # zstd frames are decoded as a stream and zstd notices the damage first
        ("zstd", "payload", f"{DIGEST}|(?i:data corruption detected)"),
        # the stored checksum itself: the payload decodes, only the digest tells
        ("zstd", "checksum", DIGEST),
    ],
)
def test_tensorstore_reports_a_corrupt_chunk(
    tmp_path: Path, chain: str | None, at: str, error: str
) -> None:
    src, run_dir = _corrupt_copy(tmp_path, chain)
    chunk = run_dir / "mass" / "c" / "1" / "0" / "0"
    _flip(chunk, (chunk.stat().st_size - 4) // 2 if at == "payload" else -2)
    mass = _ts_array(run_dir / "mass")
    np.testing.assert_array_equal(  # the other replicas still read
        mass[0].read().result(), zarr.open_array(src / "mass", mode="r")[0]
    )
    with pytest.raises(ValueError, match=error):
        mass[1].read().result()
    with pytest.raises(ValueError, match=r"(?i:checksum|corrupt)"):  # zarr-python alone
        zarr.open_array(run_dir / "mass", mode="r")[1]
    run = massarc.open_run(run_dir)
    with pytest.raises(ChunkError, match="mass/c/1/0/0"):
        list(run.chunks())
