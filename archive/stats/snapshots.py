"""Per-snapshot moments: the ``snapshots`` statistic."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..layout import sentinel
from ..reader import Block, ChunkRef
from ..scan import ChunkFault, Statistic, register_statistic

__all__ = ["SnapshotStatistic", "SnapshotStats"]

Location = tuple[int, int, int]  # (replica, snapshot, flat site index)


@dataclass(frozen=True)
class SnapshotStats:
    """Arrays shaped (replica, snapshot); ``valid`` is False where the chunk was unreadable.

    ``argmax`` is the flat (C-order) site index of the largest mass. The ``first_*`` fields
    give the first (replica, snapshot, flat site) holding a negative, a fractional, or a
    sentinel (never written) value, in replica-major then time order, with their counts.
    """

    total: np.ndarray
    maximum: np.ndarray
    minimum: np.ndarray
    sum_sq: np.ndarray
    occupied: np.ndarray
    argmax: np.ndarray
    valid: np.ndarray
    first_negative: Location | None
    n_negative: int
    first_fractional: Location | None
    n_fractional: int
    first_sentinel: Location | None
    n_sentinel: int


def _first(mask: np.ndarray, replica: int, start: int) -> tuple[Location | None, int]:
    n = int(np.count_nonzero(mask))
    if not n:
        return None, 0
    flat = int(np.argmax(mask.reshape(-1)))
    t, site = divmod(flat, int(np.prod(mask.shape[1:])))
    return (replica, start + t, site), n


@register_statistic
class SnapshotStatistic(Statistic):
    """Reduce each snapshot to a handful of numbers (memory: a few arrays of (R, T))."""

    name = "snapshots"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        r, t = run.n_replicas, run.n_snapshots
        self._total = np.zeros((r, t), np.int64)
        self._max = np.zeros((r, t), np.int64)
        self._min = np.zeros((r, t), np.int64)
        self._sq = np.zeros((r, t), np.float64)
        self._occ = np.zeros((r, t), np.int64)
        self._argmax = np.zeros((r, t), np.int64)
        self._valid = np.zeros((r, t), bool)
        self._firsts: dict[str, list[tuple[Location, int]]] = {
            "negative": [],
            "fractional": [],
            "sentinel": [],
        }
        dt = run.dtype
        self._sentinel = sentinel(dt) if dt.kind in "ui" else None

    def chunk(self, block: Block) -> Any:
        x = block.mass.reshape(block.mass.shape[0], -1)
        out: dict[str, Any] = {}
        if x.dtype.kind == "f":
            frac = ~np.isfinite(x) | (x != np.floor(x))
            out["fractional"] = _first(frac, block.replica, block.start)
            x = np.where(frac, 0, x)
        xi = x.astype(np.int64, copy=False)
        out["total"] = xi.sum(axis=1)
        out["max"] = xi.max(axis=1)
        out["min"] = xi.min(axis=1)
        out["sq"] = np.einsum("ij,ij->i", xi.astype(np.float64), xi.astype(np.float64))
        out["occ"] = np.count_nonzero(xi, axis=1)
        out["argmax"] = xi.argmax(axis=1)
        if x.dtype.kind in "if":
            out["negative"] = _first(xi < 0, block.replica, block.start)
        if self._sentinel is not None:
            out["sentinel"] = _first(x == self._sentinel, block.replica, block.start)
        return out

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        sl = (ref.replica, slice(ref.start, ref.stop))
        self._total[sl] = partial["total"]
        self._max[sl] = partial["max"]
        self._min[sl] = partial["min"]
        self._sq[sl] = partial["sq"]
        self._occ[sl] = partial["occ"]
        self._argmax[sl] = partial["argmax"]
        self._valid[sl] = True
        for key, bucket in self._firsts.items():
            loc, n = partial.get(key, (None, 0))
            if loc is not None:
                bucket.append((loc, n))

    def finish(self, faults: list[ChunkFault]) -> SnapshotStats:
        def first(key: str) -> tuple[Location | None, int]:
            bucket = self._firsts[key]
            if not bucket:
                return None, 0
            return min(loc for loc, _ in bucket), sum(n for _, n in bucket)

        neg, n_neg = first("negative")
        frac, n_frac = first("fractional")
        sen, n_sen = first("sentinel")
        return SnapshotStats(
            self._total,
            self._max,
            self._min,
            self._sq,
            self._occ,
            self._argmax,
            self._valid,
            neg,
            n_neg,
            frac,
            n_frac,
            sen,
            n_sen,
        )
