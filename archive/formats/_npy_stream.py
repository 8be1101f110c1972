"""The ``.npy`` byte layout read and written as a stream: a ``.npy`` file, and every
member of an ``.npz`` (which may be a compressed zip member that only reads forward)."""

from __future__ import annotations

import io
import tokenize
from typing import Any, BinaryIO

import numpy as np

from ..errors import DataError
from ..progress import Progress
from ..reader import Run

__all__ = ["read_npy_header", "write_npy_stream"]


def read_npy_header(fp: BinaryIO, name: str) -> tuple[tuple[int, ...], bool, np.dtype]:
    """(shape, fortran_order, dtype) from the start of a ``.npy`` stream; the stream is
    left at the first data byte."""
    fp = _bounded_header(fp, name)
    try:
        version = np.lib.format.read_magic(fp)
        if version == (1, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_1_0(fp)
        else:
            shape, fortran, dtype = np.lib.format.read_array_header_2_0(fp)
    except (ValueError, SyntaxError, TypeError, tokenize.TokenError) as exc:
        # numpy parses the header dict with Python's tokenizer: a mangled header raises
        # any of these (found by fuzzing, docs/fuzzing.md)
        why = " ".join(str(exc).split())[:200]
        raise DataError(f"{name}: not a readable .npy array ({why})") from None
    if dtype.hasobject:
        raise DataError(f"{name}: expected an integer array; got dtype object (pickled data)")
    dims = tuple(int(s) for s in shape)
    if any(d < 1 for d in dims):  # negative or empty: numpy's memmap and readers fail
        raise DataError(f"{name}: expected a shape of positive lengths; got {dims}")
    return dims, bool(fortran), dtype


#: Longest ``.npy`` header read (numpy's own default ``max_header_size``).
MAX_HEADER_BYTES = 10000


def _bounded_header(fp: BinaryIO, name: str) -> BinaryIO:
    """The magic, version and header of a ``.npy`` stream as an in-memory stream, ``fp``
    left at the first data byte; a header length beyond :data:`MAX_HEADER_BYTES` is refused
    before it is read (numpy reads the length it is told first, then checks it: a 2 GiB
    claim allocates 2 GiB; found by fuzzing, docs/fuzzing.md)."""
    head = fp.read(8)
    size = 2 if head[6:7] == b"\x01" else 4
    raw = fp.read(size) if len(head) == 8 else b""
    length = int.from_bytes(raw, "little") if len(raw) == size else 0
    if length > MAX_HEADER_BYTES:
        raise DataError(
            f"{name}: not a readable .npy array (header of {length} bytes; expected at most "
            f"{MAX_HEADER_BYTES})"
        )
    return io.BytesIO(head + raw + fp.read(length))


def write_npy_stream(
    fp: BinaryIO, run: Run, progress: Progress | None = None, lost: Any = None
) -> None:
    """Write the masses of ``run`` as one ``.npy`` ``(replica, time, *lattice)`` to ``fp``,
    a chunk at a time. ``lost`` (a ``MissingMask``): missing chunks are written as zeros
    and recorded there instead of stopping the export."""
    header = {
        "descr": np.lib.format.dtype_to_descr(run.dtype),
        "fortran_order": False,
        "shape": tuple(run.shape),
    }
    np.lib.format.write_array_header_2_0(fp, header)
    done = 0
    total = run.n_replicas * run.n_snapshots
    for chunk in run.chunks(allow_missing=lost is not None):
        if lost is not None:
            lost.note(chunk)
        fp.write(np.ascontiguousarray(chunk.mass).tobytes())
        done += chunk.stop - chunk.start
        if progress is not None:
            progress(done, total, "snapshots")
