"""Bond transfers reconstructed from consecutive snapshots: the ``transfers`` statistic.

Along an axis of L sites (in 2D: the masses summed over the other axis, which obey the
same continuity), two consecutive snapshots fix the net mass moved across every bond up to
one constant: with Dm_i = m_i(t') - m_i(t),

    x_k = C - sum_{i <= k} Dm_i        (bond k joins sites k and k + 1)

is the transfer across bond k when the constant C is the transfer into site 0 from the
left: 0 behind a wall, the inflow increment at an open end, the unknown seam transfer on a
ring (then x is shifted by the same amount at every bond). Bond L - 1 is the seam (or the
right end): x_{L-1} = C - sum_i Dm_i.

The statistic keeps x at a fixed set of bonds (:class:`TransferPlan`) for a bounded sample
of snapshot intervals: every ``stride``-th interval (the one between snapshots g and g + 1
for g a multiple of the stride), at most ``intervals`` per replica. The bonds are

* the *ring cuts*: K evenly spaced bonds ending at bond L - 1 (K the largest divisor of L
  in 12..64, so that on a ring they are translates of each other);
* the *wall pair* at about L/3 and 2L/3, and the middle bond;
* the ends of the *segments* whose mass changes x_a - x_b measure how far mass spreads:
  lengths 1, 2, 4, ... from up to 32 starts, then 1, 2, 4, ... ring-cut spacings and half
  the axis.

It also sums, per replica, the masses between consecutive ring cuts at the first snapshot
of every kept interval (the time-averaged profile).

Cost and memory: only the two snapshots of a kept interval are projected and summed (prefix
sums at the kept bonds, compiled with numba when installed). Memory is
replicas x kept intervals x kept bonds integers, at most about :data:`BUDGET` (the number
of kept intervals shrinks to fit), whatever the length of the run. The interval straddling
two chunks comes from the engine's pair of edge snapshots (``pairs = True``).

Options: ``intervals`` (per replica, default 2048).

>>> plan = plan_axis(0, 12)
>>> plan.ring_k, plan.ring_cuts.tolist()[:4], plan.pair.tolist()
(12, [0, 1, 2, 3], [3, 7])
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.archive._jit import backend_for, use_numba
from massarc.archive.reader import Chunk, ChunkRef
from massarc.archive.scan import ChunkFault, Statistic

__all__ = [
    "BUDGET",
    "MIN_LENGTH",
    "AxisTransfers",
    "TransferPlan",
    "TransferStatistic",
    "TransferStats",
    "bond_transfers",
    "plan_axis",
]

#: Shortest axis followed.
MIN_LENGTH = 8
#: Ring cuts: the largest divisor of L in this range (exact translates on a ring).
RING_RANGE = (12, 64)
#: Without such a divisor, axes up to this length use every bond as a ring cut.
RING_ALL_BONDS = 128
#: Starts of the short segments (a single heavy cluster passing a few starts must not
#: decide the spreading distance).
_ANCHORS = 32
#: About the most integers kept for all axes together (kept intervals shrink to fit).
BUDGET = 4_000_000


def bond_transfers(mass: np.ndarray, axis: int = 0, constant: np.ndarray | int = 0) -> np.ndarray:
    """The transfers x_k = C - sum_{i<=k} Dm_i of every snapshot interval and bond.

    ``mass`` is ``(time, L)`` or ``(time, Ly, Lx)``; in 2D the masses are summed over the
    other axis first. ``constant`` is C per interval (or one number): 0 behind a wall, the
    inflow increments at an open end. Returns ``(time - 1, L)`` int64; column k is the net
    mass moved from site k to site k + 1 (column L - 1: across the seam or out of the right
    end). This is the definition the statistic keeps at its bonds.

    >>> bond_transfers(np.array([[2, 0, 1], [1, 1, 1]])).tolist()  # one unit from 0 to 1
    [[1, 0, 0]]
    """
    m = np.asarray(mass).astype(np.int64)
    if m.ndim == 3:
        m = m.sum(axis=2 - axis)
    change = np.diff(m, axis=0)
    c = np.broadcast_to(np.asarray(constant, np.int64), (len(change),))
    return c[:, None] - np.cumsum(change, axis=1)


def _ring_size(length: int) -> tuple[int, bool]:
    """Number of ring cuts and whether they are translates of each other on a ring."""
    lo, hi = RING_RANGE
    divisors = [k for k in range(min(hi, length), lo - 1, -1) if length % k == 0]
    if divisors:
        return divisors[0], True
    if length <= RING_ALL_BONDS:
        return length, True
    return hi, False


def _cuts(length: int, k: int) -> np.ndarray:
    """round((s + 1) L / K) - 1, s = 0..K-1 (exact when K divides L); the last is L - 1."""
    s = np.arange(1, k + 1, dtype=np.int64)
    return (2 * s * length + k) // (2 * k) - 1


@dataclass(frozen=True)
class TransferPlan:
    """The bonds kept along one axis (``positions``, sorted) and what they serve.

    ``ring`` indexes the ``ring_k`` ring cuts in ``positions`` (``ring_exact``: they are
    translates of each other on a ring); ``wall`` the wall pair and ``middle`` the middle
    bond; segments ``seg_a``/``seg_b`` (indices) fall in length classes ``seg_c`` of mean
    length ``class_dist``.
    """

    axis: int
    length: int
    positions: np.ndarray
    ring: np.ndarray
    ring_exact: bool
    wall: np.ndarray
    middle: int
    seg_a: np.ndarray
    seg_b: np.ndarray
    seg_c: np.ndarray
    class_dist: np.ndarray

    @property
    def ring_k(self) -> int:
        return len(self.ring)

    @property
    def ring_cuts(self) -> np.ndarray:
        """The bonds of the ring cuts."""
        return self.positions[self.ring]

    @property
    def pair(self) -> np.ndarray:
        """The bonds of the wall pair."""
        return self.positions[self.wall]

    @property
    def middle_bond(self) -> int:
        return int(self.positions[self.middle])


def plan_axis(axis: int, length: int) -> TransferPlan | None:
    """The kept bonds of an axis (None when it is shorter than :data:`MIN_LENGTH`)."""
    if length < MIN_LENGTH:
        return None
    ring_k, exact = _ring_size(length)
    ring = _cuts(length, ring_k)
    pair = np.array([round(length / 3) - 1, round(2 * length / 3) - 1], np.int64)
    middle = length // 2 - 1
    seg_a: list[int] = []
    seg_b: list[int] = []
    seg_c: list[int] = []
    dists: list[float] = []
    spacing = length / ring_k
    d = 1
    while d < spacing and d <= length // 2:  # short segments from spread-out starts
        lo, hi = length // 16, length - length // 16 - d  # away from the ends
        starts = np.unique(np.linspace(lo, max(lo, hi), _ANCHORS).astype(np.int64))
        pairs = [(int(a), int(a) + d) for a in starts if a + d <= length - 2]
        if pairs:
            for a, b in pairs:
                seg_a.append(a)
                seg_b.append(b)
                seg_c.append(len(dists))
            dists.append(float(d))
        d *= 2
    steps = [2**i for i in range(int(math.log2(max(1, ring_k // 2))) + 1)]
    for k in sorted({*steps, ring_k // 2} - {0}):  # between ring cuts, up to half the axis
        pairs = [(int(ring[s]), int(ring[s + k])) for s in range(ring_k - 1 - k)]
        if pairs:
            for a, b in pairs:
                seg_a.append(a)
                seg_b.append(b)
                seg_c.append(len(dists))
            dists.append(float(np.mean([b - a for a, b in pairs])))
    positions = np.unique(np.concatenate([ring, pair, [middle], seg_a, seg_b]).astype(np.int64))
    index = {int(p): i for i, p in enumerate(positions)}

    def at(bonds) -> np.ndarray:
        return np.array([index[int(b)] for b in bonds], np.int64)

    return TransferPlan(
        axis=axis,
        length=length,
        positions=positions,
        ring=at(ring),
        ring_exact=exact,
        wall=at(pair),
        middle=index[middle],
        seg_a=at(seg_a),
        seg_b=at(seg_b),
        seg_c=np.array(seg_c, np.int64),
        class_dist=np.array(dists, np.float64),
    )


# -- prefix sums at the kept bonds (compiled, with an identical NumPy path) -----------------


def _use_numba() -> bool:
    """The compiled kernels (:mod:`._compiled`), unless numba is missing or
    ``MASSARC_PURE=1``."""
    return use_numba()


# -- prefix sums at cut positions ----------------------------------------------------------


def _prefix_numpy(mass: np.ndarray, rows: np.ndarray, axis: int, positions: np.ndarray):
    sel = mass[rows]
    if sel.ndim == 3:
        sel = sel.sum(axis=2 - axis, dtype=np.int64)
    return np.cumsum(sel, axis=1, dtype=np.int64)[:, positions]


def prefix_at(
    mass: np.ndarray,
    rows: np.ndarray,
    axis: int,
    positions: np.ndarray,
    backend: str | None = None,
) -> np.ndarray:
    """Prefix sums ``(len(rows), len(positions))`` of the rows of ``mass`` (``(time, L)`` or
    ``(time, Ly, Lx)``, integers) projected on ``axis``; ``backend`` is ``"numba"``,
    ``"numpy"`` or None (:func:`massarc.archive._jit.use_numba`)."""
    fast = _use_numba() if backend is None else backend == "numba"
    if not fast or mass.size == 0:
        return _prefix_numpy(mass, rows, axis, positions)
    from ._compiled import prefix_rows, project_rows  # numba is imported on first use

    m = np.ascontiguousarray(mass)
    out = np.empty((len(rows), len(positions)), np.int64)
    if m.ndim == 2:
        prefix_rows(m, rows, positions, out)
        return out
    proj = np.empty((len(rows), m.shape[1 + axis]), np.int64)
    project_rows(m, rows, axis, proj)
    prefix_rows(proj, np.arange(len(rows), dtype=np.int64), positions, out)
    return out


@dataclass(frozen=True)
class AxisTransfers:
    """What the statistic kept for one axis.

    ``x[r, j, p]``: the transfer at bond ``plan.positions[p]`` in the ``j``-th kept interval
    of replica ``r`` (between snapshots ``j * stride`` and ``j * stride + 1``), valid where
    ``valid[r, j]`` (a chunk that could not be read leaves its intervals invalid).
    ``profile[r, s]``: the mass between ring cuts s - 1 and s (segment 0: from site 0 to the
    first cut) summed over the ``profile_n[r]`` first snapshots of the kept intervals.
    ``constant`` says how C was fixed: ``"zero"`` (walls; a ring's unknown constant),
    ``"inflow"`` (the inflow increments of an open axis), ``"unknown"`` (an open axis without
    a usable inflow record: only differences of transfers mean anything).
    """

    plan: TransferPlan
    constant: str
    stride: int
    x: np.ndarray
    valid: np.ndarray
    profile: np.ndarray
    profile_n: np.ndarray

    @property
    def intervals(self) -> int:
        """Snapshot intervals kept."""
        return int(self.valid.sum())


@dataclass(frozen=True)
class TransferStats:
    """One entry per lattice axis (None for an axis shorter than :data:`MIN_LENGTH`); every
    ``stride``-th snapshot interval was kept."""

    axes: tuple[AxisTransfers | None, ...]
    stride: int


def _as_integers(mass: np.ndarray) -> np.ndarray:
    if mass.dtype.kind in "ui":
        return mass
    return np.rint(np.nan_to_num(np.asarray(mass, np.float64))).astype(np.int64)


def _open_constant(run: Any, axis: int) -> tuple[str, np.ndarray | None]:
    """How the transfers of ``axis`` are fixed, and the inflow series when it is open."""
    meta = getattr(run, "meta", None)
    if meta is None or meta.lattice.ndim <= axis or meta.lattice.boundary[axis] != "open":
        return "zero", None
    if meta.lattice.boundary.count("open") != 1:
        return "unknown", None  # the inflow of the lattice is not split between open axes
    try:
        inflow = run.series("inflow")
    except Exception:
        inflow = None
    if inflow is None:
        return "unknown", None
    return "inflow", np.asarray(inflow, np.int64)


class TransferStatistic(Statistic):
    """The ``transfers`` statistic (see the module docstring)."""

    name = "transfers"
    pairs = True

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        shape = tuple(run.sites)
        cap = int(options.get("intervals", 2048))
        if cap < 1:
            raise ValueError(f"transfers: expected intervals >= 1; got {cap}")
        self.plans = [plan_axis(a, n) for a, n in enumerate(shape)]
        self.backend = backend_for(run)
        nrep, nsnap = max(run.n_replicas, 1), max(run.n_snapshots, 1)
        width = sum(len(p.positions) + p.ring_k for p in self.plans if p is not None)
        cap = max(1, min(cap, BUDGET // max(1, nrep * width)))
        self.stride = max(1, math.ceil((nsnap - 1) / cap))
        self.slots = max(0, math.ceil((nsnap - 1) / self.stride))
        self.constants = [_open_constant(run, a) for a in range(len(shape))]
        self._x: list[np.ndarray | None] = []
        self._profile: list[np.ndarray | None] = []
        for p in self.plans:
            if p is None:
                self._x.append(None)
                self._profile.append(None)
                continue
            self._x.append(np.zeros((run.n_replicas, self.slots, len(p.positions)), np.int64))
            self._profile.append(np.zeros((run.n_replicas, p.ring_k), np.int64))
        self._valid = np.zeros((run.n_replicas, self.slots), bool)
        self._profile_n = np.zeros(run.n_replicas, np.int64)

    # -- reduction ---------------------------------------------------------------------

    def _constant(self, axis: int, replica: int, g: np.ndarray) -> np.ndarray:
        """Inflow increments of the intervals (g, g + 1), zero when there are none."""
        kind, inflow = self.constants[axis]
        if kind != "inflow" or inflow is None:
            return np.zeros(len(g), np.int64)
        return inflow[replica, g + 1] - inflow[replica, g]

    def _segments(self, plan: TransferPlan, prefix: np.ndarray) -> np.ndarray:
        """Masses between consecutive ring cuts, summed over the rows of ``prefix``."""
        at = prefix[:, plan.ring].sum(axis=0)
        return np.diff(at, prepend=0)

    def chunk(self, chunk: Chunk) -> Any:
        mass = _as_integers(chunk.mass)
        n = len(mass)
        if n < 2:
            return None
        start = chunk.start
        local = np.arange(n - 1, dtype=np.int64)
        used = local[(start + local) % self.stride == 0]
        rows = np.unique(np.concatenate([used, used + 1])).astype(np.int64)
        where = np.searchsorted(rows, np.arange(n))  # row -> index in `rows` (needed ones)
        parts = []
        for axis, plan in enumerate(self.plans):
            if plan is None:
                parts.append(None)
                continue
            p = prefix_at(mass, rows, axis, plan.positions, self.backend)
            before, after = p[where[used]], p[where[used + 1]]
            x = self._constant(axis, chunk.replica, start + used)[:, None] - (after - before)
            parts.append((x, self._segments(plan, before)))
        return (start + used) // self.stride, len(used), parts

    # -- merging -----------------------------------------------------------------------

    def _store(self, replica: int, slots: np.ndarray, count: int, parts: list) -> None:
        if count == 0:
            return
        for axis, part in enumerate(parts):
            if part is None:
                continue
            x, segments = part
            store, profile = self._x[axis], self._profile[axis]
            assert store is not None and profile is not None
            store[replica, slots] = x
            profile[replica] += segments
        self._valid[replica, slots] = True
        self._profile_n[replica] += count

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        if partial is not None:
            self._store(ref.replica, *partial)

    def pair(self, replica: int, index: int, before: np.ndarray, after: np.ndarray) -> None:
        """The interval (index - 1, index) that straddles two chunks."""
        g = index - 1
        if g % self.stride:
            return
        rows = _as_integers(np.stack([before, after]))
        parts: list = []
        for axis, plan in enumerate(self.plans):
            if plan is None:
                parts.append(None)
                continue
            p = prefix_at(rows, np.arange(2, dtype=np.int64), axis, plan.positions, self.backend)
            x = self._constant(axis, replica, np.array([g]))[:, None] - (p[1:] - p[:1])
            parts.append((x, self._segments(plan, p[:1])))
        self._store(replica, np.array([g // self.stride]), 1, parts)

    def finish(self, faults: list[ChunkFault]) -> TransferStats:
        axes = []
        for axis, plan in enumerate(self.plans):
            x, profile = self._x[axis], self._profile[axis]
            if plan is None or x is None or profile is None:
                axes.append(None)
                continue
            axes.append(
                AxisTransfers(
                    plan=plan,
                    constant=self.constants[axis][0],
                    stride=self.stride,
                    x=x,
                    valid=self._valid.copy(),
                    profile=profile,
                    profile_n=self._profile_n.copy(),
                )
            )
        return TransferStats(tuple(axes), self.stride)
