"""Cross-replica correlation: do replicas change together beyond chance?

The pair product test of :mod:`massarc.validators.analysis.replica_tests` (with the
p-value a copied replica would get: ``pair_tests``) on the largest mass, the sum of
squares and the number of occupied sites of every snapshot (the ``snapshots``
statistic), and on the coarse profiles of the ``profiles`` statistic; Bonferroni over
pairs and observables (the ``independence`` check).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ...analysis.replica_tests import PairTest, pair_tests

__all__ = ["correlation_tests"]


def correlation_tests(
    snap: Any, profiles: Any, stationary: bool
) -> tuple[list[tuple[str, PairTest]], int, float]:
    """Pair tests of the snapshot observables and the coarse profiles, how many tests were
    tried (for Bonferroni), and the smallest p-value a copied replica would get (before
    Bonferroni; 1 when nothing could show it)."""
    series: dict[str, np.ndarray] = {}
    valid = snap.valid
    for name, arr in (
        ("largest mass", snap.maximum),
        ("sum of squares", snap.sum_sq),
        ("occupied sites", snap.occupied),
    ):
        series[name] = np.where(valid, np.asarray(arr, dtype=np.float64), np.nan)
    if profiles is not None and profiles.mass.shape[1] >= 4:
        series["coarse profile"] = profiles.mass
    out = []
    tried = 0
    copy = 1.0
    for name, x in series.items():
        if np.nanmax(x) == np.nanmin(x):
            continue
        tests, copy_p = pair_tests(x, stationary=stationary)
        tried += len(tests)
        out.extend((name, t) for t in tests)
        copy = min(copy, copy_p)
    return out, tried, copy
