"""The ``drift`` check in one home: its statistic, its physics, its test and its verdict.

* :mod:`.spacetime`: the ``spacetime`` statistic of the single pass (antisymmetric
  space-time covariances of the masses at sampled starts), brought by the check itself
  (``DriftCheck.provides``);
* :mod:`.axis_test`: the mirror, direction and size tests of one axis;
* :mod:`.check`: :class:`DriftCheck`, which turns them into a result.

The ``profiles`` statistic it also reads is shared with the ``independence`` check and
lives in :mod:`massarc.archive.stats.profiles`; the physics of how far a fluctuation can
travel under the declared model, and where a driven ZRP piles its mass between walls, is
shared with the ``boundary`` check: :mod:`massarc.validators.analysis.transport`.
"""

from .check import DriftCheck

__all__ = ["DriftCheck"]
