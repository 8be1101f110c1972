"""Automated equilibration detection: the start that maximises the effective sample size.

J. D. Chodera, "A simple method for automated equilibration detection in molecular
simulations", J. Chem. Theory Comput. 12, 1799 (2016). For each candidate start t0 the
statistical inefficiency g(t0) of the tail x[t0:] is estimated and the number of
effectively independent draws it holds, N_eff(t0) = (T - t0 + 1) / g(t0), is formed; the
detected start is the t0 that maximises N_eff. Discarding more of a transient lowers g
faster than it lowers the count, until the tail is stationary.

Conventions. t0 is 0-based and T is the series length. The count ``T - t0 + 1`` is the
one of the paper and of pymbar's ``timeseries.detect_equilibration`` (with 0-based t0 it
counts one draw more than the tail holds); we keep it so the two agree. A tail with zero
variance is given N_eff = 1, as pymbar does. Both estimators are floored at g = 1 (an
anticorrelated estimate from a short tail would otherwise make N_eff explode at the very
end of the series). Among equal maxima the earliest t0 wins.

Two estimators of g are offered:

``"sokal"`` (default)
    g = 2 tau_int with Sokal's automatic window (:mod:`.autocorr`).
``"first-zero"``
    g = 1 + 2 sum_{t=1}^{t*-1} C(t) (1 - t/n) with the unbiased autocorrelation
    C(t) = sum_s dx_s dx_{s+t} / ((n - t) var), summed up to the first lag t* > ``mintime``
    where C(t) <= 0, and g >= 1 (Chodera, Swope, Pitera, Seok and Dill, J. Chem. Theory
    Comput. 3, 26, 2007). This is the estimator of the 2016 paper.

For long series the candidates lie on a grid of about ``grid`` starts, then the
neighbourhood of the best grid point (its two neighbours) is searched on a grid four
times finer: about 1.25 ``grid`` evaluations in all, each an FFT of the tail.

>>> import numpy as np
>>> rng = np.random.default_rng(3)
>>> x = rng.standard_normal(600)
>>> x[:100] += np.linspace(8.0, 0.0, 100)  # a decaying transient
>>> detect_equilibration(x).start in range(70, 110)
True
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from .autocorr import SOKAL_C, autocovariance, integrated_autocorr_time

__all__ = ["Equilibration", "detect_equilibration", "statistical_inefficiency_first_zero"]

Estimator = Literal["sokal", "first-zero"]

#: Series up to this length are searched at every candidate start.
FULL_RESOLUTION_MAX = 1000


@dataclass(frozen=True)
class Equilibration:
    """Outcome of :func:`detect_equilibration`.

    Attributes
    ----------
    start
        Detected start t0 (0-based index into the series).
    g
        Statistical inefficiency of ``x[start:]``.
    n_eff
        (T - start + 1) / g, the maximised effective count.
    candidates, n_eff_curve
        The starts that were tried and their N_eff, in increasing order of start.
    """

    start: int
    g: float
    n_eff: float
    candidates: np.ndarray
    n_eff_curve: np.ndarray


def statistical_inefficiency_first_zero(x: np.ndarray, mintime: int = 3) -> float:
    """g by summing the unbiased autocorrelation up to its first zero (Chodera et al. 2007).

    Returns NaN for a series with zero variance.
    """
    a = np.asarray(x, dtype=np.float64)
    n = a.size
    if n < 2:
        return float("nan")
    acov = autocovariance(a) * n  # raw sums sum_s dx_s dx_{s+t}
    var = acov[0] / n
    if var == 0.0:
        return float("nan")
    lags = np.arange(1, n - 1)  # pymbar stops before t = n - 1
    corr = acov[1 : n - 1] / ((n - lags) * var)
    stop = np.flatnonzero((corr <= 0.0) & (lags > mintime))
    upto = stop[0] if stop.size else lags.size
    g = 1.0 + 2.0 * float(np.sum(corr[:upto] * (1.0 - lags[:upto] / n)))
    return max(g, 1.0)


def _g(x: np.ndarray, estimator: Estimator, c: float, mintime: int) -> float:
    if estimator == "sokal":
        g = integrated_autocorr_time(x, c).g
        return max(g, 1.0) if np.isfinite(g) else g
    return statistical_inefficiency_first_zero(x, mintime)


def detect_equilibration(
    x: np.ndarray,
    *,
    estimator: Estimator = "sokal",
    c: float = SOKAL_C,
    mintime: int = 3,
    grid: int = 200,
    full_resolution_max: int = FULL_RESOLUTION_MAX,
    max_start: int | None = None,
) -> Equilibration:
    """The start t0 maximising N_eff(t0) = (T - t0 + 1) / g(x[t0:]) (Chodera 2016).

    Parameters
    ----------
    x
        A 1-D series (for several replicas pass their mean: a transient common to all
        replicas then stands out of the noise by sqrt(replicas)).
    estimator
        ``"sokal"`` or ``"first-zero"``, see the module docstring.
    c, mintime
        Sokal's window constant; the first-zero estimator's minimal lag.
    grid, full_resolution_max
        Series longer than ``full_resolution_max`` are searched on ``grid`` starts first.
    max_start
        Latest start considered (default T - 2, as pymbar). Capping it, at T/2 say, keeps
        the search away from short tails whose g is underestimated, where N_eff can peak
        by chance.
    """
    a = np.asarray(x, dtype=np.float64)
    if a.ndim != 1 or a.size < 2:
        raise ValueError(f"expected a 1-D series of at least 2 values; got shape {a.shape}")
    if estimator not in ("sokal", "first-zero"):
        raise ValueError(f"expected estimator 'sokal' or 'first-zero'; got {estimator!r}")
    if not np.all(np.isfinite(a)):
        raise ValueError("expected finite values; got NaN or infinity")
    big = a.size - 1  # candidate starts 0 .. T-2, as in pymbar
    if max_start is not None:
        if max_start < 0:
            raise ValueError(f"expected max_start >= 0; got {max_start}")
        big = min(big, max_start + 1)
    if a.std() == 0.0:
        starts = np.arange(big)
        return Equilibration(0, 1.0, 1.0, starts, np.ones(big))

    cache: dict[int, float] = {}

    def n_eff(t0: int) -> float:
        if t0 not in cache:
            g = _g(a[t0:], estimator, c, mintime)
            cache[t0] = 1.0 if not np.isfinite(g) else (a.size - t0 + 1) / g
        return cache[t0]

    if big <= full_resolution_max:
        starts = np.arange(big)
    else:
        coarse = np.unique(np.linspace(0, big - 1, grid).round().astype(int))
        best = int(coarse[np.argmax([n_eff(int(t)) for t in coarse])])
        pos = int(np.searchsorted(coarse, best))
        lo = int(coarse[max(pos - 1, 0)])
        hi = int(coarse[min(pos + 1, coarse.size - 1)])
        fine = np.linspace(lo, hi, max(grid // 4, 3)).round().astype(int)
        starts = np.unique(np.concatenate([coarse, fine]))
    curve = np.array([n_eff(int(t)) for t in starts])
    k = int(np.argmax(curve))
    t0 = int(starts[k])
    g0 = (a.size - t0 + 1) / curve[k]
    return Equilibration(t0, float(g0), float(curve[k]), starts, curve)
