"""The tail probabilities and ranks of :mod:`massarc.validators.analysis.tails` against
scipy.stats (the reference library they stand in for at start-up): identical numbers,
edges included."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from massarc.validators.analysis import tails

X = [-math.inf, -40.0, -7.5, -1.0, -1e-300, 0.0, 0.3, 1.959963984540054, 8.0, 40.0, math.inf]
Q = [1e-300, 1e-12, 1e-4, 0.025, 0.5, 0.975, 1 - 1e-9]
DF = [0.5, 1.0, 2.0, 3.7, 30.0, 1e6]


def _same(a: object, b: object) -> None:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    assert a.shape == b.shape
    assert np.array_equal(a, b, equal_nan=True), (a, b)


def test_normal_against_scipy_stats() -> None:
    for x in [*X, math.nan]:
        _same(tails.normal_sf(x), stats.norm.sf(x))
    _same(tails.normal_sf(np.array(X)), stats.norm.sf(np.array(X)))
    for q in Q:
        _same(tails.normal_isf(q), stats.norm.isf(q))
        _same(tails.normal_ppf(q), stats.norm.ppf(q))
    _same(tails.normal_ppf(np.array(Q)), stats.norm.ppf(np.array(Q)))


@pytest.mark.parametrize("df", DF)
def test_student_against_scipy_stats(df: float) -> None:
    for x in [*X, math.nan]:
        _same(tails.student_sf(x, df), stats.t.sf(x, df))
    for q in Q:
        _same(tails.student_isf(q, df), stats.t.isf(q, df))


@pytest.mark.parametrize("df", DF)
def test_chi2_and_f_against_scipy_stats(df: float) -> None:
    for x in [-1.0, 0.0, 1e-8, 0.7, 3.0, 25.0, 400.0, math.inf, math.nan]:
        _same(tails.chi2_sf(x, df), stats.chi2.sf(x, df))
        for dfd in (1.0, 7.5, 200.0):
            _same(tails.f_sf(x, df, dfd), stats.f.sf(x, df, dfd))


def test_poisson_logsf_against_scipy_stats() -> None:
    for mu in (0.0, 1e-9, 0.3, 2.0, 40.0, 1e4):
        for k in (-3, -1, 0, 1, 2.5, 5, 30, 500, 10**5):
            _same(tails.poisson_logsf(k, mu), stats.poisson.logsf(k, mu))


def test_average_ranks_against_scipy_stats() -> None:
    rng = np.random.default_rng(7)
    ties = rng.integers(0, 5, size=(40, 3)).astype(float)
    smooth = rng.normal(size=(33, 4))
    ints = rng.integers(-3, 3, size=50)
    for a in (ties, smooth, ints, np.array([]), np.array([2.0]), np.array([1.0, np.nan, 0.0])):
        _same(tails.average_ranks(a), stats.rankdata(a, method="average"))
    for a in (ties, smooth):
        _same(tails.average_ranks(a, axis=0), stats.rankdata(a, axis=0))
        _same(tails.average_ranks(a, axis=1), stats.rankdata(a, axis=1))
    with_nan = smooth.copy()
    with_nan[5, 2] = np.nan
    _same(tails.average_ranks(with_nan, axis=0), stats.rankdata(with_nan, axis=0))
