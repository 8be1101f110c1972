"""Statistics over replicas: mean and variance at every snapshot, bootstrap intervals at
the probes.

Method. Replicas are independent realisations, so the replica is the unit of resampling:
at each probe the replicas are drawn with replacement ``resamples`` times
(:func:`scipy.stats.bootstrap`, percentile intervals: the bias-corrected BCa intervals
need a jackknife that a handful of replicas cannot feed) and the mean and the variance
(ddof = 1) of the largest mass are recomputed. With fewer than two replicas the variance
and the intervals are NaN. With few replicas (4 is common) the interval of the variance
is wide and its coverage below nominal: it says how little the replicas pin it down.

>>> import numpy as np
>>> x = np.array([[1.0, 2.0], [3.0, 2.0], [5.0, 2.0]])      # 3 replicas, 2 snapshots
>>> mean, var = over_replicas(x)
>>> mean.tolist(), var.tolist()
([3.0, 2.0], [4.0, 0.0])
"""

from __future__ import annotations

import warnings

import numpy as np

__all__ = ["bootstrap_intervals", "over_replicas"]


def over_replicas(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean and variance (ddof = 1; NaN with one replica) over axis 0 of (replica, time)."""
    x = np.asarray(values, dtype=np.float64)
    mean = x.mean(axis=0) if len(x) else np.full(x.shape[1:], np.nan)
    if len(x) < 2:
        return mean, np.full(x.shape[1:], np.nan)
    return mean, x.var(axis=0, ddof=1)


def bootstrap_intervals(
    values: np.ndarray, *, resamples: int, confidence: float, seed: int
) -> tuple[np.ndarray, np.ndarray]:
    """Percentile intervals over replicas of the mean and the variance of each column of
    ``values`` (replica, probe); each result is (probe, 2) = (low, high)."""
    x = np.asarray(values, dtype=np.float64)
    n_rep, n_probe = x.shape
    nan = np.full((n_probe, 2), np.nan)
    if n_rep < 2 or n_probe == 0:
        return nan, nan.copy()
    from scipy.stats import bootstrap

    def mean_and_var(picked: np.ndarray, axis: int = -1) -> np.ndarray:
        # picked: resampled replica indices (..., replicas); values (..., replicas, probes)
        sample = x[np.moveaxis(picked, axis, -1).astype(np.int64)]
        out = np.stack([sample.mean(axis=-2), sample.var(axis=-2, ddof=1)])  # (2, ..., probes)
        return np.moveaxis(out, -1, 1)  # (2, probes, ...): scipy wants resamples last

    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")  # constant columns give degenerate intervals
        res = bootstrap(
            (np.arange(n_rep),), mean_and_var, vectorized=True, n_resamples=resamples,
            confidence_level=confidence, method="percentile", rng=np.random.default_rng(seed),
        )  # fmt: skip
    low, high = np.asarray(res.confidence_interval.low), np.asarray(res.confidence_interval.high)
    return np.stack([low[0], high[0]], axis=-1), np.stack([low[1], high[1]], axis=-1)
