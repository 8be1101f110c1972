"""The replica trend test: slopes against scipy.stats.linregress, calibration on AR(1)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from scipy.signal import lfilter

from massarc.validators.analysis.diagnostics import trend_test


def ar1(rng: np.random.Generator, shape: tuple[int, ...], phi: float) -> np.ndarray:
    e = rng.standard_normal(shape)
    e[..., 0] /= np.sqrt(1 - phi**2)
    return lfilter([1.0], [1.0, -phi], e, axis=-1)


def test_slopes_and_scores_match_linregress():
    rng = np.random.default_rng(1)
    y = rng.standard_normal((3, 200)) + np.linspace(0.0, 0.5, 200)
    res = trend_test(y)
    for r in range(3):
        ref = stats.linregress(np.arange(200), y[r])  # scipy.stats.linregress
        assert res.slopes[r] == pytest.approx(ref.slope, rel=1e-10)
        # with correlated errors the OLS t statistic is divided by sqrt(g)
        assert res.scores[r] * np.sqrt(res.g) == pytest.approx(ref.slope / ref.stderr, rel=1e-9)
    assert res.stouffer == pytest.approx(res.scores.sum() / np.sqrt(3))


@pytest.mark.parametrize("phi", [0.0, 0.5, 0.9])
def test_null_false_alarm_rate_is_near_nominal(phi):
    # H0: stationary AR(1) replicas. The score is standard normal up to the error of g
    # (common practice: judge calibration by the rejection rate at a few levels)
    rng = np.random.default_rng(2)
    z = np.array([trend_test(ar1(rng, (4, 1000), phi)).z for _ in range(400)])
    assert np.mean(np.abs(z) > 1.96) <= 0.09  # nominal 0.05
    assert np.mean(np.abs(z) > 2.576) <= 0.03  # nominal 0.01
    assert np.mean(np.abs(z) > 5.0) == 0.0
    assert abs(np.mean(z)) < 0.2  # no bias


def test_power_on_a_power_law_drift():
    rng = np.random.default_rng(3)
    n = 1000
    drift = 1.5 * (np.arange(1, n + 1) / n) ** (1 / 3)  # coarsening-like growth
    res = trend_test(ar1(rng, (4, n), 0.5) * np.sqrt(0.75) + drift)
    assert res.z > 5.0 and res.p < 1e-6 and res.reliable


def test_one_wandering_replica_does_not_make_a_drift():
    rng = np.random.default_rng(4)
    y = rng.standard_normal((6, 400))
    y[0] += np.linspace(0.0, 8.0, 400)  # a single replica moves; the others do not
    res = trend_test(y)
    assert res.stouffer > 5.0  # the naive combination would call it a drift
    assert abs(res.z) < 5.0 and res.spread > 1.0


def test_reliability_flag_and_bad_input():
    rng = np.random.default_rng(5)
    assert trend_test(rng.standard_normal((4, 50))).reliable
    assert not trend_test(ar1(rng, (1, 100), 0.95)).reliable  # one short correlated series
    flat = trend_test(np.ones((2, 20)))
    assert flat.z == 0.0 and flat.p == 1.0
    line = trend_test(np.arange(20.0))
    assert line.z > 1e5  # a noiseless line: as significant as it gets
    with pytest.raises(ValueError, match="at least 4 draws"):
        trend_test(np.zeros((2, 3)))
    with pytest.raises(ValueError, match="finite"):
        trend_test(np.array([1.0, np.inf, 2.0, 3.0, 4.0]))
