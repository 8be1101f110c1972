"""NumPy ``.npy``: one array of masses.

Layout (read): ``(time, site)`` or ``(replica, time, site)`` for a 1-D lattice;
``(time, y, x)`` or ``(replica, time, y, x)`` for a 2-D lattice, told apart by the
metadata's ``lattice.sites``. Another axis order is given with ``--option
order=time,replica,site``. The file is memory-mapped, so it may be larger than memory.
A ``.npy`` carries no times: they are ``0, 1, ..., T-1`` unless ``--option times=`` gives
``start:step``, a comma list or a ``.npy``/text file of times. Nor does it carry metadata.

Layout (write): ``(replica, time, *lattice)`` in the archive's dtype, streamed block by
block (the header first, then the bytes in C order).
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any, BinaryIO, ClassVar

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._arrays import array_blocks
from ._options import default_axes, guard_options, parse_axes, parse_times
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["NpyFormat", "axes_for", "read_npy_header", "times_for", "write_npy_stream"]

NPY_MAGIC = b"\x93NUMPY"


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


def write_npy_stream(fp: BinaryIO, run: Run, progress: Progress | None = None) -> None:
    """Write the masses of ``run`` as one ``.npy`` ``(replica, time, *lattice)`` to ``fp``."""
    header = {
        "descr": np.lib.format.dtype_to_descr(run.dtype),
        "fortran_order": False,
        "shape": tuple(run.shape),
    }
    np.lib.format.write_array_header_2_0(fp, header)
    done = 0
    total = run.n_replicas * run.n_snapshots
    for block in run.chunks():
        fp.write(np.ascontiguousarray(block.mass).tobytes())
        done += block.stop - block.start
        if progress is not None:
            progress(done, total, "snapshots")


def axes_for(
    shape: tuple[int, ...], meta: RunMeta, order: str | None, name: str
) -> tuple[str, ...]:
    """The axis names of a stored mass array under ``meta`` (or ``order``)."""
    lat_nd = meta.lattice.ndim
    if order:
        return parse_axes(order, len(shape), lat_nd)
    axes = default_axes(len(shape), lat_nd)
    if axes is None:
        lat = "site" if lat_nd == 1 else "y, x"
        raise DataError(
            f"{name}: expected a ({'time, ' + lat}) or (replica, time, {lat}) array for the "
            f"{lat_nd}-D lattice of the metadata; got shape {list(shape)} (give the axes with "
            "--option order=...)"
        )
    return axes


def times_for(
    n: int, option: str | None, stored: np.ndarray | None, name: str, what: str
) -> np.ndarray:
    """Snapshot times: the option, else the stored array, else 0..n-1."""
    if option is not None:
        return parse_times(option, n)
    if stored is None:
        return np.arange(n, dtype=np.float64)
    t = np.asarray(stored).reshape(-1)
    if len(t) != n:
        raise DataError(
            f"{name}: {what}: expected {n} times (the length of the time axis of the masses); "
            f"got {len(t)}"
        )
    if t.dtype.kind not in "fiu":
        raise DataError(f"{name}: {what}: expected numeric times; got dtype {t.dtype}")
    return t.astype(np.float64)


class NpySource(Source):
    unit = "snapshots"

    def __init__(self, path: Path, options: dict[str, str]) -> None:
        self.name = str(path)
        self.options = options
        with open(path, "rb") as f:
            shape, fortran, dtype = read_npy_header(f, self.name)
            offset = f.tell()
        need = offset + math.prod(shape) * dtype.itemsize
        size = os.path.getsize(path)
        if size < need:
            raise DataError(
                f"{self.name}: truncated: the .npy header promises {need} bytes; the file has "
                f"{size}"
            )
        self.array = np.memmap(
            path,
            dtype=dtype,
            mode="r",
            offset=offset,
            shape=shape,
            order="F" if fortran else "C",
        )
        self.dtype = dtype if dtype.kind == "u" else None

    def time_length(self, meta: RunMeta) -> int | None:
        axes = axes_for(self.array.shape, meta, self.options.get("order"), self.name)
        return int(self.array.shape[axes.index("time")])

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        arr = self.array
        axes = axes_for(arr.shape, meta, self.options.get("order"), self.name)
        n = int(arr.shape[axes.index("time")])
        times = times_for(n, self.options.get("times"), None, self.name, "times")
        self.total = n * (int(arr.shape[axes.index("replica")]) if "replica" in axes else 1)
        yield from array_blocks(arr, axes, times, chunk)

    def close(self) -> None:
        mm = getattr(self.array, "_mmap", None)
        if mm is not None:
            mm.close()


class NpyFormat(Format):
    name = "npy"
    suffixes = (".npy",)
    description = "NumPy .npy masses: (replica,) time, site(s); no times or metadata inside"
    read_options: ClassVar[dict[str, str]] = {
        "times": "snapshot times: start:step, a comma list, or a .npy/text file",
        "order": "axis order of the array, e.g. time,replica,site",
    }
    writable = True

    def sniff(self, head: bytes, path: Path) -> bool:
        return head.startswith(NPY_MAGIC)

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading npy")
        return NpySource(Path(path), dict(options))

    def write(
        self, run: Run, path: Path, *, progress: Progress | None = None, **options: Any
    ) -> list[str]:
        guard_options(options, self.write_options, "writing npy")
        with open(path, "wb") as f:
            write_npy_stream(f, run, progress)
        notes = [
            f"{path.name.split('.partial-')[0]}: .npy holds the masses only "
            "(replica, time, sites); metadata is not carried (use .npz to keep it)"
        ]
        if not np.array_equal(run.times, np.arange(run.n_snapshots, dtype=np.float64)):
            notes.append(
                "the snapshot times are not 0..T-1 and are not stored in a .npy; "
                "pass them back with --option times=... or use .npz"
            )
        return notes
