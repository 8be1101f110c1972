"""The ``independence`` check in one home: its statistic, its tests and its verdict.

* :mod:`.fingerprints`: the ``fingerprints`` statistic of the single pass (64-bit hashes
  of every snapshot, plain and roll-invariant, and full-content hashes at a subset of the
  snapshots), brought by the check itself (``IndependenceCheck.provides``);
* :mod:`.repeats`: repeated snapshots between replicas, judged against chance;
* :mod:`.correlations`: cross-replica correlation of snapshot observables and profiles;
* :mod:`.check`: :class:`IndependenceCheck`, which turns them into a result.

The ``profiles`` statistic it also reads is shared with the ``drift`` check and lives in
:mod:`massarc.archive.stats.profiles`; the replica tests both checks use are in
:mod:`massarc.validators.analysis.replica_tests`.
"""

from .check import IndependenceCheck

__all__ = ["IndependenceCheck"]
