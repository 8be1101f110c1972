"""Whole-chunk reads for the single pass.

For the archive's own layout (format v1: chunks of whole lattices, codecs bytes -> Blosc ->
crc32c, a local directory store) a chunk file is read and decoded in the calling worker
thread: crc32c with ``google_crc32c`` (the library of zarr-python's own crc32c codec),
Blosc with ``numcodecs.blosc.decompress`` into a preallocated buffer (both release the
GIL). This skips zarr-python's round trip through its event loop and the copy into a fresh
output array, which costs about half of zarr's read time for 4 MiB chunks. Any other
layout, codec chain or store goes through :meth:`Run.read_chunk` (zarr-python). Both paths
give identical arrays (tested).

A chunk file that is absent raises :class:`MissingChunk`; one whose checksum does not
match, or that does not decode to the chunk's size, raises :class:`CorruptChunk`. These two
are verdicts on the data; anything else (a file that cannot be opened, a bug) propagates
as it is. Both libraries are imported with this module, so a missing one stops the import
instead of turning every chunk into a corrupt one.
"""

from __future__ import annotations

import itertools
import math
import os
import stat
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import google_crc32c
import numpy as np
from numcodecs import blosc
from zarr.codecs import BloscCodec, BytesCodec, Crc32cCodec
from zarr.storage import LocalStore

from massarc.schema.spec import TIME

from .errors import ChunkError
from .limits import max_chunk_bytes
from .reader import DECODE_ERRORS, Chunk, ChunkRef, Run

__all__ = [
    "ChunkReader",
    "CorruptChunk",
    "MissingChunk",
    "checked_chunks",
    "missing_chunks",
    "missing_time_chunks",
    "read_checked",
]


class MissingChunk(FileNotFoundError):
    """The chunk's storage object is not in the store."""


class CorruptChunk(ValueError):
    """The chunk's bytes do not pass the checksum or do not decode."""


@dataclass(frozen=True)
class _Direct:
    root: Path
    prefix: str
    dtype: np.dtype
    chunk_shape: tuple[int, ...]


def _direct_plan(run: Run) -> _Direct | None:
    """The direct path's parameters, or None when the layout is not format v1's own."""
    try:
        arr = run.mass
        store = arr.store_path.store
        meta = arr.metadata
        codecs = tuple(meta.codecs)
    except Exception:
        return None
    if not isinstance(store, LocalStore) or arr.shards is not None:
        return None
    if getattr(meta, "zarr_format", None) != 3 or len(codecs) != 3:
        return None
    kinds = (BytesCodec, BloscCodec, Crc32cCodec)
    if not all(isinstance(c, k) for c, k in zip(codecs, kinds, strict=True)):
        return None
    chunks = tuple(int(c) for c in arr.chunks)
    if chunks[0] != 1 or chunks[2:] != tuple(arr.shape[2:]):
        return None
    if meta.encode_chunk_key((0, 0, *([0] * (len(chunks) - 2)))) != "c/0/0" + "/0" * (
        len(chunks) - 2
    ):
        return None
    endian = codecs[0].endian
    dtype = np.dtype(arr.dtype)
    if dtype.itemsize > 1 and endian is not None:
        dtype = dtype.newbyteorder("<" if endian.value == "little" else ">")
    path = arr.store_path.path
    return _Direct(Path(store.root), f"{path}/" if path else "", dtype, chunks)


def _read_regular(path: Path, key: str) -> bytes:
    """The bytes of a chunk file that is a regular file of plausible size; a FIFO, a
    device or an oversized file is a :class:`CorruptChunk`. Checked on the open file
    (opened without blocking), so that a FIFO swapped in after the run was opened cannot
    hang the reader; links out of the run were refused when it was opened."""
    fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK)
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise CorruptChunk(f"{key}: not a regular file")
        cap = max_chunk_bytes() + (1 << 20)
        if st.st_size > cap:
            raise CorruptChunk(f"{key}: {st.st_size} bytes; expected at most {cap}")
        with os.fdopen(fd, "rb", closefd=True) as f:
            fd = -1
            return f.read(cap + 1)
    finally:
        if fd >= 0:
            os.close(fd)


def _first_line(exc: BaseException) -> str:
    lines = str(exc).strip().splitlines()
    return lines[0] if lines else type(exc).__name__


class ChunkReader:
    """Reads the chunks of one run; thread-safe (no shared mutable state).

    >>> from massarc.archive import open_run
    >>> run = open_run("samples/depot-ring.zarr")
    >>> reader = ChunkReader(run)
    >>> reader.direct
    True
    >>> chunk = reader.read(run.chunk_refs()[0])
    >>> chunk.replica, chunk.start, chunk.mass.shape == (chunk.stop, *run.sites)
    (0, 0, True)
    """

    def __init__(self, run: Run, *, direct: bool = True) -> None:
        self.run = run
        self._direct = _direct_plan(run) if direct else None
        self._tail = "/".join("0" for _ in run.sites)

    @property
    def direct(self) -> bool:
        """True when chunks are decoded without zarr-python's read path."""
        return self._direct is not None

    def read(self, ref: ChunkRef) -> Chunk:
        """Decode one chunk into a :class:`Chunk` of ``(stop - start, *lattice)``."""
        d = self._direct
        if d is None:
            try:
                return self.run.read_chunk(ref)
            except DECODE_ERRORS as exc:  # zarr's codecs, a zip store's members
                raise CorruptChunk(f"{ref.key}: {_first_line(exc)}") from exc
        k = ref.start // d.chunk_shape[1]
        key = f"{d.prefix}c/{ref.replica}/{k}/{self._tail}"
        try:
            raw = _read_regular(d.root / key, key)
        except FileNotFoundError:
            raise MissingChunk(f"{key}: not in the store") from None
        if len(raw) < 4:
            raise CorruptChunk(f"{key}: {len(raw)} bytes, shorter than its checksum")
        body = raw[:-4]
        if google_crc32c.value(body) != int.from_bytes(raw[-4:], "little"):
            raise CorruptChunk(f"{key}: crc32c checksum does not match the chunk's bytes")
        rows = d.chunk_shape[1]
        out = np.empty((rows, *d.chunk_shape[2:]), dtype=d.dtype)
        size = int.from_bytes(body[4:8], "little") if len(body) >= 16 else -1  # Blosc header
        if size != out.nbytes:
            raise CorruptChunk(f"{key}: expected {out.nbytes} decoded bytes; header says {size}")
        try:
            blosc.decompress(body, out)
        except (RuntimeError, ValueError) as exc:
            raise CorruptChunk(f"{key}: Blosc cannot decode it ({exc})") from None
        if not out.dtype.isnative:
            out = out.astype(out.dtype.newbyteorder("="))
        n = ref.stop - ref.start
        mass = out[:n] if n < rows else out
        return Chunk(ref.replica, ref.start, ref.stop, mass, ref.key)


def _stored_keys(run: Run) -> tuple[set[str], str] | None:
    """Every key stored under the ``mass`` array, listed once; None if the store cannot list."""
    from zarr.core.sync import collect_aiterator

    try:
        arr = run.mass
        path = arr.store_path.path
        prefix = f"{path}/" if path else ""
        keys = collect_aiterator(arr.store_path.store.list_prefix(prefix))
        return set(keys), prefix
    except Exception:  # a store that cannot list: missing chunks then read as the sentinel
        return None


def missing_chunks(run: Run, refs: list[ChunkRef]) -> dict[int, tuple[str, str]]:
    """Chunks with a storage object absent from the store, by position in ``refs``: the
    key of the first absent object (with chunks that split the lattice, not necessarily
    the ref's own key, which names site 0) and a message."""
    listed = _stored_keys(run)
    if listed is None or not refs:
        return {}
    stored, prefix = listed
    arr = run.mass
    grid = tuple(arr.shards or arr.chunks)
    lattice = [range(math.ceil(n / g)) for n, g in zip(arr.shape[2:], grid[2:], strict=True)]
    encode = arr.metadata.encode_chunk_key
    out: dict[int, tuple[str, str]] = {}
    for i, ref in enumerate(refs):
        times = range(ref.start // grid[1], (ref.stop - 1) // grid[1] + 1)
        for t, rest in itertools.product(times, itertools.product(*lattice)):
            key = prefix + encode((ref.replica // grid[0], t, *rest))
            if key not in stored:
                out[i] = (key, f"{key}: not in the store (it would read as the fill value)")
                break
    return out


def missing_time_chunks(run: Run) -> list[tuple[str, int, int]]:
    """``(key, start, stop)`` of every chunk of ``time`` over the committed snapshots whose
    storage object is absent (zarr reads it as NaN, the fill value); empty when the store
    cannot be listed or the run has no readable ``time``."""
    from zarr.core.sync import collect_aiterator

    arr = run.array(TIME)
    n = run.n_snapshots
    if arr is None or arr.ndim != 1 or n == 0:
        return []
    try:
        path = arr.store_path.path
        prefix = f"{path}/" if path else ""
        stored = set(collect_aiterator(arr.store_path.store.list_prefix(prefix)))
    except Exception:  # a store that cannot list
        return []
    step = int((arr.shards or arr.chunks)[0])
    out = []
    for k, lo in enumerate(range(0, n, step)):
        key = prefix + arr.metadata.encode_chunk_key((k,))
        if key not in stored:
            out.append((key, lo, min(lo + step, n)))
    return out


def checked_chunks(run: Run, *, allow_missing: bool = False) -> Iterator[Chunk]:
    """Every committed chunk of ``run``, decoded, replica-major then time; a chunk that is
    missing (zarr would read it as the fill value) or corrupt raises :class:`ChunkError`
    naming it, so that no reader of this function mistakes the sentinel for data. With
    ``allow_missing`` such a chunk is yielded with zeros and ``missing`` set to the
    message instead."""
    refs = run.chunk_refs()
    reader = ChunkReader(run)
    missing = {} if reader.direct else missing_chunks(run, refs)
    for i, ref in enumerate(refs):
        yield read_checked(reader, ref, missing.get(i), allow_missing=allow_missing)


def read_checked(
    reader: ChunkReader,
    ref: ChunkRef,
    absent: tuple[str, str] | None = None,
    *,
    allow_missing: bool = False,
) -> Chunk:
    """One chunk read as :func:`checked_chunks` reads it; ``absent``: the key and message
    of :func:`missing_chunks` when the store listing already shows it missing."""
    run = reader.run
    where = f"replica {ref.replica}, snapshots {ref.start}..{ref.stop - 1}"
    try:
        if absent is not None:
            key, why = absent
            raise ChunkError(f"{run.name}: chunk {key} ({where}) is missing: {why}")
        try:
            return reader.read(ref)
        except MissingChunk as exc:
            raise ChunkError(f"{run.name}: chunk {ref.key} ({where}) is missing: {exc}") from None
        except CorruptChunk as exc:
            raise ChunkError(
                f"{run.name}: chunk {ref.key} ({where}) is corrupt: {_first_line(exc)}"
            ) from None
    except ChunkError as exc:
        if not allow_missing:
            raise
        zeros = np.zeros((ref.stop - ref.start, *run.sites), dtype=run.dtype)
        return Chunk(ref.replica, ref.start, ref.stop, zeros, ref.key, missing=str(exc))
