"""Sign increments of consecutive snapshots at chosen site pairs: ``increments``.

For the sign increments s_i = sign(m_i(t) - m_i(t-1)), a bond (i, i+1) shows as a
negative correlation of s_i and s_{i+1} (a move takes from one site and gives to the
other, one unit or a whole cluster, whatever the drift), while sites that are not
neighbours are nearly uncorrelated. Signs rather than the increments themselves: a CMAM
cluster move changes two sites by its whole mass, and raw products are then dominated by
a few large clusters (measured: the spread of bond correlations over positions is two to
three times larger with raw increments on a CMAM ring).

Along every lattice axis of length L >= :data:`MIN_LENGTH` the statistic follows site
pairs (i, j) of three kinds, pooled over (a sample of) the lines of the orthogonal axis
in 2D:

``seam``
    (L-1, 0), the pair a periodic boundary joins;
``bond``
    interior neighbours (k, k+1), at up to ``positions`` values of k spread over
    1 <= k <= L-3 (bonds touching the first or last site behave differently next to a
    wall, and they are what the seam is compared with);
``far``
    distant pairs (k, k + L//2) and (k, k + L//3), at up to ``positions`` pairs in all.

For every (replica, block of snapshots, pair) it sums s_i s_j, s_i^2, s_j^2, s_i and s_j
(integers), so that covariances can be centred within blocks (a transient's drifting
profile then does not pass for a correlation). Per chunk, the sign columns of the sampled
positions are formed once, then the pair sums (compiled with numba when installed, the
same numbers from NumPy otherwise or with ``MASSARC_PURE=1``). Memory is bounded: the
number of blocks shrinks when there are many replicas.

Options: ``positions`` (default 32), ``lines`` (orthogonal lines pooled in 2D, default
16), ``blocks`` per replica (default 16).

>>> plan = plan_axis(0, 12, positions=4)   # the seam, 4 bonds, 2 + 2 distant pairs
>>> plan.first.tolist(), plan.second.tolist()
([11, 1, 3, 5, 7, 0, 3, 0, 4], [0, 2, 4, 6, 8, 6, 9, 4, 8])
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.archive.reader import Chunk, ChunkRef
from massarc.archive.scan import ChunkFault, Statistic
from massarc.archive.stats.histogram import block_edges

try:  # numba is the optional `fast` extra; without it the NumPy path below is used
    from numba import njit
except ImportError:  # pragma: no cover - exercised only without numba
    njit = None

__all__ = [
    "KINDS",
    "MIN_LENGTH",
    "AxisIncrements",
    "AxisPlan",
    "IncrementStatistic",
    "IncrementStats",
    "plan_axis",
]

#: Names of the pair kinds, indexed by the codes of ``AxisPlan.kind``.
KINDS = ("seam", "bond", "far")
#: Shortest axis followed: below it distant pairs would be neighbours or too few.
MIN_LENGTH = 8
#: Accumulators per (replica, block, pair): sum d_i d_j, d_i^2, d_j^2, d_i, d_j.
_NSUMS = 5
#: Upper bound on the accumulators of one axis (blocks shrink to fit).
_BUDGET = 2_000_000


@dataclass(frozen=True)
class AxisPlan:
    """The pairs followed along one axis: positions ``first``/``second`` along the axis,
    ``kind`` codes into :data:`KINDS`, and the orthogonal ``lines`` pooled (``[0]`` in 1D).
    ``columns`` lists the positions read; ``ia``/``ib`` index the pair members in it."""

    axis: int
    length: int
    first: np.ndarray
    second: np.ndarray
    kind: np.ndarray
    lines: np.ndarray
    columns: np.ndarray
    ia: np.ndarray
    ib: np.ndarray


def _spread(stop: int, count: int) -> np.ndarray:
    """Up to ``count`` integers in [0, stop), evenly spaced, at least one apart."""
    step = max(1, stop // max(count, 1))
    return np.arange(0, stop, step, dtype=np.int64)[:count]


def plan_axis(
    axis: int, length: int, *, positions: int = 32, orth: int = 1, lines: int = 16
) -> AxisPlan | None:
    """The pairs followed along an axis of ``length`` sites (None when it is too short).

    ``orth`` is the length of the orthogonal axis (1 in 1D); up to ``lines`` of its lines
    are pooled.
    """
    if length < MIN_LENGTH:
        return None
    bonds = 1 + _spread(length - 3, positions)  # not touching site 0 or the last site
    far_a, far_b = [], []
    distances = (length // 2, length // 3)
    for d in distances:
        starts = _spread(length - d, -(-positions // len(distances)))
        far_a.append(starts)
        far_b.append(starts + d)
    far = np.concatenate(far_a)
    first = np.concatenate([[length - 1], bonds, far]).astype(np.int64)
    second = np.concatenate([[0], bonds + 1, *far_b]).astype(np.int64)
    kind = np.concatenate([[0], np.ones(len(bonds)), np.full(len(far), 2)]).astype(np.int8)
    picked = np.unique(np.linspace(0, orth - 1, min(orth, max(lines, 1))).round()).astype(np.int64)
    columns, inverse = np.unique(np.concatenate([first, second]), return_inverse=True)
    ia, ib = inverse[: len(first)].astype(np.int64), inverse[len(first) :].astype(np.int64)
    return AxisPlan(axis, length, first, second, kind, picked, columns, ia, ib)


def _segments(blk: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Runs of equal block index in the sorted ``blk``: starts (with the end appended) and
    the block of each run."""
    starts = np.concatenate([[0], np.flatnonzero(np.diff(blk)) + 1])
    return np.append(starts, len(blk)).astype(np.int64), blk[starts].astype(np.int64)


def _signs_numpy(x: np.ndarray, columns: np.ndarray, lines: np.ndarray) -> np.ndarray:
    sel = x[:, columns][:, :, lines]
    after, before = sel[1:], sel[:-1]
    signs = (after > before).astype(np.int8) - (after < before).astype(np.int8)
    return np.ascontiguousarray(signs.transpose(1, 0, 2))


def _pairs_numpy(s: np.ndarray, ia: np.ndarray, ib: np.ndarray, blk: np.ndarray) -> np.ndarray:
    a, b = s[ia].astype(np.int64), s[ib].astype(np.int64)  # (pair, time, line)
    per_t = np.stack([(a * b).sum(2), np.abs(a).sum(2), np.abs(b).sum(2), a.sum(2), b.sum(2)])
    bounds, which = _segments(blk)
    out = np.zeros((int(blk[-1]) + 1, len(ia), _NSUMS), np.int64)
    out[which] = np.add.reduceat(per_t, bounds[:-1], axis=2).transpose(2, 1, 0)
    return out


if njit is not None:

    @njit(cache=True, nogil=True)
    def _signs_rows(x, columns):  # pragma: no cover - compiled
        """Sign increments (column, time, 1) of a 1D lattice ``x`` (time, site)."""
        n, nc = x.shape[0] - 1, columns.shape[0]
        out = np.empty((nc, max(n, 0), 1), np.int8)
        for t in range(n):
            for ci in range(nc):
                after, before = x[t + 1, columns[ci]], x[t, columns[ci]]
                out[ci, t, 0] = np.int8(after > before) - np.int8(after < before)
        return out

    @njit(cache=True, nogil=True)
    def _signs_lines(x, columns, lines):  # pragma: no cover - compiled
        """Sign increments (column, time, line) of ``x`` (time, along, line)."""
        n, nc, no = x.shape[0] - 1, columns.shape[0], lines.shape[0]
        out = np.empty((nc, max(n, 0), no), np.int8)
        for t in range(n):
            for ci in range(nc):
                c = columns[ci]
                for oi in range(no):
                    after, before = x[t + 1, c, lines[oi]], x[t, c, lines[oi]]
                    out[ci, t, oi] = np.int8(after > before) - np.int8(after < before)
        return out

    @njit(cache=True, nogil=True)
    def _pairs_fast(s, ia, ib, bounds, which, nblocks):  # pragma: no cover - compiled
        out = np.zeros((nblocks, ia.shape[0], 5), np.int64)
        for g in range(which.shape[0]):
            t0, t1, b = bounds[g], bounds[g + 1], which[g]
            for p in range(ia.shape[0]):
                u = s[ia[p], t0:t1].ravel()  # contiguous: (time, line) of one column
                v = s[ib[p], t0:t1].ravel()
                sab = saa = sbb = sa = sb = 0
                for k in range(u.shape[0]):
                    uu, vv = np.int64(u[k]), np.int64(v[k])
                    sab += uu * vv
                    saa += uu * uu
                    sbb += vv * vv
                    sa += uu
                    sb += vv
                out[b, p, 0] += sab
                out[b, p, 1] += saa
                out[b, p, 2] += sbb
                out[b, p, 3] += sa
                out[b, p, 4] += sb
        return out


def _use_numba() -> bool:
    """The compiled kernels, unless numba is missing or ``MASSARC_PURE=1``."""
    return njit is not None and os.environ.get("MASSARC_PURE", "") not in ("1", "true", "yes")


def _reduce_axis(mass: np.ndarray, plan: AxisPlan, blk: np.ndarray) -> np.ndarray:
    """Sums (nblocks, pairs, 5) of the sign increments of ``mass`` ``(time, *lattice)``."""
    x = _as_lines(mass, plan.axis)
    if not _use_numba():
        return _pairs_numpy(_signs_numpy(x, plan.columns, plan.lines), plan.ia, plan.ib, blk)
    if mass.ndim == 2 and mass.flags.c_contiguous:
        signs = _signs_rows(mass, plan.columns)
    else:
        signs = _signs_lines(x, plan.columns, plan.lines)
    bounds, which = _segments(blk)
    return _pairs_fast(signs, plan.ia, plan.ib, bounds, which, int(blk[-1]) + 1)


def _as_lines(mass: np.ndarray, axis: int) -> np.ndarray:
    """View ``(time, *lattice)`` as ``(time, along axis, orthogonal line)``."""
    if mass.ndim == 2:
        return mass[:, :, None]
    return mass if axis == 0 else mass.transpose(0, 2, 1)


def _kernel_input(mass: np.ndarray) -> np.ndarray:
    if mass.dtype.kind in "ui" or mass.dtype == np.float64:
        return mass if mass.dtype.kind in "ui" else np.nan_to_num(mass)
    return np.nan_to_num(mass.astype(np.float64))


@dataclass(frozen=True)
class AxisIncrements:
    """The reduced sums of one axis: ``sums[r, b, p, k]`` for replica r, block b, pair p
    and k in (s_i s_j, s_i^2, s_j^2, s_i, s_j), pooled over ``len(plan.lines)`` lines."""

    plan: AxisPlan
    sums: np.ndarray
    counts: np.ndarray

    def centred(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Covariance and variances of both members per (replica, block, pair), centred on
        each (replica, block) mean (a transient's drifting profile then does not count)."""
        n = (self.counts * len(self.plan.lines)).astype(np.float64)[:, :, None]
        s = self.sums
        with np.errstate(invalid="ignore", divide="ignore"):
            mean_a = np.where(n > 0, s[..., 3] / n, 0.0)
            mean_b = np.where(n > 0, s[..., 4] / n, 0.0)
        cov = s[..., 0] - n * mean_a * mean_b
        var_a = s[..., 1] - n * mean_a**2
        var_b = s[..., 2] - n * mean_b**2
        return cov, var_a, var_b

    def moments(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Covariance, and variances of both members, per pair: :meth:`centred` summed over
        replicas and blocks."""
        cov, var_a, var_b = self.centred()
        return cov.sum(axis=(0, 1)), var_a.sum(axis=(0, 1)), var_b.sum(axis=(0, 1))

    def correlations(self) -> np.ndarray:
        """Correlation of s_i and s_j per pair (NaN where a member never moved)."""
        cov, var_a, var_b = self.moments()
        with np.errstate(invalid="ignore", divide="ignore"):
            r = cov / np.sqrt(var_a * var_b)
        return np.where((var_a > 0) & (var_b > 0), r, np.nan)

    @property
    def n_increments(self) -> int:
        """Number of (snapshot pair, line) increments behind every pair of this axis."""
        return int(self.counts.sum()) * len(self.plan.lines)


@dataclass(frozen=True)
class IncrementStats:
    """One entry per lattice axis (None for an axis shorter than :data:`MIN_LENGTH`).
    ``counts[r, b]`` is the number of snapshot pairs seen in block b of replica r, whose
    snapshots span ``edges[b] <= t < edges[b+1]`` (a pair belongs to its later snapshot)."""

    axes: tuple[AxisIncrements | None, ...]
    counts: np.ndarray
    edges: np.ndarray


class IncrementStatistic(Statistic):
    """The ``increments`` statistic (see the module docstring)."""

    name = "increments"
    pairs = True

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        shape = tuple(run.sites)
        positions = int(options.get("positions", 32))
        lines = int(options.get("lines", 16))
        if positions < 2 or lines < 1:
            raise ValueError(
                f"increments: expected positions >= 2 and lines >= 1; got {positions}, {lines}"
            )
        self.plans: list[AxisPlan | None] = []
        for axis, length in enumerate(shape):
            orth = shape[1 - axis] if len(shape) == 2 else 1
            self.plans.append(plan_axis(axis, length, positions=positions, orth=orth, lines=lines))
        widest = max((len(p.kind) for p in self.plans if p is not None), default=1)
        nrep = max(run.n_replicas, 1)
        fit = max(1, _BUDGET // (nrep * widest * _NSUMS))
        blocks = min(int(options.get("blocks", 16)), fit)
        self.edges = block_edges(max(run.n_snapshots, 1), blocks)
        nb = len(self.edges) - 1
        self._sums = [
            None if p is None else np.zeros((run.n_replicas, nb, len(p.kind), _NSUMS), np.int64)
            for p in self.plans
        ]
        self._counts = np.zeros((run.n_replicas, nb), np.int64)

    def _reduce(self, mass: np.ndarray, start: int) -> Any:
        """Sums of the increments of ``mass`` (snapshots start, start+1, ...)."""
        if len(mass) < 2:
            return None
        t = np.arange(start + 1, start + len(mass))
        b = np.searchsorted(self.edges, t, side="right") - 1
        first = int(b[0])
        blk = (b - first).astype(np.int64)
        nbl = int(blk[-1]) + 1
        x = _kernel_input(mass)
        parts = [None if p is None else _reduce_axis(x, p, blk) for p in self.plans]
        return first, np.bincount(blk, minlength=nbl), parts

    def _add(self, replica: int, partial: Any) -> None:
        if partial is None:
            return
        first, counts, parts = partial
        sl = slice(first, first + len(counts))
        self._counts[replica, sl] += counts
        for acc, part in zip(self._sums, parts, strict=True):
            if acc is not None:
                acc[replica, sl] += part

    def chunk(self, block: Chunk) -> Any:
        return self._reduce(block.mass, block.start)

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        self._add(ref.replica, partial)

    def pair(self, replica: int, index: int, before: np.ndarray, after: np.ndarray) -> None:
        self._add(replica, self._reduce(np.stack([before, after]), index - 1))

    def finish(self, faults: list[ChunkFault]) -> IncrementStats:
        axes = tuple(
            None if p is None else AxisIncrements(p, s, self._counts)
            for p, s in zip(self.plans, self._sums, strict=True)
        )
        return IncrementStats(axes, self._counts, self.edges)
