"""Which snapshots a sampled statistic visits: evenly spread, within a work budget.

Statistics whose per-snapshot work is heavy (space-time correlations, coarse profiles,
full-content fingerprints) visit only some snapshots, so that the single pass stays cheap
next to decoding the chunks whatever the length of the run. The budget has two parts:

* a ``fraction`` of the snapshots, which bounds the relative cost on long runs;
* a floor of ``floor_values`` site visits in all, which lets a small run be visited
  entirely (its absolute cost is then a few milliseconds) so that the tests have enough
  samples to be powerful.

The count per replica is also capped by ``cap_total`` samples over all replicas, which
bounds the memory of the statistic. Used by ``profiles`` here and by the statistics the
``drift`` and ``independence`` checks bring (``spacetime``, ``fingerprints``).

>>> sample_count(1000, 4, 200, fraction=0.01, floor_values=2**20, cap_total=4096)
1000
>>> sample_count(16000, 4, 5000, fraction=0.01, floor_values=2**20, cap_total=4096)
160
>>> evenly(10, 4).tolist()
[1, 3, 6, 8]
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["evenly", "hashed_subset", "sample_count"]


def sample_count(
    n_snapshots: int,
    n_replicas: int,
    volume: int,
    *,
    fraction: float,
    floor_values: int,
    cap_total: int,
) -> int:
    """Snapshots to visit per replica (at least 1 when the run has any) of a run with
    ``n_replicas`` replicas of ``volume`` sites."""
    if n_snapshots <= 0:
        return 0
    reps = max(n_replicas, 1)
    by_fraction = math.ceil(fraction * n_snapshots)
    by_floor = floor_values // max(reps * max(volume, 1), 1)
    cap = max(cap_total // reps, 1)
    return int(max(1, min(n_snapshots, cap, max(by_fraction, by_floor))))


def evenly(n_snapshots: int, count: int) -> np.ndarray:
    """``count`` snapshot indices spread evenly over ``range(n_snapshots)`` (midpoints)."""
    if count <= 0 or n_snapshots <= 0:
        return np.zeros(0, np.int64)
    k = np.arange(count, dtype=np.float64)
    return np.unique(np.floor((k + 0.5) * n_snapshots / count).astype(np.int64))


_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def hashed_subset(indices: np.ndarray, fraction: float, salt: int = 0) -> np.ndarray:
    """Which of ``indices`` belong to a pseudo-random subset of density ``fraction``.

    Membership depends only on the index (and ``salt``), never on the replica, so that
    two replicas visit the same snapshots, and for two different indices it behaves like
    independent coin flips (a splitmix64 hash of the index against the threshold).
    """
    if fraction >= 1.0:
        return np.ones(len(indices), bool)
    x = np.asarray(indices, dtype=np.uint64) * _GOLDEN + np.uint64(salt)
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    x = x ^ (x >> np.uint64(31))
    return (x >> np.uint64(11)).astype(np.float64) < fraction * float(2**53)
