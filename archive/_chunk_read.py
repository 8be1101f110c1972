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

from dataclasses import dataclass
from pathlib import Path

import google_crc32c
import numpy as np
from numcodecs import blosc
from zarr.codecs import BloscCodec, BytesCodec, Crc32cCodec
from zarr.storage import LocalStore

from .reader import Chunk, ChunkRef, Run

__all__ = ["ChunkReader", "CorruptChunk", "MissingChunk"]


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
            except (ValueError, RuntimeError) as exc:  # zarr's codecs: checksum, decoding
                raise CorruptChunk(f"{ref.key}: {_first_line(exc)}") from exc
        k = ref.start // d.chunk_shape[1]
        key = f"{d.prefix}c/{ref.replica}/{k}/{self._tail}"
        try:
            raw = (d.root / key).read_bytes()
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
