"""Issue 11, defect 4: decompression bombs. A small chunk whose compressed bytes claim a
huge decoded size (zstd and Blosc headers; a gzip stream of zeros) is refused before the
memory is allocated, whatever array it belongs to (``time`` included): the chunk is
reported corrupt, by key, and the audit finishes under an address-space cap (tests/_hostile.py).

The honest side: runs stored with zstd, gzip or Blosc without a checksum read back equal
to what zarr-python itself decodes (the bound does not refuse real chunks)."""

from __future__ import annotations

import json
import zipfile
import zlib
from pathlib import Path

import numcodecs.blosc
import numcodecs.zstd
import numpy as np
import pytest
import zarr
from _audit_runs import write_run
from _hostile import capped_massarc
from zarr.codecs import BloscCodec, GzipCodec, ZstdCodec

from massarc.archive import open_run

COMPRESSORS = {"zstd": ZstdCodec(), "gzip": GzipCodec(), "blosc": BloscCodec(cname="zstd")}


def _restore(run: Path, name: str, compressor: str) -> None:
    """Re-store array ``name`` with ``compressor`` and no checksum (another writer's way)."""
    g = zarr.open_group(str(run), mode="r+")
    old = g[name]
    data, attrs = old[:], dict(old.attrs)
    dims, fill, chunks = old.metadata.dimension_names, old.fill_value, old.chunks
    del g[name]
    new = g.create_array(
        name, shape=data.shape, chunks=chunks, dtype=data.dtype, fill_value=fill,
        dimension_names=dims, compressors=[COMPRESSORS[compressor]],
    )  # fmt: skip
    new[:] = data
    new.attrs.update(attrs)


def _zstd_bomb() -> bytes:
    """A real zstd frame whose header claims 0xF0000000 decoded bytes (about 4 GiB)."""
    frame = bytearray(numcodecs.zstd.compress(b"\0" * 131072))
    assert frame[4] >> 6 == 2 and (frame[4] >> 5) & 1  # 4-byte size, single segment
    frame[5:9] = (0xF0000000).to_bytes(4, "little")
    return bytes(frame)


def _blosc_bomb() -> bytes:
    """A real Blosc frame whose header claims 2 GiB decoded bytes."""
    frame = bytearray(numcodecs.blosc.compress(b"\0" * 4096, b"zstd", 5, 0))
    frame[4:8] = (2**31 - 1).to_bytes(4, "little")
    return bytes(frame)


def _gzip_bomb() -> bytes:
    """A gzip stream of 1.5 GiB of zeros (about 1.5 MB)."""
    c = zlib.compressobj(9, zlib.DEFLATED, zlib.MAX_WBITS | 16)
    block = b"\0" * (1 << 20)
    return b"".join(c.compress(block) for _ in range(1536)) + c.flush()


BOMBS = {"zstd": _zstd_bomb, "blosc": _blosc_bomb, "gzip": _gzip_bomb}


@pytest.mark.parametrize(
    ("array", "compressor"),
    [("mass", "zstd"), ("mass", "blosc"), ("mass", "gzip"), ("time", "zstd"), ("time", "gzip")],
)
def test_bomb_is_refused_before_allocating(tmp_path: Path, array: str, compressor: str) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=20, chunk=10)
    _restore(run, array, compressor)
    target = sorted(p for p in (run / array / "c").rglob("*") if p.is_file())[0]
    target.write_bytes(BOMBS[compressor]())
    key = target.relative_to(run).as_posix()
    check = capped_massarc("check", str(run), "--as", "json", timeout=120)
    assert check.returncode == 1, check.stderr[-2000:]
    (report,) = json.loads(check.stdout)["runs"]
    messages = " ".join(c["message"] for c in report["checks"])
    assert key in messages and "MemoryError" not in messages
    assert f"{compressor}: the chunk " in messages  # refused by the bound, not by a decoder
    convert = capped_massarc("convert", str(run), str(tmp_path / "o.npz"), timeout=120)
    assert convert.returncode == 2 and key in convert.stderr, convert.stderr[-2000:]
    assert len(convert.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("compressor", list(COMPRESSORS))
def test_honest_chunks_of_other_compressors_read_as_zarr_reads_them(
    tmp_path: Path, compressor: str
) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=30, chunk=10)
    expected = zarr.open_array(str(run / "mass"))[:]
    _restore(run, "mass", compressor)
    _restore(run, "time", compressor)
    opened = open_run(run)
    got = np.stack(
        [np.concatenate([c.mass for c in opened.chunks() if c.replica == r]) for r in (0, 1)]
    )
    np.testing.assert_array_equal(got, expected)
    np.testing.assert_array_equal(opened.times, np.arange(30) * 0.5)


def test_zip_member_that_expands_beyond_the_cap(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=20, chunk=10)
    target = sorted(p for p in (run / "mass" / "c").rglob("*") if p.is_file())[0]
    archive = tmp_path / "run.zip"
    with zipfile.ZipFile(archive, "w", zipfile.ZIP_DEFLATED) as z:
        for f in sorted(run.rglob("*")):
            if f.is_file() and f != target:
                z.write(f, f.relative_to(run).as_posix())
        with z.open(target.relative_to(run).as_posix(), "w", force_zip64=True) as member:
            block = b"\0" * (1 << 20)
            for _ in range(1536):  # 1.5 GiB of zeros in about 1.5 MB
                member.write(block)
    assert archive.stat().st_size < 10 << 20
    name = target.relative_to(run).as_posix()
    for command in ("check", "info"):
        res = capped_massarc(command, str(archive), timeout=120)
        assert res.returncode == 2, res.stderr[-2000:]
        assert f"member {name}: " in res.stderr and len(res.stderr.strip().splitlines()) == 1
