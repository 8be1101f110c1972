"""Built-in statistics of the single pass (see :mod:`massarc.archive.scan`), shared by
several checks and the summaries.

* ``snapshots``: per (replica, snapshot) total, extrema, sum of squares, occupied sites,
  position of the largest mass, and the first impossible value (negative, fractional, or
  the missing-data sentinel);
* ``histogram``: occupation histograms per (replica, block of snapshots);
* ``condensates``: per (replica, snapshot) the sites above a mass threshold and their mass;
* ``correlation``: the two-point function G(r, t) at a bounded set of snapshots;
* ``profiles``: coarse mirror-symmetric mass profiles along each axis at evenly spread
  snapshots (the ``drift`` and ``independence`` checks).

:mod:`.sampling` chooses the snapshots a sampled statistic visits within a work budget.

A statistic that only one check uses lives with that check (``Check.provides``).
"""

from __future__ import annotations

from ..scan import Statistic
from .condensates import CondensateStatistic, CondensateStats
from .correlation import CorrelationStatistic, CorrelationStats
from .histogram import HistogramStatistic, HistogramStats
from .profiles import ProfileStatistic, ProfileStats
from .snapshots import SnapshotStatistic, SnapshotStats

__all__ = [
    "CondensateStatistic",
    "CondensateStats",
    "CorrelationStatistic",
    "CorrelationStats",
    "HistogramStatistic",
    "HistogramStats",
    "ProfileStatistic",
    "ProfileStats",
    "SnapshotStatistic",
    "SnapshotStats",
    "builtin_statistics",
]


def builtin_statistics() -> tuple[type[Statistic], ...]:
    """The built-in statistics, in listing order (the registry's only source of them)."""
    return (
        SnapshotStatistic,
        HistogramStatistic,
        CondensateStatistic,
        CorrelationStatistic,
        ProfileStatistic,
    )
