"""NumPy ``.npy``: one array of masses.

Layout (read): ``(time, site)`` or ``(replica, time, site)`` for a 1-D lattice;
``(time, y, x)`` or ``(replica, time, y, x)`` for a 2-D lattice, told apart by the
metadata's ``lattice.sites``. Another axis order is given with ``--option
order=time,replica,site``. The file is memory-mapped, so it may be larger than memory.
A ``.npy`` carries no times: they are ``0, 1, ..., T-1`` unless ``--option times=`` gives
``start:step``, a comma list or a ``.npy``/text file of times. Nor does it carry metadata.

Layout (write): ``(replica, time, *lattice)`` in the archive's dtype, streamed chunk by
chunk (the header first, then the bytes in C order).
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._arrays import array_batches
from ._axes import axes_for, times_for
from ._npy_stream import read_npy_header, write_npy_stream
from ._options import guard_options
from ._signatures import NPY_MAGIC
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["NpyFormat"]


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

    def n_snapshots_for(self, meta: RunMeta) -> int | None:
        axes = axes_for(self.array.shape, meta, self.options.get("order"), self.name)
        return int(self.array.shape[axes.index("time")])

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        arr = self.array
        axes = axes_for(arr.shape, meta, self.options.get("order"), self.name)
        n = int(arr.shape[axes.index("time")])
        times = times_for(n, self.options.get("times"), None, self.name, "times")
        self.total = n * (int(arr.shape[axes.index("replica")]) if "replica" in axes else 1)
        yield from array_batches(arr, axes, times, chunk)

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
