"""Array-shaped inputs (``.npy``, ``.npz`` members, HDF5 datasets, NetCDF variables) as
snapshot batches.

:func:`array_batches` reads an N-d array-like (anything sliceable: a memory map, an h5py
dataset, a :class:`SequentialArray`) whose axes are named (``replica``, ``time``, ``site``
or ``y``/``x``; see :mod:`._axes`) and yields batches of whole chunks, replica after
replica when the replica axis comes before time (or is absent), in lockstep otherwise.
Memory: one batch.

:class:`SequentialArray` wraps a C-ordered array in a forward-only byte stream (a
compressed zip member) and serves exactly the reads :func:`array_batches` makes, in
storage order; any other order is refused with a clear message.
"""

from __future__ import annotations

import contextlib
import math
import mmap
from collections.abc import Iterator, Mapping
from typing import Any, BinaryIO

import numpy as np

from ..errors import DataError
from .registry import Batch

__all__ = ["BATCH_BYTES", "SequentialArray", "array_batches"]

#: Bytes of source data read per batch (a whole number of archive chunks when possible).
BATCH_BYTES = 64 * 1024 * 1024


class SequentialArray:
    """A C-ordered array read forward from a stream; ``name`` is used in messages."""

    def __init__(self, stream: BinaryIO, shape: tuple[int, ...], dtype: np.dtype, name: str):
        self.stream = stream
        self.shape = tuple(int(s) for s in shape)
        self.ndim = len(self.shape)
        self.dtype = np.dtype(dtype)
        self.name = name
        self._pos = 0  # elements consumed

    def __getitem__(self, key: Any) -> np.ndarray:
        key = key if isinstance(key, tuple) else (key,)
        starts, counts, shape_out = [], [], []
        for i, n in enumerate(self.shape):
            k = key[i] if i < len(key) else slice(None)
            if isinstance(k, slice):
                a, b, _ = k.indices(n)
                starts.append(a)
                counts.append(b - a)
                shape_out.append(b - a)
            else:
                starts.append(int(k))
                counts.append(1)
        first = next((i for i, c in enumerate(counts) if c != 1), self.ndim)
        whole_after = all(
            starts[j] == 0 and counts[j] == self.shape[j] for j in range(first + 1, self.ndim)
        )
        flat_start = sum(a * math.prod(self.shape[i + 1 :]) for i, a in enumerate(starts))
        size = math.prod(counts)
        if not whole_after or flat_start != self._pos:
            raise DataError(
                f"{self.name}: this compressed array can only be read in storage order "
                f"(axes {self.axes_text()}); store it uncompressed or with the lattice axes last"
            )
        nbytes = size * self.dtype.itemsize
        raw = self.stream.read(nbytes)
        if len(raw) != nbytes:
            raise DataError(
                f"{self.name}: truncated: expected {nbytes} more bytes of data; got {len(raw)}"
            )
        self._pos += size
        return np.frombuffer(raw, dtype=self.dtype).reshape(shape_out)

    axes: tuple[str, ...] = ()

    def axes_text(self) -> str:
        return ",".join(self.axes) if self.axes else str(list(self.shape))


def _release(arr: Any) -> None:
    """Let the kernel drop the pages of a memory-mapped input that were read so far, so
    that converting a file larger than memory keeps the resident set bounded (a later
    access simply reads the file again)."""
    mm = getattr(arr, "_mmap", None)
    if mm is not None and hasattr(mm, "madvise") and hasattr(mmap, "MADV_DONTNEED"):
        with contextlib.suppress(OSError, ValueError):  # best effort
            mm.madvise(mmap.MADV_DONTNEED)


def _step(chunk: int, per_snapshot: int) -> int:
    """Snapshots per batch: whole chunks of about BATCH_BYTES, at least one chunk."""
    chunks = max(1, BATCH_BYTES // max(1, chunk * per_snapshot))
    return chunk * chunks


def array_batches(
    arr: Any,
    axes: tuple[str, ...],
    times: np.ndarray,
    chunk: int,
    *,
    series: Mapping[str, np.ndarray] | None = None,
) -> Iterator[Batch]:
    """Batches of ``arr`` with named ``axes`` (see the module docstring).

    ``series`` maps ``inflow``/``outflow`` to ``(replica, time)`` (or ``(time,)``) arrays.
    """
    lat = [a for a in axes if a not in ("replica", "time")]
    rep_ax = axes.index("replica") if "replica" in axes else None
    time_ax = axes.index("time")
    n_rep = int(arr.shape[rep_ax]) if rep_ax is not None else 1
    n_time = int(arr.shape[time_ax])
    per_snapshot = math.prod(int(arr.shape[axes.index(a)]) for a in lat) * arr.dtype.itemsize
    ser = {k: np.asarray(v).reshape(n_rep, n_time) for k, v in (series or {}).items()}
    if rep_ax is None or rep_ax < time_ax:
        step = _step(chunk, per_snapshot)
        kept = [a for a in axes if a != "replica"]
        perm = [kept.index("time")] + [kept.index(a) for a in lat]
        for r in range(n_rep):
            for a in range(0, n_time, step):
                b = min(a + step, n_time)
                idx: list[Any] = [slice(None)] * len(axes)
                if rep_ax is not None:
                    idx[rep_ax] = r
                idx[time_ax] = slice(a, b)
                data = np.transpose(np.asarray(arr[tuple(idx)]), perm)
                yield Batch(
                    times[a:b],
                    data,
                    replica=r,
                    series={k: v[r, a:b] for k, v in ser.items()} or None,
                    done=r * n_time + b,
                )
                _release(arr)
        return
    step = _step(chunk, per_snapshot * n_rep) if n_rep else chunk
    perm = [rep_ax, time_ax] + [axes.index(a) for a in lat]
    for a in range(0, n_time, step):
        b = min(a + step, n_time)
        idx = [slice(None)] * len(axes)
        idx[time_ax] = slice(a, b)
        data = np.transpose(np.asarray(arr[tuple(idx)]), perm)
        yield Batch(
            times[a:b],
            data,
            replica=None,
            series={k: v[:, a:b] for k, v in ser.items()} or None,
            done=n_rep * b,
        )
        _release(arr)
