"""The exact law of the ZRP largest mass (schema/laws.py) and the snapshot test built on it
(validators/analysis/snapshot_law.py), against independent computations.

Outside truth: direct enumeration of every configuration of a tiny lattice, weighted by the
ZRP product measure f(m) = prod_{k<=m} 1/u(k) (Evans and Hanney, J. Phys. A 38, R195,
2005); exact steady-state samples drawn by ``massarc.simulate.sample_steady_state`` (a
recursive halving sampler that never computes the largest-mass law); scipy.stats for the
goodness of fit and the binomial bounds.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from conftest import make_meta
from scipy import stats

from massarc.schema import CMAMModel, ZRPModel
from massarc.schema.laws import (
    condensate_mass,
    largest_mass_cdf,
    largest_mass_quantile,
    log_partition,
)
from massarc.simulate import sample_steady_state
from massarc.validators.analysis.snapshot_law import (
    ExactLargestMass,
    fisher,
    law_method,
    snapshot_law,
)

LAWS = {
    "b=3": (ZRPModel(family="zrp", b=3.0), lambda k: 1.0 + 3.0 / k),
    "b=4": (ZRPModel(family="zrp", b=4.0), lambda k: 1.0 + 4.0 / k),
    "rate=2": (ZRPModel(family="zrp", rate=2.0), lambda k: 2.0),
    "table": (
        ZRPModel(family="zrp", rates=[1.0, 0.5, 2.0]),
        lambda k: [1.0, 0.5, 2.0][min(k, 3) - 1],
    ),
}


def _f(u, m: int) -> float:
    return math.prod(1.0 / u(k) for k in range(1, m + 1))


def _enumerated(u, sites: int, mass: int) -> tuple[float, np.ndarray]:
    """Z(N, M) and P(max <= K), K = 0..M, by direct enumeration."""
    weight_by_max = np.zeros(mass + 1)
    for config in itertools.product(range(mass + 1), repeat=sites):
        if sum(config) == mass:
            weight_by_max[max(config)] += math.prod(_f(u, m) for m in config)
    z = float(weight_by_max.sum())
    return z, np.cumsum(weight_by_max) / z


@pytest.mark.parametrize("name", sorted(LAWS))
@pytest.mark.parametrize(("sites", "mass"), [(1, 3), (2, 5), (3, 7), (4, 8), (5, 6)])
def test_largest_mass_law_equals_direct_enumeration(name, sites, mass):
    model, u = LAWS[name]
    z, cdf = _enumerated(u, sites, mass)
    assert log_partition(model, sites, mass) == pytest.approx(math.log(z), abs=1e-10)
    got = [largest_mass_cdf(model, sites, mass, k) for k in range(mass + 1)]
    np.testing.assert_allclose(got, cdf, rtol=1e-9, atol=1e-13)


def test_partition_function_with_a_cap_counts_the_capped_configurations():
    model, u = LAWS["b=3"]
    # every site exactly 2: one configuration, weight f(2)^4
    assert log_partition(model, 4, 8, cap=2) == pytest.approx(4 * math.log(_f(u, 2)))
    assert log_partition(model, 4, 9, cap=2) == -math.inf  # 4 sites cannot hold 9 below 3
    assert largest_mass_cdf(model, 4, 9, 2) == 0.0
    assert largest_mass_cdf(model, 4, 9, 9) == 1.0


@pytest.mark.parametrize(("b", "sites", "mass"), [(4.0, 60, 120), (3.0, 40, 24)])
def test_largest_mass_law_matches_exact_steady_state_samples(b, sites, mass):
    # condensed (b = 4, rho = 2 > rho_c = 1/2) and fluid (b = 3, rho = 0.6 < rho_c = 1)
    model = ZRPModel(family="zrp", b=b)
    x = sample_steady_state(model, sites, mass, 20_000, np.random.default_rng(11))
    largest = x.max(axis=1)
    cdf = np.array([largest_mass_cdf(model, sites, mass, k) for k in range(mass + 1)])
    pmf = np.diff(np.concatenate([[0.0], cdf]))
    counts = np.bincount(largest, minlength=mass + 1)
    # merge bins into groups of expected count >= 20, then Pearson's chi-square
    groups, acc, obs = [], 0.0, 0
    for p, c in zip(pmf * len(largest), counts, strict=True):
        acc, obs = acc + p, obs + c
        if acc >= 20:
            groups.append((obs, acc))
            acc, obs = 0.0, 0
    if acc > 0:
        groups[-1] = (groups[-1][0] + obs, groups[-1][1] + acc)
    o, e = np.array(groups, dtype=float).T
    assert len(o) >= 5
    p = stats.chisquare(o, e * o.sum() / e.sum()).pvalue
    assert p > 1e-3, p


def test_quantiles_bracket_the_sampled_largest_mass():
    model = ZRPModel(family="zrp", b=4.0)
    x = sample_steady_state(model, 100, 200, 4000, np.random.default_rng(3))
    median = largest_mass_quantile(model, 100, 200, 0.5)
    assert abs(np.median(x.max(axis=1)) - median) <= 2
    lo = largest_mass_quantile(model, 100, 200, 0.01)
    assert largest_mass_cdf(model, 100, 200, lo) >= 0.01 > largest_mass_cdf(model, 100, 200, lo - 1)


def test_large_systems_do_not_underflow():
    model = ZRPModel(family="zrp", b=4.0)
    tiny = largest_mass_cdf(model, 2000, 4000, 20)  # no condensate at rho = 2: impossible
    assert 0.0 <= tiny < 1e-100
    assert 0.3 < largest_mass_cdf(model, 2000, 4000, 3000) < 0.7  # about (rho - rho_c) N


def test_condensate_mass_is_the_excess_over_the_critical_fluid():
    # rho_c = sqrt(w/D + 1) - 1 (Majumdar, Krishnamurthy and Barma, PRL 81, 3691, 1998)
    cmam = CMAMModel(family="cmam", diffusion=1.0, chipping=3.0)  # rho_c = 1
    assert condensate_mass(cmam, 100, 250) == pytest.approx(150.0)
    assert condensate_mass(cmam, 100, 50) == 0.0
    assert condensate_mass(ZRPModel(family="zrp", b=4.0), 100, 200) == pytest.approx(150.0)
    assert condensate_mass(ZRPModel(family="zrp", b=1.5), 100, 200) == 0.0  # no condensation


# -- the snapshot test -----------------------------------------------------------------


def test_snapshot_test_has_its_size_under_the_null():
    # H0 true: 4 replicas, each an exact steady-state sample; P(p <= a) <= a for a
    # conservative test (binomial bound, scipy.stats)
    meta = make_meta("zrp", sites=(50,), b=4.0)
    assert meta.model.b == 4.0
    law = ExactLargestMass(meta.model, 50)
    rng = np.random.default_rng(5)
    n = 400
    x = sample_steady_state(meta.model, 50, 100, 4 * n, rng).reshape(n, 4, 50)
    p = np.array([
        snapshot_law(meta, np.full(4, 100), s.max(axis=1), 0, 0.0, alpha=1e-6, fraction=0.5,
                     exact=law).p_value
        for s in x
    ])  # fmt: skip
    for a in (0.05, 0.2):
        upper = stats.binom.ppf(0.999, n, a)
        assert (p <= a).sum() <= upper
    assert p.min() > 1e-6


def test_snapshot_test_rejects_an_uncondensed_snapshot():
    meta = make_meta("zrp", sites=(200,), b=4.0)
    rng = np.random.default_rng(2)
    random_start = rng.multinomial(400, np.full(200, 1 / 200), size=4)
    res = snapshot_law(
        meta, random_start.sum(axis=1), random_start.max(axis=1), 0, 0.0, alpha=1e-6,
        fraction=0.5,
    )  # fmt: skip
    assert res is not None and res.far and res.p_value < 1e-20
    assert "median" in res.describe() and "200 sites holding 400 units" in res.describe()


def test_fisher_combination_matches_scipy():
    p = [0.01, 0.2, 0.5, 0.03]
    assert fisher(p) == pytest.approx(stats.combine_pvalues(p, method="fisher").pvalue)


def test_condensate_rule_for_the_cmam():
    meta = make_meta("cmam", sites=(200,), diffusion=1.0, chipping=1.0)  # rho_c = 0.414
    totals = np.full(4, 400)  # condensate about (2 - 0.414) 200 = 317
    small = snapshot_law(meta, totals, np.array([40, 80, 120, 150]), 3, 30.0, alpha=1e-6,
                         fraction=0.5)  # fmt: skip
    assert small is not None and small.far and small.p_value is None
    assert "317" in small.describe()
    one_big = snapshot_law(meta, totals, np.array([40, 80, 120, 300]), 3, 30.0, alpha=1e-6,
                           fraction=0.5)  # fmt: skip
    assert one_big is not None and not one_big.far
    fluid = snapshot_law(meta, np.full(4, 60), np.array([3, 4, 3, 5]), 0, 0.0, alpha=1e-6,
                         fraction=0.5)  # fmt: skip
    assert fluid is None  # rho = 0.3 < rho_c: no condensate to compare with


def test_which_models_have_evidence():
    assert law_method(make_meta("zrp", b=4.0))[0] == "exact"
    walls = make_meta("zrp", boundary="reflecting", b=4.0, drift="asymmetric")
    assert law_method(walls)[0] is None
    assert law_method(make_meta("zrp", boundary="reflecting", b=4.0))[0] == "exact"
    assert law_method(make_meta("cmam"))[0] == "condensate"
    assert law_method(make_meta("custom"))[0] is None
    assert law_method(None)[0] is None
    inconsistent = snapshot_law(make_meta("zrp", b=4.0), np.zeros(2), np.array([5, 6]), 0,
                                0.0, alpha=1e-6, fraction=0.5)  # fmt: skip
    assert inconsistent is None
