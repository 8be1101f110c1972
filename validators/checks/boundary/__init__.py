"""The ``boundary`` check in one home: its statistic, its tests and its verdict.

* :mod:`.increments`: the ``increments`` statistic of the single pass (sign increments of
  consecutive snapshots at the seam, interior bonds and distant pairs), brought by the
  check itself (``BoundaryCheck.provides``);
* :mod:`.seam`: the statistical seam test per axis;
* :mod:`.events`: the exact audit of an archived event log;
* :mod:`.check`: :class:`BoundaryCheck`, which turns them into a result.
"""

from .check import BoundaryCheck

__all__ = ["BoundaryCheck"]
