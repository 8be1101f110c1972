"""Built-in statistics of the single pass (see :mod:`massarc.archive.scan`), shared by
several checks (and, soon, summaries).

* ``snapshots``: per (replica, snapshot) total, extrema, sum of squares, occupied sites,
  position of the largest mass, and the first impossible value (negative, fractional, or
  the missing-data sentinel);
* ``histogram``: occupation histograms per (replica, block of snapshots).

A statistic that only one check uses lives with that check (``Check.provides``).
"""

from __future__ import annotations

from ..scan import Statistic
from .histogram import HistogramStatistic, HistogramStats
from .snapshots import SnapshotStatistic, SnapshotStats

__all__ = [
    "HistogramStatistic",
    "HistogramStats",
    "SnapshotStatistic",
    "SnapshotStats",
    "builtin_statistics",
]


def builtin_statistics() -> tuple[type[Statistic], ...]:
    """The built-in statistics, in listing order (the registry's only source of them)."""
    return (SnapshotStatistic, HistogramStatistic)
