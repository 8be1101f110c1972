"""A trend test over independent replicas with an autocorrelation-corrected variance.

Null hypothesis: every replica is a stationary series, the replicas are independent and
identically distributed. Alternative: a common drift (a relaxation from a shared kind of
initial condition moves every replica's mean the same way).

Per replica r the least-squares slope b_r of y on the position in the series is divided by
its standard error under autocorrelation, se_r^2 = s_r^2 g / S_xx, where s_r^2 is the
residual variance (n - 2 degrees of freedom), S_xx = sum (k - kbar)^2 and g the statistical
inefficiency of the residuals (Sokal's window on their autocorrelation averaged over
replicas, floored at 1). For a regressor that varies slowly compared with the correlation
time this is the large-n variance of the slope (from memory: the usual long-run variance
argument for regression with correlated errors). The replica scores z_r = b_r / se_r are
combined with Stouffer's sum, Z = sum z_r / sqrt(R).

Robustness. When the series are short compared with their correlation time, g is
underestimated and every |z_r| is inflated; a slowly wandering stationary series then looks
like a drift within a replica. Such errors have random signs over independent replicas,
while a real drift pushes every replica the same way. The robust score divides Z by
max(1, s_z), s_z the sample standard deviation of the z_r (R >= 2): when the replicas
scatter more than a correct variance allows, the between-replica spread takes over and the
score becomes the one-sample t statistic of the z_r (common practice, the "larger of the
two variance estimates" safeguard). The p-value is the two-sided normal tail of the robust
score; it is exact for a correct g and conservative otherwise, down to a Student t with
R - 1 degrees of freedom when g is grossly wrong, so a small threshold on it is reliable
only with enough effective samples and replicas: see :attr:`TrendTest.reliable`.

The regressor is the position in the series (snapshot index): for logarithmically spaced
snapshots that is log-time, the natural axis of coarsening (l ~ t^(1/z)).

>>> import numpy as np
>>> rng = np.random.default_rng(7)
>>> y = rng.standard_normal((4, 400))
>>> bool(abs(trend_test(y).z) < 4)
True
>>> bool(trend_test(y + np.linspace(0.0, 2.0, 400)).z > 8)
True
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .autocorr import SOKAL_C, autocorrelation, sokal_window
from .rank import ess_bulk

__all__ = ["TrendTest", "trend_test"]

#: Scores are capped at this size (a noiseless straight line would give infinity).
Z_CAP = 1e6


@dataclass(frozen=True)
class TrendTest:
    """Outcome of :func:`trend_test` (all scores in standard-normal units).

    Attributes
    ----------
    slopes, scores
        Per replica: the slope b_r (units of y per snapshot) and z_r = b_r / se_r.
    g
        Statistical inefficiency of the residuals used in se_r.
    stouffer
        sum z_r / sqrt(R).
    spread
        Sample standard deviation of the z_r (NaN for one replica).
    z
        The robust score stouffer / max(1, spread).
    p
        Two-sided normal tail probability of ``z``.
    ess
        Bulk ESS (Vehtari et al. 2021) of the replicas once the common fitted line is
        removed: the independent information the noise estimate rests on. Replicas that
        wander apart (a series short against its correlation time) make it small; a drift
        shared by all replicas does not.
    reliable
        True when ``p`` may be taken at face value for a small threshold: ``ess`` of at
        least 50 per replica (common practice: emcee's default ``tol`` asks for 50
        correlation times), or 10 per replica with at least 4 replicas (the spread then
        guards against a wrong g). With less, no variance estimate is trustworthy in the
        far tail.
    """

    slopes: np.ndarray
    scores: np.ndarray
    g: float
    stouffer: float
    spread: float
    z: float
    p: float
    ess: float
    reliable: bool


def trend_test(y: np.ndarray, c: float = SOKAL_C) -> TrendTest:
    """Test replicas ``(replica, draw)`` (or one series) for a common linear drift."""
    a = np.atleast_2d(np.asarray(y, dtype=np.float64))
    if a.ndim != 2 or a.shape[1] < 4:
        raise ValueError(f"expected (replica, draw) with at least 4 draws; got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise ValueError("expected finite values; got NaN or infinity")
    reps, n = a.shape
    k = np.arange(n, dtype=np.float64) - (n - 1) / 2.0
    sxx = float(k @ k)
    centred = a - a.mean(axis=1, keepdims=True)
    slopes = centred @ k / sxx
    resid = centred - np.outer(slopes, k)
    s2 = np.einsum("ij,ij->i", resid, resid) / (n - 2)
    g = 1.0
    live = s2 > 0
    if live.any():
        rho = autocorrelation(resid[live], axis=1).mean(axis=0)
        partial = np.cumsum(rho) - 0.5  # Sokal's tau_int(M)
        g = max(2.0 * float(partial[sokal_window(partial, c)]), 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        scores = slopes / np.sqrt(s2 * g / sxx)
    scores = np.where(s2 > 0, scores, np.sign(slopes) * Z_CAP)
    scores = np.clip(np.nan_to_num(scores), -Z_CAP, Z_CAP)
    stouffer = float(scores.sum() / np.sqrt(reps))
    spread = float(np.std(scores, ddof=1)) if reps > 1 else float("nan")
    z = stouffer / max(1.0, spread) if reps > 1 else stouffer
    from ..tails import normal_sf  # scipy.special, imported on first use

    p = float(2.0 * normal_sf(abs(z)))
    common = a - a.mean() - float(a.mean(axis=0) @ k / sxx) * k  # the common line removed
    ess = ess_bulk(common) if n >= 4 else float(reps)
    per_chain = ess / reps
    reliable = per_chain >= 50 or (reps >= 4 and per_chain >= 10)
    return TrendTest(slopes, scores, g, stouffer, spread, float(z), p, ess, bool(reliable))
