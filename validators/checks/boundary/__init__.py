"""The ``boundary`` check in one home: its statistic, its tests and its verdict.

* :mod:`.transfers`: the ``transfers`` statistic of the single pass (bond transfers
  reconstructed from consecutive snapshots, kept at fixed bonds for a bounded sample of
  snapshot intervals), brought by the check itself (``BoundaryCheck.provides``);
* :mod:`.judge`: the statistical tests per axis (the exact ring test, the wall test, the
  spreading distance) and the verdict;
* :mod:`.events`: the exact audit of an archived event log;
* :mod:`.check`: :class:`BoundaryCheck`, which turns them into a result.
"""

from .check import BoundaryCheck

__all__ = ["BoundaryCheck"]
