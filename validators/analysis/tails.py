"""Tail probabilities and ranks the checks use, from ``scipy.special`` without ``scipy.stats``.

Importing ``scipy.stats`` takes about three times as long as importing ``scipy.special``
(it loads scipy.optimize, scipy.linalg and every distribution), and an audit of a small
run pays it on every call. The distributions' methods the checks need are thin wrappers of
``scipy.special`` functions; this module calls those functions the way ``scipy.stats``
does, with its conventions outside the support, so the numbers are identical (the tests
compare every function with ``scipy.stats`` on a grid including the edges).

* :func:`normal_sf`, :func:`normal_isf`, :func:`normal_ppf`: the standard normal
  (``ndtr``, ``ndtri``);
* :func:`student_sf`, :func:`student_isf`: Student's t (``stdtr``, ``stdtrit``);
* :func:`chi2_sf`, :func:`f_sf`: chi-squared and F upper tails (``chdtrc``, ``fdtrc``);
* :func:`poisson_logsf`: log P(K > k) of a Poisson law (``pdtrc``);
* :func:`average_ranks`: ranks 1..n with ties given their average rank, as
  ``scipy.stats.rankdata(method="average")``.

>>> round(float(normal_sf(1.959963984540054)), 6)
0.025
>>> average_ranks(np.array([3.0, 1.0, 3.0])).tolist()
[2.5, 1.0, 2.5]
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import special

__all__ = [
    "average_ranks",
    "chi2_sf",
    "f_sf",
    "normal_isf",
    "normal_ppf",
    "normal_sf",
    "poisson_logsf",
    "student_isf",
    "student_sf",
]


def normal_sf(x: Any) -> Any:
    """P(Z > x) for a standard normal Z (``scipy.stats.norm.sf``)."""
    return special.ndtr(-np.asarray(x, dtype=np.float64))


def normal_isf(q: Any) -> Any:
    """x with P(Z > x) = q (``scipy.stats.norm.isf``)."""
    return -special.ndtri(np.asarray(q, dtype=np.float64))


def normal_ppf(q: Any) -> Any:
    """x with P(Z <= x) = q (``scipy.stats.norm.ppf``)."""
    return special.ndtri(np.asarray(q, dtype=np.float64))


def student_sf(x: Any, df: float) -> Any:
    """P(T > x) for Student's t with ``df`` > 0 degrees of freedom (``scipy.stats.t.sf``)."""
    if not df > 0:
        return np.float64(np.nan)
    return special.stdtr(df, -np.asarray(x, dtype=np.float64))


def student_isf(q: Any, df: float) -> Any:
    """x with P(T > x) = q (``scipy.stats.t.isf``)."""
    if not df > 0:
        return np.float64(np.nan)
    return -special.stdtrit(df, np.asarray(q, dtype=np.float64))


def chi2_sf(x: float, df: float) -> float:
    """P(X > x) for chi-squared with ``df`` > 0 degrees of freedom (``scipy.stats.chi2.sf``)."""
    if not df > 0 or x != x:
        return float("nan")
    if x <= 0:
        return 1.0
    return float(special.chdtrc(df, x))


def f_sf(x: float, dfn: float, dfd: float) -> float:
    """P(F > x) for the F law with (``dfn``, ``dfd``) > 0 degrees of freedom
    (``scipy.stats.f.sf``)."""
    if not (dfn > 0 and dfd > 0) or x != x:
        return float("nan")
    if x <= 0:
        return 1.0
    return float(special.fdtrc(dfn, dfd, x))


def poisson_logsf(k: float, mu: float) -> float:
    """log P(K > k) for a Poisson K of mean ``mu`` >= 0 (``scipy.stats.poisson.logsf``)."""
    if not mu >= 0 or k != k:
        return float("nan")
    if k < 0:
        return 0.0
    with np.errstate(divide="ignore"):
        return float(np.log(special.pdtrc(np.floor(k), mu)))


def average_ranks(a: np.ndarray, axis: int | None = None) -> np.ndarray:
    """Ranks 1..n of ``a`` (flattened when ``axis`` is None, else along ``axis``), ties at
    their average rank; a slice holding NaN ranks as all NaN
    (``scipy.stats.rankdata(a, method="average", axis=axis)``)."""
    x = np.asarray(a)
    if axis is None:
        return _ranks_1d(x.reshape(-1))
    moved = np.moveaxis(x, axis, -1)
    flat = moved.reshape(-1, moved.shape[-1]) if moved.size else moved.reshape(0, 0)
    out = np.empty(flat.shape, np.float64)
    for i in range(flat.shape[0]):
        out[i] = _ranks_1d(flat[i])
    return np.moveaxis(out.reshape(moved.shape), -1, axis)


def _ranks_1d(x: np.ndarray) -> np.ndarray:
    n = len(x)
    if n and x.dtype.kind == "f" and np.isnan(x).any():
        return np.full(n, np.nan)
    order = np.argsort(x, kind="mergesort")
    xs = x[order]
    starts = np.flatnonzero(np.r_[True, xs[1:] != xs[:-1]]) if n else np.zeros(0, np.int64)
    counts = np.diff(np.r_[starts, n])
    ranks = np.empty(n, np.float64)
    ranks[order] = np.repeat(0.5 * (2 * starts + counts + 1), counts)
    return ranks
