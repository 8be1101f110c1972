"""Tests on series measured in independent replicas, with autocorrelation-aware variances.

Shared by the ``drift`` check (mean tests of its antisymmetric cells) and the
``independence`` check (pair tests of cross-replica correlation).

:func:`replica_mean_test`
    H0: every replica's series has mean 0 (the replicas independent, each series
    stationary in its fluctuations, possibly autocorrelated). Per replica r the mean
    ybar_r of its n_r values is divided by its standard error under autocorrelation,
    se_r^2 = s_r^2 g / n_r (s_r^2 the sample variance, g the statistical inefficiency from
    Sokal's window on the autocorrelation averaged over replicas, floored at 1): the score
    z_r = ybar_r / se_r. The scores are combined with Stouffer's sum Z = sum z_r / sqrt(R)
    and guarded by their spread exactly as in :mod:`.diagnostics.trend`: the robust score
    is Z / max(1, s_z), s_z the standard deviation of the z_r, which turns into a one-sample
    t statistic of the z_r when the replicas scatter more than g allows. p-values are tails
    of Student's t with ESS - 1 degrees of freedom (ESS = n / g): normal for long series,
    heavier when few effective draws carry a heavy-tailed mean (common practice);
    :attr:`MeanTest.reliable` says when they may be taken at face value for a small
    threshold (the effective sample size rule of the trend test). ``independent`` caps the ESS
    of each replica when the values overlap in a way the autocorrelation of a short
    series cannot show (pairs of snapshots a long lag apart: a series of n starts holds
    at most span / lag independent pairs).

:func:`pair_product_test`
    H0: the replicas are independent copies of one process (not necessarily stationary:
    a relaxation shared by every replica is allowed). For vector series x_r(t) (a few
    observables or a coarse profile) the test looks at how replicas *change* together:
    d_r(t) is the normal score of the increment x_r(t+1) - x_r(t) among the replica's own
    increments (per component; the same function for every replica, so exchangeability
    is kept) less the mean score over replicas at t. Scores tame the rare bursts of a
    heavy-tailed increment, and taking each replica's own ranks gives every replica the
    same spread: a replica that spends a whole run in a more active state (a slow,
    non-ergodic stretch) would otherwise make the others look correlated through the
    common mean. Measured on a ZRP ring near its critical density (500 snapshots 10 hop
    times apart): raw increments gave products with kurtosis 9 and scores of 4.7 and 5.4
    between independent replicas; with own-rank scores the largest of 900 scores (50 runs,
    3 observables, 6 pairs) was 3.6, as for normal scores. Own ranks give every replica
    the same spread only without ties: tied increments (a site that stays empty, a count
    that does not change) share their average rank, and the spread of the scores then
    depends on how many are tied, which differs between replicas. Summed over time, the
    centred products below then carry (2 / R) (mean_s V_s - (V_r + V_q) / 2), V_s the
    replica's total squared score (from the algebra of the centring below): a pair of
    less active replicas looks correlated, its complement anticorrelated. Measured on
    condensed CMAM runs (L = 32, 4000 snapshots 0.5 apart, site profiles): V_s from 21.3
    to 22.8 over 32 sites gave pair scores up to 5.2 between independent replicas (3 false
    alarms in 50 runs). So each replica's scores are standardised (less their mean, over
    their root mean square, per component): V_s is then the same for every replica, tie-
    free scores are unchanged up to one common factor, and the same 50 runs gave pair
    scores of at most 1.7.
    Increments forget a level that stays put in one replica (a condensate that never
    moves) and the slow modes that a run shorter than their relaxation cannot average out
    (measured: profile levels of a symmetric ZRP ring, 500 snapshots 10 hop times apart,
    gave scores of 5 to 7 between independent replicas; their increments do not), while
    replicas that share randomness share their increments. For independent, exchangeable
    replicas Cov(d_r, d_q) = -Cov(d_r, d_r) / (R - 1) at every t, so the series
    P_rq(t) = d_r(t).d_q(t) + S(t) / (R - 1), with S(t) = (1/R) sum_r |d_r(t)|^2, has
    mean exactly 0 (derived from the definition; the same algebra as the between/within
    split of a one-way analysis of variance). A pair of replicas that share randomness
    makes P_rq positive. The mean of P_rq is judged by the one-sided version of the test
    above (one series, its own Sokal g). With two replicas the mean over replicas would
    absorb everything, so d_r is the replica's increment less its time average instead:
    valid for stationary runs only.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .diagnostics.autocorr import SOKAL_C, autocorrelation, sokal_window
from .diagnostics.rank import rank_normalize

__all__ = [
    "MeanTest",
    "PairTest",
    "copy_p_value",
    "pair_product_test",
    "pair_tests",
    "replica_mean_test",
]

#: Scores are capped at this size (a noiseless series would give infinity).
Z_CAP = 1e6
#: Deviations of a replica's standardised scores (unit root mean square per component)
#: from the mean score below this are rounding, not signal (:func:`pair_tests`).
TIED = 1e-9


@dataclass(frozen=True)
class MeanTest:
    """Outcome of :func:`replica_mean_test`.

    ``mean`` is the pooled mean over all values and ``se`` its standard error (the
    autocorrelation-corrected one, inflated by max(1, spread)); ``z`` the robust score,
    ``p`` its two-sided tail (Student's t, ESS - 1 degrees of freedom); ``n`` the number
    of values, ``g`` the statistical inefficiency and ``ess`` = n / g; ``replicas`` the
    number of replicas with values.
    """

    mean: float
    se: float
    z: float
    p: float
    n: int
    g: float
    ess: float
    replicas: int
    spread: float
    reliable: bool

    def p_one_sided(self, sign: float) -> float:
        """Tail of the robust score in the direction ``sign`` (+1 or -1)."""
        from .tails import student_sf  # scipy.special, imported on first use

        return float(student_sf(sign * self.z, max(self.ess - 1.0, 1.0)))


def _g(series: list[np.ndarray], c: float) -> float:
    """Statistical inefficiency from the autocorrelations averaged over the series."""
    live = [s for s in series if len(s) >= 2 and np.ptp(s) > 0]
    if not live:
        return 1.0
    n = min(len(s) for s in live)
    rho = np.mean([autocorrelation(s)[:n] for s in live], axis=0)
    partial = np.cumsum(rho) - 0.5
    return max(2.0 * float(partial[sokal_window(partial, c)]), 1.0)


def replica_mean_test(
    y: np.ndarray, c: float = SOKAL_C, independent: float | None = None
) -> MeanTest:
    """Test that the series ``y`` ``(replica, value)`` (NaN: missing) have mean 0.

    ``independent``: at most this many independent values per replica (module docstring)."""
    a = np.atleast_2d(np.asarray(y, dtype=np.float64))
    series = [row[np.isfinite(row)] for row in a]
    series = [s for s in series if len(s)]
    n = sum(len(s) for s in series)
    if n < 2 or all(len(s) < 2 for s in series):
        return MeanTest(math.nan, math.nan, 0.0, 1.0, n, 1.0, 0.0, len(series), math.nan, False)
    g = _g(series, c)
    if independent is not None and independent > 0:
        g = max(g, max(len(s) for s in series) / independent)
    means = np.array([s.mean() for s in series])
    counts = np.array([len(s) for s in series], dtype=np.float64)
    var = np.array([s.var(ddof=1) if len(s) > 1 else 0.0 for s in series])
    se_r = np.sqrt(var * g / counts)
    with np.errstate(divide="ignore", invalid="ignore"):
        scores = np.where(se_r > 0, means / se_r, np.sign(means) * Z_CAP)
    scores = np.clip(np.nan_to_num(scores), -Z_CAP, Z_CAP)
    reps = len(series)
    stouffer = float(scores.sum() / math.sqrt(reps))
    spread = float(np.std(scores, ddof=1)) if reps > 1 else math.nan
    inflate = max(1.0, spread) if reps > 1 else 1.0
    z = stouffer / inflate
    mean = float((counts * means).sum() / n)
    se = float(math.sqrt(float((counts**2 * se_r**2).sum())) / n * inflate)
    ess = n / g
    per = ess / reps
    reliable = bool(per >= 50 or (reps >= 4 and per >= 10))
    from .tails import student_sf  # scipy.special, imported on first use

    p = float(2 * student_sf(abs(z), max(ess - 1.0, 1.0)))
    return MeanTest(mean, se, float(z), p, n, g, ess, reps, spread, reliable)


@dataclass(frozen=True)
class PairTest:
    """One pair of replicas (``first`` < ``second``): the correlation of their deviations,
    the one-sided score of ``mean P`` > 0 and its p-value, the effective sample size, and
    whether the p-value may be taken at face value."""

    first: int
    second: int
    correlation: float
    z: float
    p: float
    ess: float
    reliable: bool


def pair_product_test(
    x: np.ndarray, *, stationary: bool = False, c: float = SOKAL_C
) -> list[PairTest]:
    """Every pair of replicas of ``x`` ``(replica, time)`` or ``(replica, time, component)``.

    Times where any replica is missing (NaN) are dropped (the increments then span the
    gap). Two replicas are compared only when ``stationary`` (their own average increment
    then stands in for the common one).
    """
    return pair_tests(x, stationary=stationary, c=c)[0]


def copy_p_value(x: np.ndarray, *, stationary: bool = False, c: float = SOKAL_C) -> float:
    """The p-value of :func:`pair_product_test` for a pair whose second replica copies the
    first (d_q = d_r), the median over replicas: how strongly the data could show a copy.
    1 when there is nothing to compare, or when the score is not reliable."""
    return pair_tests(x, stationary=stationary, c=c)[1]


def pair_tests(
    x: np.ndarray, *, stationary: bool = False, c: float = SOKAL_C
) -> tuple[list[PairTest], float]:
    """:func:`pair_product_test` and :func:`copy_p_value` of ``x`` together, from one
    computation of the rank scores (the costly part on a long run)."""
    a = np.asarray(x, dtype=np.float64)
    if a.ndim == 2:
        a = a[:, :, None]
    reps = a.shape[0]
    finite = np.isfinite(a).all(axis=(0, 2))
    if not finite.all():  # a copy only where some times must go
        a = a[:, finite]
    if reps < 2 or a.shape[1] < 4 or (reps == 2 and not stationary):
        return [], 1.0
    d, shared = _deviations(a, reps)
    # a replica whose scores equal the mean score at every time (identical tied patterns,
    # e.g. a profile that changes once, the same way in every replica, and never again)
    # deviates by rounding only: its products are noise of size 1e-17 whose tiny spread
    # would make any mean look significant, so it has nothing to compare
    live = np.abs(d).max(axis=(1, 2)) > TIED if d.shape[1] else np.zeros(reps, bool)
    out = []
    for r in range(reps):
        for q in range(r + 1, reps):
            if not (live[r] and live[q]):
                out.append(PairTest(r, q, math.nan, 0.0, 1.0, 0.0, False))
                continue
            prod = np.einsum("tk,tk->t", d[r], d[q])
            p_series = prod + shared
            test = _product_test(p_series, c)
            p_value = test.p_one_sided(1.0)
            norm_r = float(np.einsum("tk,tk->", d[r], d[r]))
            norm_q = float(np.einsum("tk,tk->", d[q], d[q]))
            denom = math.sqrt(norm_r * norm_q)
            corr = float(prod.sum() / denom) if denom > 0 else math.nan
            out.append(PairTest(r, q, corr, test.z, p_value, test.ess, test.reliable))
    ps = []
    for r in range(reps):  # a copy: d_q = d_r
        if not live[r]:
            ps.append(1.0)
            continue
        test = _product_test(np.einsum("tk,tk->t", d[r], d[r]) + shared, c)
        ok = test.reliable and math.isfinite(test.z)
        ps.append(test.p_one_sided(1.0) if ok else 1.0)
    return out, float(np.median(ps))


def _moves(p: np.ndarray) -> int:
    """Times at which ``p`` leaves its median beyond rounding."""
    if not p.size:
        return 0
    scale = float(np.max(np.abs(p)))
    return int(np.count_nonzero(np.abs(p - np.median(p)) > 1e-9 * scale))


def _product_test(p: np.ndarray, c: float) -> MeanTest:
    """:func:`replica_mean_test` of one product series, counting at most one informative
    value per time it moves. Where most increments tie (a profile that changes once, in
    every replica alike, then never), the deviations from the mean score are constants
    fixed by which replica tied how often: the products sit at one value but at a few
    times, their spread shows no noise at all, and the autocorrelation cannot tell, so
    the mean would look significant however small. Such a series holds at most as many
    informative values as it has moves (for a series that moves at most times, nothing
    changes); a series that never moves holds none."""
    moves = _moves(p)
    if moves == 0:
        nan = math.nan
        return MeanTest(nan, nan, 0.0, 1.0, p.size, nan, 0.0, 1, nan, False)
    return replica_mean_test(p[None, :], c, independent=moves)


def _standardise(s: np.ndarray) -> np.ndarray:
    """``s`` less its mean, over its root mean square (zeros when ``s`` is constant): tied
    increments give normal scores whose spread depends on how many are tied (module
    docstring)."""
    c = s - s.mean()
    rms = math.sqrt(float(np.mean(c * c)))
    return c / rms if rms > 1e-12 else np.zeros_like(c)


def _deviations(a: np.ndarray, reps: int) -> tuple[np.ndarray, np.ndarray]:
    """d_r(t) and S(t) / (R - 1) (module docstring)."""
    inc = np.diff(a, axis=1)
    d = np.empty_like(inc)
    for r in range(inc.shape[0]):  # normal scores of each replica's own ranks, standardised
        for k in range(inc.shape[2]):
            d[r, :, k] = _standardise(rank_normalize(inc[r, :, k]))
    del inc
    if reps >= 3:
        d -= d.mean(axis=0, keepdims=True)  # the shared course in time
        return d, np.einsum("rtk,rtk->t", d, d) / reps / (reps - 1)
    d -= d.mean(axis=1, keepdims=True)
    return d, np.zeros(d.shape[1])
