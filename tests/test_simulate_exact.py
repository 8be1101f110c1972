"""The exact sampler of the canonical ZRP steady state, against the canonical law of
schema/laws.py (itself checked in test_laws.py), direct enumeration and the exact law of
the largest site."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import stats

from massarc.schema import CMAMModel, ZRPModel
from massarc.schema.laws import canonical_site_law
from massarc.simulate import SamplerError, SteadyStateSampler, sample_steady_state


def chisquare_merged(counts: np.ndarray, probs: np.ndarray, min_expected: float = 5.0) -> float:
    """p-value of Pearson's chi-square test (scipy.stats.chisquare) after merging adjacent
    bins until each expects at least ``min_expected`` counts (common practice)."""
    counts = np.asarray(counts, dtype=np.float64)
    expected = np.asarray(probs, dtype=np.float64) * counts.sum()
    obs_groups, exp_groups = [], []
    o = e = 0.0
    for oc, ec in zip(counts, expected, strict=True):
        o, e = o + oc, e + ec
        if e >= min_expected:
            obs_groups.append(o)
            exp_groups.append(e)
            o = e = 0.0
    if e > 0 or o > 0:  # the remainder joins the last group
        if obs_groups:
            obs_groups[-1] += o
            exp_groups[-1] += e
        else:
            obs_groups, exp_groups = [o], [e]
    if len(obs_groups) < 2:
        return 1.0
    exp = np.array(exp_groups)
    return float(stats.chisquare(obs_groups, exp * (sum(obs_groups) / exp.sum())).pvalue)


def test_samples_hold_the_total_mass_and_the_density() -> None:
    model = ZRPModel(family="zrp", b=3.0)
    x = sample_steady_state(model, 37, 53, 500, np.random.default_rng(0))
    assert x.shape == (500, 37) and x.dtype == np.int64
    assert np.all(x >= 0)
    assert np.all(x.sum(axis=1) == 53)
    assert x.mean() == pytest.approx(53 / 37, rel=1e-12)


@pytest.mark.parametrize(
    ("model", "sites", "mass"),
    [
        # fluid phase: b = 3, rho = 0.5 < rho_c = 1/(b - 2) = 1 (Evans and Hanney 2005)
        (ZRPModel(family="zrp", b=3.0), 40, 20),
        # condensed phase: b = 4, rho = 1 > rho_c = 0.5; the excess sits on one site
        (ZRPModel(family="zrp", b=4.0), 50, 50),
        # an explicit rate table, and a constant rate (geometric weights)
        (ZRPModel(family="zrp", rates=[2.0, 1.0, 0.6]), 33, 41),
        (ZRPModel(family="zrp", rate=1.0), 17, 30),
    ],
)
def test_single_site_law_is_canonical(model: ZRPModel, sites: int, mass: int) -> None:
    x = sample_steady_state(model, sites, mass, 20_000, np.random.default_rng(11))
    law = canonical_site_law(model, sites, mass)
    # the samples are independent, so each site's counts are multinomial: Pearson's
    # chi-square (scipy.stats.chisquare) against the canonical law, at a first, a middle
    # and a last site (the halving must not favour any position)
    for site in (0, sites // 2, sites - 1):
        counts = np.bincount(x[:, site], minlength=mass + 1)
        assert chisquare_merged(counts, law) > 1e-3, f"site {site}"


def _largest_site_cdf(model: ZRPModel, sites: int, mass: int) -> np.ndarray:
    """P(max_i m_i <= k), k = 0..mass: the ratio of partition functions with weights cut at
    k to the full one (canonical measure, Evans and Hanney 2005), by direct convolution."""
    u = [0.0] + [1.0 + model.b / k for k in range(1, mass + 1)]
    f = np.array([math.prod(1.0 / u[j] for j in range(1, m + 1)) for m in range(mass + 1)])

    def z(weights: np.ndarray) -> float:
        acc = np.array([1.0])
        for _ in range(sites):
            acc = np.convolve(acc, weights)[: mass + 1]
        return float(acc[mass]) if len(acc) > mass else 0.0

    full = z(f)
    return np.array([z(np.where(np.arange(mass + 1) <= k, f, 0.0)) / full for k in range(mass + 1)])


def test_condensate_law_of_the_largest_site() -> None:
    # b = 4, rho = 1.2 > rho_c = 0.5: the largest site holds about (rho - rho_c) N
    model = ZRPModel(family="zrp", b=4.0)
    sites, mass = 30, 36
    x = sample_steady_state(model, sites, mass, 20_000, np.random.default_rng(3))
    cdf = _largest_site_cdf(model, sites, mass)
    law = np.diff(np.concatenate([[0.0], cdf]))
    counts = np.bincount(x.max(axis=1), minlength=mass + 1)
    assert chisquare_merged(counts, law) > 1e-3
    assert np.median(x.max(axis=1)) > 0.5 * (1.2 - 0.5) * sites


@pytest.mark.parametrize(
    "model",
    [ZRPModel(family="zrp", b=1.5), ZRPModel(family="zrp", rates=[0.5, 1.0, 3.0])],
)
def test_joint_law_equals_direct_enumeration(model: ZRPModel) -> None:
    sites, mass = 3, 5
    table = model.rates or []

    def u(k: int) -> float:
        return 1.0 + model.b / k if model.b is not None else table[min(k, len(table)) - 1]

    configs = [c for c in itertools.product(range(mass + 1), repeat=sites) if sum(c) == mass]
    weights = np.array(
        [math.prod(math.prod(1.0 / u(k) for k in range(1, m + 1)) for m in c) for c in configs]
    )
    x = sample_steady_state(model, sites, mass, 30_000, np.random.default_rng(5))
    index = {c: i for i, c in enumerate(configs)}
    counts = np.bincount([index[tuple(row)] for row in x.tolist()], minlength=len(configs))
    # direct enumeration of all 21 configurations, chi-square (scipy.stats.chisquare)
    assert chisquare_merged(counts, weights / weights.sum()) > 1e-3


def test_large_mass_uses_the_fft_tables_and_stays_exact() -> None:
    # M = 6000 > 4096: scipy picks FFT convolutions for the tables; condensed phase
    model = ZRPModel(family="zrp", b=3.0)
    sites, mass = 64, 6000
    x = sample_steady_state(model, sites, mass, 2000, np.random.default_rng(8))
    assert np.all(x.sum(axis=1) == mass)
    law = canonical_site_law(model, sites, mass)
    assert chisquare_merged(np.bincount(x[:, 0], minlength=mass + 1), law) > 1e-3
    assert chisquare_merged(np.bincount(x[:, 63], minlength=mass + 1), law) > 1e-3


def test_same_generator_same_samples_and_edge_cases() -> None:
    model = ZRPModel(family="zrp", b=3.0)
    s = SteadyStateSampler(model, 9, 14)
    a = s.sample(50, np.random.default_rng(2))
    assert np.array_equal(a, s.sample(50, np.random.default_rng(2)))
    assert np.array_equal(sample_steady_state(model, 1, 7, 3, np.random.default_rng(0)), [[7]] * 3)
    assert np.all(sample_steady_state(model, 5, 0, 2, np.random.default_rng(0)) == 0)
    with pytest.raises(SamplerError, match="expected a ZRP model"):
        SteadyStateSampler(CMAMModel(family="cmam", diffusion=1.0, chipping=1.0), 4, 4)
