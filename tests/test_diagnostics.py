"""Time-series diagnostics against reference libraries and exact results.

References used (test-only): emcee (``emcee.autocorr.integrated_time``), arviz
(``arviz.rhat``, ``arviz.ess``), pymbar (``pymbar.timeseries``), numpy (``np.correlate``)
and the AR(1) statistical inefficiency g = (1 + phi) / (1 - phi) (from memory: the
textbook result, sum_t phi^|t| over all lags).
"""

from __future__ import annotations

import contextlib
import importlib
import io
import warnings

import arviz
import emcee
import numpy as np
import pytest
from scipy.signal import lfilter

from massarc.validators.analysis.diagnostics import (
    autocorrelation,
    autocovariance,
    detect_equilibration,
    ess_bulk,
    ess_tail,
    integrated_autocorr_time,
    rhat_rank,
    statistical_inefficiency,
    statistical_inefficiency_first_zero,
)


@pytest.fixture(scope="module")
def timeseries():
    """pymbar.timeseries, imported with its warning banners silenced."""
    sink = io.StringIO()
    with (
        contextlib.redirect_stdout(sink),
        contextlib.redirect_stderr(sink),
        warnings.catch_warnings(),
    ):
        warnings.simplefilter("ignore")
        # imported here only to silence its banners; the `test` extra installs pymbar
        return importlib.import_module("pymbar.timeseries")


def ar1(phi: float, shape: tuple[int, ...], seed: int) -> np.ndarray:
    """Stationary AR(1) with unit innovations, started from its stationary law."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal(shape)
    e[..., 0] /= np.sqrt(1.0 - phi**2)
    return lfilter([1.0], [1.0, -phi], e, axis=-1)


# -- autocorrelation and Sokal's window -------------------------------------------------


def test_autocorrelation_matches_direct_sum():
    x = ar1(0.7, (300,), seed=1)
    d = x - x.mean()
    direct = np.correlate(d, d, mode="full")[d.size - 1 :]  # numpy reference
    np.testing.assert_allclose(autocorrelation(x), direct / direct[0], rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("n", [1, 2, 7, 300, 4097, 67109])
def test_autocorrelation_of_any_length_matches_direct_sum(n):
    # zero padding to a 5-smooth length >= 2n must still give the linear (not circular)
    # autocorrelation: numpy's np.correlate as the reference
    x = ar1(0.5, (n,), seed=n) + np.arange(n) % 3
    d = x - x.mean()
    direct = np.correlate(d, d, mode="full")[d.size - 1 :] / n
    np.testing.assert_allclose(autocovariance(x), direct, rtol=1e-9, atol=1e-9)


def test_fft_length_is_the_next_fast_length():
    # scipy.fft.next_fast_len(real=True): the least 5-smooth length >= the target
    from scipy.fft import next_fast_len

    from massarc.validators.analysis.diagnostics.autocorr import _fft_length

    for n in [*range(1, 3000), 33554, 67109, 268435]:
        assert _fft_length(n) == next_fast_len(2 * n, real=True)


@pytest.mark.parametrize("phi", [0.0, 0.6, 0.95])
def test_g_matches_emcee_integrated_time(phi):
    x = ar1(phi, (5000,), seed=2)
    # emcee.autocorr.integrated_time returns g; its window rule M >= c g(M) is ours,
    # M >= c tau_int(M), with c halved
    ref = emcee.autocorr.integrated_time(x, c=2.5, quiet=True)[0]
    assert statistical_inefficiency(x, c=5.0) == pytest.approx(ref, rel=1e-10)
    ref10 = emcee.autocorr.integrated_time(x, c=5.0, quiet=True)[0]
    assert integrated_autocorr_time(x, c=10.0).g == pytest.approx(ref10, rel=1e-10)


def test_g_of_chains_matches_emcee_walkers():
    x = ar1(0.8, (6, 2000), seed=3)
    # emcee averages the autocorrelation over walkers; input (n_step, n_walker)
    ref = emcee.autocorr.integrated_time(x.T, c=2.5, quiet=True)[0]
    res = integrated_autocorr_time(x)
    assert res.g == pytest.approx(ref, rel=1e-10)
    assert res.tau_int == pytest.approx(ref / 2, rel=1e-10)
    assert res.ess == pytest.approx(x.size / ref, rel=1e-10)


@pytest.mark.parametrize("phi", [0.5, 0.8])
def test_g_of_ar1_equals_exact_value(phi):
    # AR(1): rho(t) = phi^t, so g = 1 + 2 sum phi^t = (1 + phi) / (1 - phi) (from memory)
    exact = (1 + phi) / (1 - phi)
    x = ar1(phi, (200_000,), seed=4)
    res = integrated_autocorr_time(x)
    # relative standard error sqrt(2 (2M + 1) / n) (Madras and Sokal 1988): ~3 % here
    assert res.g == pytest.approx(exact, rel=0.12)
    assert res.converged


def test_constant_series_has_no_autocorrelation_time():
    res = integrated_autocorr_time(np.full(100, 3.0))
    assert np.isnan(res.g) and not res.converged


# -- rank-normalised R-hat and ESS ------------------------------------------------------


def _chains() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(5)
    mixed = ar1(0.9, (4, 501), seed=6)  # odd length: the middle draw is dropped
    shifted = ar1(0.5, (4, 400), seed=7) + np.array([[0.0], [0.0], [0.0], [1.5]])
    ties = rng.poisson(3.0, size=(3, 300)).astype(float)  # many tied ranks
    skewed = np.exp(ar1(0.7, (2, 800), seed=8))
    return {"mixed": mixed, "shifted": shifted, "ties": ties, "skewed": skewed}


@pytest.mark.parametrize("case", ["mixed", "shifted", "ties", "skewed"])
def test_rhat_matches_arviz(case):
    x = _chains()[case]
    # arviz.rhat(method="rank"): Vehtari et al. 2021, input (chain, draw)
    assert rhat_rank(x) == pytest.approx(arviz.rhat(x, method="rank"), rel=1e-10)


@pytest.mark.parametrize("case", ["mixed", "shifted", "ties", "skewed"])
def test_bulk_and_tail_ess_match_arviz(case):
    x = _chains()[case]
    # arviz.ess(method="bulk") and arviz.ess(method="tail", prob=(0.05, 0.95))
    assert ess_bulk(x) == pytest.approx(arviz.ess(x, method="bulk"), rel=1e-8)
    ref_tail = arviz.ess(x, method="tail", prob=(0.05, 0.95))
    assert ess_tail(x) == pytest.approx(ref_tail, rel=1e-8)


def test_rhat_flags_a_shifted_chain_and_passes_mixed_chains():
    x = _chains()
    assert rhat_rank(x["shifted"]) > 1.1
    assert rhat_rank(ar1(0.0, (4, 2000), seed=9)) < 1.01


def test_rank_diagnostics_reject_bad_input():
    with pytest.raises(ValueError, match="at least 4 draws"):
        rhat_rank(np.zeros((2, 3)))
    with pytest.raises(ValueError, match="finite"):
        ess_bulk(np.array([[1.0, 2.0, np.nan, 4.0, 5.0]]))


# -- equilibration detection ------------------------------------------------------------


def _with_transient(seed: int, n: int = 500, length: int = 120) -> np.ndarray:
    x = ar1(0.8, (n,), seed=seed)
    x[:length] += np.linspace(6.0, 0.0, length)
    return x


@pytest.mark.parametrize("seed", [10, 11, 12])
def test_first_zero_detection_matches_pymbar(timeseries, seed):
    x = _with_transient(seed)
    # pymbar.timeseries.detect_equilibration with the exact (fast=False) g estimator
    t_ref, g_ref, neff_ref = timeseries.detect_equilibration(x, fast=False)
    res = detect_equilibration(x, estimator="first-zero")
    assert res.start == int(t_ref)
    assert res.g == pytest.approx(float(g_ref), rel=1e-5)  # pymbar stores float32
    assert res.n_eff == pytest.approx(float(neff_ref), rel=1e-5)


def test_first_zero_g_matches_pymbar(timeseries):
    x = ar1(0.9, (3000,), seed=13)
    ref = timeseries.statistical_inefficiency(x, fast=False)
    assert statistical_inefficiency_first_zero(x) == pytest.approx(ref, rel=1e-9)


@pytest.mark.parametrize("seed", [14, 15, 16])
def test_sokal_detection_agrees_with_pymbar(timeseries, seed):
    x = _with_transient(seed, n=1500, length=200)
    t_ref, g_ref, _ = timeseries.detect_equilibration(x, fast=False)
    res = detect_equilibration(x)
    # both cut most of the transient (it ends at 200), neither discards most of the rest,
    # and they land close to each other (N_eff curves are flat near their maximum)
    assert 100 <= res.start <= 500 and 100 <= t_ref <= 500
    assert abs(res.start - int(t_ref)) <= 100
    # two estimators of the same g (AR(1), phi = 0.8: exact 9) agree within their noise
    assert res.g == pytest.approx(float(g_ref), rel=0.35)


def test_detection_cuts_a_transient_and_respects_max_start():
    x = _with_transient(17, n=800, length=150)
    assert 60 <= detect_equilibration(x, max_start=400).start <= 400
    assert detect_equilibration(x, max_start=40).start <= 40
    with pytest.raises(ValueError, match="max_start"):
        detect_equilibration(x, max_start=-1)


def test_detection_of_a_constant_series_and_bad_input():
    res = detect_equilibration(np.ones(50))
    assert (res.start, res.g, res.n_eff) == (0, 1.0, 1.0)  # pymbar's convention
    with pytest.raises(ValueError, match="estimator"):
        detect_equilibration(np.arange(10.0), estimator="other")  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="1-D"):
        detect_equilibration(np.zeros((2, 5)))


def test_grid_search_finds_the_full_resolution_start():
    x = _with_transient(18, n=3000, length=400)
    full = detect_equilibration(x, full_resolution_max=10_000)
    coarse = detect_equilibration(x, grid=100, full_resolution_max=500)
    assert abs(coarse.start - full.start) <= 3000 // 100
    assert coarse.n_eff >= 0.95 * full.n_eff
