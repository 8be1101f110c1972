"""The two-point function G(r, t) at a bounded set of snapshots: the ``correlation`` statistic.

Definition (the same on every boundary): for one snapshot of one replica with mean
density rho = mean(m),

    G(d) = (1 / n(d)) sum_{pairs (i, i + d)} m_i m_{i+d} - rho^2,

the sum running over the n(d) ordered pairs of sites at displacement d that both lie on
the lattice. Along a periodic axis every site has a partner (indices wrap, n = L); between
walls (reflecting or open axes) only the L - |d| pairs inside count. G is then averaged
over the replicas. Along a periodic axis the sums are a circular autocorrelation, computed
by FFT; along a walled axis the masses are zero-padded to twice the length first, so that
the FFT gives exactly the direct sums over the pairs inside (no wrap-around). On a ring
with fixed mass the definition gives sum_r G(r) = 0, G(0) = var(m) and G(r) = G(L - r).

Outputs per kept snapshot: G along each axis (displacements 0 .. L - 1 along that axis,
zero along the others) and, on 2D lattices, the radial average: every displacement
(dy, dx) (minimal image along periodic axes) falls in the bin round(sqrt(dy^2 + dx^2)),
and a bin's G is its summed products over its summed pair counts, less rho^2.

Only the snapshots listed in the option ``at`` are kept (memory: ``len(at)`` profiles of a
lattice's length, whatever the run length); :func:`even_indices` gives the default.

>>> import numpy as np
>>> g = two_point(np.array([[3.0, 0.0, 1.0, 0.0]]), (True,))
>>> g["along"][0].round(6).tolist()   # G(0) = var(m) = 1.5, G(1) = G(3), sum = 0
[[1.5, -1.0, 0.5, -1.0]]
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..reader import Chunk, ChunkRef
from ..scan import ChunkFault, Statistic

__all__ = [
    "DEFAULT_PROBES",
    "CorrelationStatistic",
    "CorrelationStats",
    "even_indices",
    "two_point",
]

#: Default number of snapshots where G is kept.
DEFAULT_PROBES = 64


def even_indices(n: int, k: int) -> np.ndarray:
    """Up to ``k`` snapshot indices spread evenly over ``0 .. n - 1`` (first and last kept).

    Evenly spaced indices follow the run's own sampling: geometric in time for a run
    sampled geometrically, linear for a linear one.

    >>> even_indices(10, 4).tolist()
    [0, 3, 6, 9]
    """
    if n <= 0 or k <= 0:
        return np.zeros(0, np.int64)
    return np.unique(np.linspace(0, n - 1, min(k, n)).round().astype(np.int64))


def _lags(length: int, periodic: bool) -> tuple[np.ndarray, np.ndarray, int]:
    """For the FFT grid of one axis: the |lag| of every index (minimal image when periodic),
    the number of pairs at that lag, and the grid size."""
    if periodic:
        d = np.arange(length)
        return np.minimum(d, length - d), np.full(length, length, np.int64), length
    size = 2 * length
    d = np.arange(size)
    lag = np.where(d < length, d, size - d)  # index size - d holds lag -d
    pairs = np.where(d == length, 0, length - lag)
    return lag, pairs.astype(np.int64), size


@dataclass(frozen=True)
class _Grid:
    """Lags, pair counts and radial bins of a lattice's FFT grid (computed once)."""

    periodic: tuple[bool, ...]
    sizes: tuple[int, ...]
    pairs: np.ndarray  # pair count of every grid displacement
    bins: np.ndarray | None  # radial bin of every grid displacement (2D)
    radial_pairs: np.ndarray | None

    @classmethod
    def of(cls, shape: tuple[int, ...], periodic: tuple[bool, ...]) -> _Grid:
        axes = [_lags(n, p) for n, p in zip(shape, periodic, strict=True)]
        sizes = tuple(a[2] for a in axes)
        pairs = axes[0][1]
        for a in axes[1:]:
            pairs = np.multiply.outer(pairs, a[1])
        bins = radial = None
        if len(shape) == 2:
            dist = np.hypot.outer(axes[0][0].astype(float), axes[1][0].astype(float))
            bins = np.rint(dist).astype(np.int64)
            bins[pairs == 0] = -1
            radial = np.bincount(bins[bins >= 0], weights=pairs[bins >= 0])
        return cls(periodic, sizes, pairs, bins, radial)


def two_point(
    x: np.ndarray, periodic: tuple[bool, ...], grid: _Grid | None = None
) -> dict[str, Any]:
    """G for each row of ``x`` (shape ``(rows, *lattice)``, 1 or 2 lattice axes).

    Returns ``{"along": [G along axis k, shape (rows, L_k)], "radial": (rows, bins) or
    None}`` (see the module docstring for the definition).
    """
    shape = tuple(x.shape[1:])
    grid = grid or _Grid.of(shape, periodic)
    xf = np.asarray(x, dtype=np.float64)
    axes = tuple(range(1, xf.ndim))
    rho2 = xf.reshape(len(xf), -1).mean(axis=1) ** 2
    f = np.fft.rfftn(xf, s=grid.sizes, axes=axes)
    sums = np.fft.irfftn(f.real**2 + f.imag**2, s=grid.sizes, axes=axes)
    along = []
    for k, length in enumerate(shape):
        index = [0] * len(shape)
        index[k] = slice(0, length)
        prod = sums[(slice(None), *index)]
        along.append(prod / grid.pairs[tuple(index)] - rho2[:, None])
    radial = None
    if grid.bins is not None:
        keep = grid.bins >= 0
        b = grid.bins[keep]
        flat = sums[:, keep]
        radial = np.stack([np.bincount(b, weights=row) for row in flat])
        radial = radial / grid.radial_pairs - rho2[:, None]
    return {"along": along, "radial": radial}


@dataclass(frozen=True)
class CorrelationStats:
    """G averaged over replicas at the snapshots ``at``.

    ``along[k]`` is (probe, L_k): G along lattice axis k. ``radial`` is (probe, bins) on 2D
    lattices, else None. ``replicas[p]`` counts the replicas averaged at probe p (fewer
    where a chunk was unreadable; 0 gives NaN).
    """

    at: np.ndarray
    along: list[np.ndarray]
    radial: np.ndarray | None
    replicas: np.ndarray
    periodic: tuple[bool, ...]


class CorrelationStatistic(Statistic):
    """Options: ``at`` (snapshot indices; default :data:`DEFAULT_PROBES` spread evenly).
    The boundaries come from the run's metadata (``lattice.boundary``)."""

    name = "correlation"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        if run.meta is None:
            raise ValueError("correlation: the run has no valid metadata (boundaries unknown)")
        at = options.get("at")
        n = run.n_snapshots
        self.at = even_indices(n, DEFAULT_PROBES) if at is None else np.unique(np.asarray(at))
        if self.at.size and (self.at[0] < 0 or self.at[-1] >= n):
            raise ValueError(f"correlation: expected snapshot indices in 0..{n - 1}; got {at!r}")
        self.at = self.at.astype(np.int64)
        shape = tuple(run.sites)
        self.periodic = tuple(b == "periodic" for b in run.meta.lattice.boundary)
        self.grid = _Grid.of(shape, self.periodic)
        p = len(self.at)
        self._along = [np.zeros((p, n_k)) for n_k in shape]
        self._radial = (
            None if self.grid.radial_pairs is None else np.zeros((p, len(self.grid.radial_pairs)))
        )
        self._replicas = np.zeros(p, np.int64)

    def chunk(self, block: Chunk) -> Any:
        lo, hi = np.searchsorted(self.at, [block.start, block.stop])
        if lo == hi:
            return None
        rows = self.at[lo:hi] - block.start
        return lo, two_point(block.mass[rows], self.periodic, self.grid)

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        if partial is None:
            return
        lo, g = partial
        n = len(g["along"][0])
        for acc, part in zip(self._along, g["along"], strict=True):
            acc[lo : lo + n] += part
        if self._radial is not None:
            self._radial[lo : lo + n] += g["radial"]
        self._replicas[lo : lo + n] += 1

    def finish(self, faults: list[ChunkFault]) -> CorrelationStats:
        with np.errstate(invalid="ignore", divide="ignore"):
            scale = 1.0 / self._replicas[:, None]
            along = [a * scale for a in self._along]
            radial = None if self._radial is None else self._radial * scale
        return CorrelationStats(self.at, along, radial, self._replicas.copy(), self.periodic)
