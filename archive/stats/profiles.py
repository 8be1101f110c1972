"""Coarse mass profiles along each axis at sampled snapshots: ``profiles``.

Along every axis the sites are grouped into at most ``bins`` (default 32) contiguous bins
whose edges are mirror-symmetric (bin b and bin B-1-b have the same size), and the mass
of each bin (every line of the other axis pooled in 2D) is recorded at evenly spread
snapshots, the same snapshots in every replica. A mirror image of the lattice along the
axis reverses the order of the bins exactly, so a mirror-symmetric process gives bin
profiles symmetric in distribution; replicas can be compared snapshot by snapshot. Two
checks read it: ``drift`` (the centre of mass between walls) and ``independence`` (the
correlation of the profiles of different replicas).

The visited snapshots follow the budget of :mod:`massarc.archive.stats.sampling`
(options ``fraction``, default 1/32 of the snapshots, ``floor``, default 2**22 site
visits, and ``cap``, default 2**15 samples over all replicas); a visit sums the masses of
one snapshot, about a tenth of the cost of decoding it.

>>> mirror_edges(10, 4).tolist()
[0, 2, 5, 8, 10]
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..reader import Chunk, ChunkRef
from ..scan import ChunkFault, Statistic
from .sampling import evenly, sample_count

__all__ = ["ProfileStatistic", "ProfileStats", "mirror_edges"]


def mirror_edges(length: int, bins: int) -> np.ndarray:
    """Edges of about ``min(bins, length)`` contiguous bins of ``range(length)``, symmetric
    under the mirror i -> length - 1 - i (an odd length needs an odd number of bins: one
    fewer, or one more when that leaves a single bin)."""
    b = max(1, min(bins, length))
    if length % 2 and not b % 2:
        b = b - 1 if b > 2 else min(b + 1, length)
    left = [(k * length) // b for k in range(b // 2 + 1)]
    edges = left + [length - e for e in reversed(left[: b - len(left) + 1])]
    return np.array(edges, dtype=np.int64)


@dataclass(frozen=True)
class ProfileStats:
    """``mass[r, s, k]``: mass of bin k (bins of every axis laid end to end, axis 0 first)
    at snapshot ``snapshots[s]`` of replica r, NaN where the chunk was not read.
    ``edges[a]`` are the bin edges along axis a; ``axis_of[k]`` the axis of bin k."""

    mass: np.ndarray
    snapshots: np.ndarray
    edges: tuple[np.ndarray, ...]
    axis_of: np.ndarray

    def axis(self, a: int) -> np.ndarray:
        """The profiles ``(replica, snapshot, bin)`` of axis ``a``."""
        return self.mass[:, :, self.axis_of == a]


class ProfileStatistic(Statistic):
    """The ``profiles`` statistic (see the module docstring)."""

    name = "profiles"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        self.sites = tuple(int(s) for s in run.sites)
        bins = int(options.get("bins", 32))
        if bins < 1:
            raise ValueError(f"profiles: expected bins >= 1; got {bins}")
        self.edges = tuple(mirror_edges(n, bins) for n in self.sites)
        self.axis_of = np.concatenate(
            [np.full(len(e) - 1, a, np.int64) for a, e in enumerate(self.edges)]
        )
        n_rep, n_snap = int(run.n_replicas), int(run.n_snapshots)
        count = sample_count(
            n_snap,
            n_rep,
            math.prod(self.sites) if self.sites else 0,
            fraction=float(options.get("fraction", 1 / 32)),
            floor_values=int(options.get("floor", 2**22)),
            cap_total=int(options.get("cap", 2**15)),
        )
        self.snapshots = evenly(n_snap, count)
        self._mass = np.full((n_rep, len(self.snapshots), len(self.axis_of)), np.nan)

    def chunk(self, chunk: Chunk) -> Any:
        lo = np.searchsorted(self.snapshots, chunk.start)
        hi = np.searchsorted(self.snapshots, chunk.stop)
        if lo == hi:
            return None
        rows = np.asarray(chunk.mass)[self.snapshots[lo:hi] - chunk.start]
        if rows.dtype.kind == "f":
            rows = np.nan_to_num(rows)
        rows = rows.astype(np.int64 if rows.dtype.kind in "uib" else np.float64)
        parts = []
        for a, edges in enumerate(self.edges):
            along = rows.sum(axis=tuple(i for i in range(1, rows.ndim) if i != 1 + a))
            parts.append(np.add.reduceat(along, edges[:-1], axis=1))
        return lo, np.concatenate(parts, axis=1).astype(np.float64)

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        if partial is not None:
            lo, values = partial
            self._mass[ref.replica, lo : lo + len(values)] = values

    def finish(self, faults: list[ChunkFault]) -> ProfileStats:
        return ProfileStats(self._mass, self.snapshots, self.edges, self.axis_of)
