"""Built-in statistics of the single pass (see :mod:`massarc.archive.scan`), shared by
several checks and the summaries.

* ``snapshots``: per (replica, snapshot) total, extrema, sum of squares, occupied sites,
  position of the largest mass, and the first impossible value (negative, fractional, or
  the missing-data sentinel);
* ``histogram``: occupation histograms per (replica, block of snapshots);
* ``condensates``: per (replica, snapshot) the sites above a mass threshold and their mass;
* ``correlation``: the two-point function G(r, t) at a bounded set of snapshots.

A statistic that only one check uses lives with that check (``Check.provides``).
"""

from __future__ import annotations

from ..scan import Statistic
from .condensates import CondensateStatistic, CondensateStats
from .correlation import CorrelationStatistic, CorrelationStats
from .histogram import HistogramStatistic, HistogramStats
from .snapshots import SnapshotStatistic, SnapshotStats

__all__ = [
    "CondensateStatistic",
    "CondensateStats",
    "CorrelationStatistic",
    "CorrelationStats",
    "HistogramStatistic",
    "HistogramStats",
    "SnapshotStatistic",
    "SnapshotStats",
    "builtin_statistics",
]


def builtin_statistics() -> tuple[type[Statistic], ...]:
    """The built-in statistics, in listing order (the registry's only source of them)."""
    return (SnapshotStatistic, HistogramStatistic, CondensateStatistic, CorrelationStatistic)
