"""Occupation histograms per (replica, block of snapshots): the ``histogram`` statistic.

Masses below the top bin are counted exactly; the top bin holds every larger mass, and
negative (or fractional) values fall in bin 0, so that every (site, snapshot) is counted
once. The loop is shared with the ``snapshots`` statistic when both run in one pass.

>>> import numpy as np
>>> from massarc.archive import Chunk
>>> from types import SimpleNamespace
>>> run = SimpleNamespace(n_replicas=1, n_snapshots=2, dtype=np.dtype("uint8"))
>>> stat = HistogramStatistic(run, bins=4, blocks=1)
>>> chunk = Chunk(0, 0, 2, np.array([[1, 0, 3], [2, 9, 0]], np.uint8))
>>> stat.merge(chunk, stat.chunk(chunk))
>>> stat.finish([]).counts.tolist()   # masses 0, 1, 2 and >= 3
[[[2, 1, 1, 2]]]
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._jit import backend_for
from ..reader import Chunk, ChunkRef
from ..scan import ChunkFault, Statistic
from ._kernels import Plan, reduce_chunk

__all__ = ["HistogramStatistic", "HistogramStats", "block_edges"]

#: Default number of bins (masses 0 .. bins-2 exactly, the last bin holds all larger masses).
DEFAULT_BINS = 512
#: Default number of snapshot blocks per replica.
DEFAULT_BLOCKS = 256


@dataclass(frozen=True)
class HistogramStats:
    """``counts[r, b, m]``: number of (site, snapshot) pairs of replica r in block b holding
    mass m, for m < ``top``; ``counts[r, b, top]`` counts masses >= ``top``. Chunk b spans
    snapshots ``edges[b] <= t < edges[b+1]``. ``valid[r, b]`` is False when part of the block
    was unreadable (its counts are then partial)."""

    counts: np.ndarray
    edges: np.ndarray
    valid: np.ndarray

    @property
    def top(self) -> int:
        return self.counts.shape[2] - 1


def block_edges(n_snapshots: int, blocks: int) -> np.ndarray:
    """``blocks`` near-equal blocks of [0, n_snapshots) (fewer when the run is shorter).

    >>> block_edges(10, 3).tolist()
    [0, 3, 7, 10]
    """
    b = max(1, min(blocks, n_snapshots))
    return np.linspace(0, n_snapshots, b + 1).round().astype(np.int64)


class HistogramStatistic(Statistic):
    """Options: ``bins`` (default 512, at least 2), ``blocks`` per replica (default 256)."""

    name = "histogram"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        self.bins = int(options.get("bins", DEFAULT_BINS))
        if self.bins < 2:
            raise ValueError(f"histogram: expected bins >= 2; got {self.bins}")
        self.edges = block_edges(run.n_snapshots, int(options.get("blocks", DEFAULT_BLOCKS)))
        nb = len(self.edges) - 1
        self._counts = np.zeros((run.n_replicas, nb, self.bins), np.int64)
        self._valid = np.ones((run.n_replicas, nb), bool)
        self.plan = Plan(None, self.bins, self.edges, backend_for(run))
        #: True once a ``snapshots`` statistic shares its loop (see SnapshotStatistic.prepare).
        self.fused = False

    def chunk(self, chunk: Chunk) -> Any:
        red = reduce_chunk(chunk, self.plan)
        return red.hist_first, red.hist

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        first, hist = partial
        if hist is not None and len(hist):
            self._counts[ref.replica, first : first + len(hist)] += hist

    def finish(self, faults: list[ChunkFault]) -> HistogramStats:
        for f in faults:
            lo = np.searchsorted(self.edges, f.ref.start, side="right") - 1
            hi = np.searchsorted(self.edges, f.ref.stop - 1, side="right") - 1
            self._valid[f.ref.replica, lo : hi + 1] = False
        return HistogramStats(self._counts, self.edges, self._valid)
