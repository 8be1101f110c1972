"""Built-in statistics of the single pass (see :mod:`massarc.archive.scan`).

* ``snapshots``: per (replica, snapshot) total, extrema, sum of squares, occupied sites,
  position of the largest mass, and the first impossible value (negative, fractional, or
  the missing-data sentinel);
* ``histogram``: occupation histograms per (replica, block of snapshots);
* ``increments``: correlations of consecutive-snapshot sign increments at chosen site pairs.
"""

from .histogram import HistogramStatistic, HistogramStats
from .increments import IncrementStatistic, IncrementStats
from .snapshots import SnapshotStatistic, SnapshotStats

__all__ = [
    "HistogramStatistic",
    "HistogramStats",
    "IncrementStatistic",
    "IncrementStats",
    "SnapshotStatistic",
    "SnapshotStats",
]
