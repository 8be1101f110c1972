"""Per-snapshot moments: the ``snapshots`` statistic.

Every (replica, snapshot) is reduced to its total, extrema, sum of squares, number of
occupied sites and position of the largest mass, and the first impossible values are
located (see :mod:`massarc.archive.stats._kernels` for the exact semantics). When a
``histogram`` statistic runs in the same pass, both share one fused loop over each chunk.

>>> import numpy as np
>>> from massarc.archive import Chunk
>>> from types import SimpleNamespace
>>> run = SimpleNamespace(n_replicas=1, n_snapshots=2, dtype=np.dtype("uint8"))
>>> stat = SnapshotStatistic(run)
>>> chunk = Chunk(0, 0, 2, np.array([[1, 0, 3], [2, 2, 0]], np.uint8))
>>> stat.merge(chunk, stat.chunk(chunk))
>>> stat.finish([]).total.tolist()
[[4, 4]]
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._jit import backend_for
from ..layout import sentinel
from ..reader import Chunk, ChunkRef
from ..scan import ChunkFault, Statistic
from ._kernels import Plan, Reduction, reduce_chunk

__all__ = ["SnapshotStatistic", "SnapshotStats"]

Location = tuple[int, int, int]  # (replica, snapshot, flat site index)


@dataclass(frozen=True)
class SnapshotStats:
    """Arrays shaped (replica, snapshot); ``valid`` is False where the chunk was unreadable.
    ``total`` is int64; ``maximum`` and ``minimum`` are int32 for data of 16 bits or less
    and int32 data (else int64); ``occupied`` and ``argmax`` are int32 on lattices of fewer
    than 2^31 sites. Cast before arithmetic that could leave those ranges (squares).

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


_KINDS = ("negative", "fractional", "sentinel")


class SnapshotStatistic(Statistic):
    """Reduce each snapshot to a handful of numbers (memory: a few arrays of (R, T))."""

    name = "snapshots"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        r, t = run.n_replicas, run.n_snapshots
        dt = run.dtype
        # 32-bit where every value fits: the arrays are kept for the whole audit, one entry
        # per (replica, snapshot), and long runs have millions of those
        narrow = dt.kind in "ui" and (dt.itemsize <= 2 or dt == np.dtype(np.int32))
        extreme = np.int32 if narrow else np.int64
        sites = getattr(run, "sites", None)
        site = np.int32 if sites is not None and math.prod(sites) < 2**31 else np.int64
        self._total = np.zeros((r, t), np.int64)
        self._max = np.zeros((r, t), extreme)
        self._min = np.zeros((r, t), extreme)
        self._sq = np.zeros((r, t), np.float64)
        self._occ = np.zeros((r, t), site)
        self._argmax = np.zeros((r, t), site)
        self._valid = np.zeros((r, t), bool)
        self._firsts: dict[str, list[tuple[Location, int]]] = {k: [] for k in _KINDS}
        self._sentinel = sentinel(dt) if dt.kind in "ui" else None
        self.plan = Plan(sentinel=self._sentinel, backend=backend_for(run))

    def prepare(self, peers: list[Statistic]) -> None:
        """Share one fused loop with the first ``histogram`` statistic of the pass."""
        from .histogram import HistogramStatistic

        for peer in peers:
            if isinstance(peer, HistogramStatistic) and not peer.fused:
                self.plan = Plan(self._sentinel, peer.bins, peer.edges, self.plan.backend)
                peer.plan, peer.fused = self.plan, True
                return

    def reduction(self, chunk: Chunk) -> Reduction:
        """The per-snapshot reduction of ``chunk`` this statistic reads (totals, extrema,
        sums of squares, occupied sites, positions of the largest mass), computed once per
        chunk and worker thread: a statistic of the same pass that needs one of these
        numbers while it reduces the chunk asks here rather than loop over it again."""
        return reduce_chunk(chunk, self.plan)

    def chunk(self, chunk: Chunk) -> Any:
        red = self.reduction(chunk)
        volume = int(np.prod(chunk.mass.shape[1:]))

        def loc(flat: int) -> Location | None:
            if flat < 0:
                return None
            row, site = divmod(flat, volume)
            return (chunk.replica, chunk.start + row, site)

        return {
            "moments": (
                red.total,
                red.maximum,
                red.minimum,
                red.sum_sq,
                red.occupied,
                red.argmax,
            ),
            "negative": (loc(red.first_negative), red.n_negative),
            "fractional": (loc(red.first_fractional), red.n_fractional),
            "sentinel": (loc(red.first_sentinel), red.n_sentinel),
        }

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        sl = (ref.replica, slice(ref.start, ref.stop))
        arrays = (self._total, self._max, self._min, self._sq, self._occ, self._argmax)
        for target, values in zip(arrays, partial["moments"], strict=True):
            target[sl] = values
        self._valid[sl] = True
        for key, bucket in self._firsts.items():
            found, n = partial[key]
            if found is not None:
                bucket.append((found, n))

    def finish(self, faults: list[ChunkFault]) -> SnapshotStats:
        def first(key: str) -> tuple[Location | None, int]:
            bucket = self._firsts[key]
            if not bucket:
                return None, 0
            return min(found for found, _ in bucket), sum(n for _, n in bucket)

        return SnapshotStats(
            self._total,
            self._max,
            self._min,
            self._sq,
            self._occ,
            self._argmax,
            self._valid,
            *first("negative"),
            *first("fractional"),
            *first("sentinel"),
        )
