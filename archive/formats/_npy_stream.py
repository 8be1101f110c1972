"""The ``.npy`` byte layout read and written as a stream: a ``.npy`` file, and every
member of an ``.npz`` (which may be a compressed zip member that only reads forward)."""

from __future__ import annotations

from typing import Any, BinaryIO

import numpy as np

from ..errors import DataError
from ..progress import Progress
from ..reader import Run

__all__ = ["read_npy_header", "write_npy_stream"]


def read_npy_header(fp: BinaryIO, name: str) -> tuple[tuple[int, ...], bool, np.dtype]:
    """(shape, fortran_order, dtype) from the start of a ``.npy`` stream; the stream is
    left at the first data byte."""
    try:
        version = np.lib.format.read_magic(fp)
        if version == (1, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_1_0(fp)
        else:
            shape, fortran, dtype = np.lib.format.read_array_header_2_0(fp)
    except ValueError as exc:
        raise DataError(f"{name}: not a readable .npy array ({exc})") from None
    if dtype.hasobject:
        raise DataError(f"{name}: expected an integer array; got dtype object (pickled data)")
    return tuple(int(s) for s in shape), bool(fortran), dtype


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
