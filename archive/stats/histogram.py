"""Occupation histograms per (replica, block of snapshots): the ``histogram`` statistic."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..reader import Block, ChunkRef
from ..scan import ChunkFault, Statistic, register_statistic

__all__ = ["HistogramStatistic", "HistogramStats"]

#: Default number of bins (masses 0 .. bins-2 exactly, the last bin holds all larger masses).
DEFAULT_BINS = 512
#: Default number of snapshot blocks per replica.
DEFAULT_BLOCKS = 256


@dataclass(frozen=True)
class HistogramStats:
    """``counts[r, b, m]``: number of (site, snapshot) pairs of replica r in block b holding
    mass m, for m < ``top``; ``counts[r, b, top]`` counts masses >= ``top``. Block b spans
    snapshots ``edges[b] <= t < edges[b+1]``. ``valid[r, b]`` is False when part of the block
    was unreadable (its counts are then partial)."""

    counts: np.ndarray
    edges: np.ndarray
    valid: np.ndarray

    @property
    def top(self) -> int:
        return self.counts.shape[2] - 1


def block_edges(n_snapshots: int, blocks: int) -> np.ndarray:
    """``blocks`` near-equal blocks of [0, n_snapshots) (fewer when the run is shorter)."""
    b = max(1, min(blocks, n_snapshots))
    return np.linspace(0, n_snapshots, b + 1).round().astype(np.int64)


@register_statistic
class HistogramStatistic(Statistic):
    """Options: ``bins`` (default 512), ``blocks`` per replica (default 256)."""

    name = "histogram"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        self.bins = int(options.get("bins", DEFAULT_BINS))
        self.edges = block_edges(run.n_snapshots, int(options.get("blocks", DEFAULT_BLOCKS)))
        nb = len(self.edges) - 1
        self._counts = np.zeros((run.n_replicas, nb, self.bins), np.int64)
        self._valid = np.ones((run.n_replicas, nb), bool)

    def chunk(self, block: Block) -> Any:
        top = self.bins - 1
        x = block.mass.reshape(block.mass.shape[0], -1)
        if x.dtype.kind != "u":
            x = np.clip(np.nan_to_num(x, nan=0), 0, None).astype(np.int64)
        x = np.minimum(x, top)
        t = np.arange(block.start, block.stop)
        b = np.searchsorted(self.edges, t, side="right") - 1
        out = {}
        for bi in np.unique(b):
            rows = x[b == bi]
            out[int(bi)] = np.bincount(rows.reshape(-1), minlength=self.bins)
        return out

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        for bi, h in partial.items():
            self._counts[ref.replica, bi] += h

    def finish(self, faults: list[ChunkFault]) -> HistogramStats:
        for f in faults:
            lo = np.searchsorted(self.edges, f.ref.start, side="right") - 1
            hi = np.searchsorted(self.edges, f.ref.stop - 1, side="right") - 1
            self._valid[f.ref.replica, lo : hi + 1] = False
        return HistogramStats(self._counts, self.edges, self._valid)
