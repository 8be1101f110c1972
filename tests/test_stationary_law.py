"""The ``stationary-law`` check and its goodness-of-fit test (stationary_law/law_fit.py).

Outside truth:

* the Pearson statistic is scipy.stats.chisquare's; for independent multinomial batches
  the design effect is about 1 and the p-values are uniform (scipy.stats.kstest); when
  every draw is counted twice the design effect is 2 (Kish's design effect of a
  duplicated sample, from memory);
* the critical single-site law of the ZRP with u(k) = 1 + b/k is
  p(m) = (b - 1) B(m + 1, b) = scipy.stats.yulesimon(b - 1, loc=-1) (Evans and Hanney,
  J. Phys. A 38, R195, 2005);
* for a tiny lattice the canonical steady state is enumerated directly (all
  configurations of M particles on N sites, weights prod_i f(m_i), f(m) = prod 1/u(k));
* the exact steady-state sampler and the dynamics of massarc.simulate.
"""

from __future__ import annotations

import itertools
import math
import uuid

import numpy as np
import pytest
from scipy import stats

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import HistogramStatistic, SnapshotStatistic
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.stationary_law import StationaryLawCheck
from massarc.validators.checks.stationary_law.law_fit import fit_law


def meta(sites=(32,), boundary="periodic", regime="stationary", family="zrp", **model) -> RunMeta:
    if family == "zrp":
        model = {"b": 4.0, **model}
    elif family == "cmam":
        model = {"diffusion": 1.0, "chipping": 1.0, **model}
    return parse_metadata(
        {
            "model": {"family": family, **model},
            "lattice": {"sites": list(sites), "boundary": boundary},
            "run": {"regime": regime},
        }
    )


def memory() -> str:
    return f"memory://law-{uuid.uuid4().hex}"


def written(m: RunMeta, data: np.ndarray, times: np.ndarray | None = None) -> Run:
    loc = memory()
    with create_run(loc, m) as w:
        w.append(np.arange(data.shape[1], dtype=float) if times is None else times, data)
    return open_run(loc)


def redeclared(run: Run, **model) -> Run:
    d = run.meta.model_dump(mode="json", exclude_none=True)
    d["model"].update(model)
    return written(parse_metadata(d), np.stack([run.read(r) for r in range(run.n_replicas)]))


def check(run: Run, **options):
    stats = {"histogram": HistogramStatistic(run), "snapshots": SnapshotStatistic(run)}
    ctx = CheckContext(
        run, run.meta, scan(run, stats).results, StationaryLawCheck.option_values(options)
    )
    return StationaryLawCheck().run(ctx)


# -- the goodness-of-fit test ---------------------------------------------------------------


def test_pearson_statistic_is_scipys_and_independent_batches_have_no_design_effect():
    rng = np.random.default_rng(0)
    law = np.array([0.4, 0.25, 0.15, 0.1, 0.06, 0.04])
    counts = rng.multinomial(2000, law, size=30)
    fit = fit_law(counts, np.tile(law, (30, 1)))
    observed = fit.observed * fit.n
    expected = fit.expected * fit.n
    assert fit.chi2 == pytest.approx(stats.chisquare(observed, expected).statistic, rel=1e-10)
    assert fit.design_effect == pytest.approx(1.0, abs=0.3)


def test_p_values_are_uniform_for_multinomial_batches():
    rng = np.random.default_rng(1)
    law = stats.yulesimon(3.0, loc=-1).pmf(np.arange(12))
    law = np.append(law, 1.0 - law.sum())
    ps = [
        fit_law(rng.multinomial(500, law, size=20), np.tile(law, (20, 1))).p_value
        for _ in range(300)
    ]
    assert stats.kstest(ps, "uniform").pvalue > 1e-3


def test_counting_every_draw_twice_doubles_the_design_effect():
    rng = np.random.default_rng(2)
    law = np.array([0.5, 0.3, 0.15, 0.05])
    counts = rng.multinomial(1000, law, size=40)
    single = fit_law(counts, np.tile(law, (40, 1)))
    double = fit_law(2 * counts, np.tile(law, (40, 1)))
    assert double.design_effect == pytest.approx(2.0 * single.design_effect, rel=1e-9)
    assert double.p_value == pytest.approx(single.p_value, rel=1e-9)


@pytest.mark.parametrize("b", [3.0, 4.0])
def test_yule_simon_draws_fit_their_law_and_not_a_neighbouring_one(b):
    # iid draws of the critical single-site law (Evans and Hanney 2005, scipy.stats.yulesimon)
    rng = np.random.default_rng(3)
    top = 40
    draws = stats.yulesimon(b - 1.0, loc=-1).rvs(size=(24, 4000), random_state=rng)
    counts = np.stack([np.bincount(np.minimum(d, top), minlength=top + 1) for d in draws])

    def law(beta: float) -> np.ndarray:
        p = stats.yulesimon(beta - 1.0, loc=-1).pmf(np.arange(top))
        return np.append(p, stats.yulesimon(beta - 1.0, loc=-1).sf(top - 1))

    assert fit_law(counts, np.tile(law(b), (24, 1))).p_value > 1e-3
    assert fit_law(counts, np.tile(law(b + 0.5), (24, 1))).p_value < 1e-6


# -- the check ------------------------------------------------------------------------------


def _enumerated_law(sites: int, mass: int, b: float) -> tuple[np.ndarray, np.ndarray]:
    """All configurations of ``mass`` on ``sites`` and their canonical probabilities."""
    k = np.arange(1, mass + 1)
    f = np.concatenate([[1.0], np.cumprod(1.0 / (1.0 + b / k))])
    configs = np.array(
        [c for c in itertools.product(range(mass + 1), repeat=sites) if sum(c) == mass]
    )
    weight = np.prod(f[configs], axis=1)
    return configs, weight / weight.sum()


def test_independent_draws_of_the_enumerated_steady_state_pass_and_a_wrong_law_fails():
    configs, prob = _enumerated_law(sites=4, mass=6, b=2.0)
    rng = np.random.default_rng(4)
    data = configs[rng.choice(len(configs), size=(8, 400), p=prob)]
    run = written(meta(sites=(4,), b=2.0), data.astype(np.uint8))
    good = check(run)
    assert good.status == "pass", good.message
    bad = check(redeclared(run, b=0.5))
    assert bad.status == "fail", bad.message
    dev = bad.values["largest_deviation"]
    assert set(dev) == {"bin", "observed", "expected"} and dev["observed"] != dev["expected"]


@pytest.mark.parametrize("mass", [8, 64])  # fluid (rho = 1/4) and condensed (rho = 2)
def test_dynamics_from_the_exact_steady_state_pass(mass):
    m = meta()
    run = simulate(
        m, np.arange(200) * 2.0, replicas=16, seed=7, mass=mass, initial="steady-state",
        location=memory(),
    )  # fmt: skip
    result = check(run)
    assert result.status == "pass", result.message
    for key in ("p_value", "chi2", "dof", "design_effect", "effective_n", "window_start", "start"):
        assert result.values[key] is not None
    assert result.values["total_mass"] == mass


@pytest.mark.parametrize(("sites", "mass", "snapshots"), [(64, 26, 1000), (32, 64, 200)])
def test_the_same_data_declared_with_a_wrong_b_fail(sites, mass, snapshots):
    # rho_c = 1/2 for b = 4 and 2/3 for b = 3.5: density 0.41 is fluid for both,
    # density 2 condensed for both (Evans and Hanney 2005)
    m = meta(sites=(sites,))
    run = simulate(
        m, np.arange(snapshots, dtype=float), replicas=16, seed=8, mass=mass, exact=True,
        location=memory(),
    )  # fmt: skip
    assert check(run).status == "pass"
    wrong = check(redeclared(run, b=3.5))
    assert wrong.status == "fail", wrong.message
    assert wrong.values["p_value"] < 1e-3


def test_replicas_with_different_total_masses_use_their_own_laws():
    m = meta(sites=(16,))
    parts = [
        simulate(m, np.arange(300.0), replicas=6, seed=9 + k, mass=mass, exact=True)
        for k, mass in enumerate((8, 20))
    ]
    run = written(m, np.concatenate(parts))
    result = check(run)
    assert result.status == "pass", result.message
    assert result.values["total_mass"] == [8, 20]
    assert check(redeclared(run, b=2.0)).status == "fail"


@pytest.mark.parametrize(
    ("m", "reason"),
    [
        (meta(family="cmam"), "no exact stationary law is known for family cmam"),
        (meta(boundary="reflecting", drift="asymmetric"), "asymmetric moves between walls"),
        (meta(boundary="open"), "open boundaries"),
        (meta(regime="transient"), "transient regime"),
    ],
)
def test_runs_without_an_exact_law_are_skipped_with_the_reason(m, reason):
    rng = np.random.default_rng(5)
    data = rng.multinomial(32, np.full(32, 1 / 32), size=(2, 50)).astype(np.uint8)
    result = check(written(m, data))
    assert result.status == "skip" and reason in result.message


def test_no_stationary_window_and_lost_mass_are_skipped():
    rng = np.random.default_rng(6)
    replicas, snapshots, sites, mass = 4, 200, 16, 64
    data = np.zeros((replicas, snapshots, sites), np.int64)
    for t in range(snapshots):  # mass gathers on site 0: the largest mass keeps growing
        c = mass * t // snapshots
        data[:, t, 0] = c
        data[:, t, 1:] = rng.multinomial(mass - c, np.full(sites - 1, 1 / (sites - 1)), replicas)
    result = check(written(meta(sites=(sites,)), data))
    assert result.status == "skip" and "no stationary window" in result.message

    data = simulate(meta(sites=(16,)), np.arange(100.0), replicas=2, seed=1, mass=16, exact=True)
    data[1, 50:, 3] += 1  # replica 1 gains a unit half-way
    loc = memory()
    with create_run(loc, meta(sites=(16,)), strict=False) as w:
        w.append(np.arange(100.0), data)
    result = check(open_run(loc))
    assert result.status == "skip" and "replica 1 does not keep its total mass" in result.message


def test_a_tiny_run_warns_instead_of_judging():
    m = meta(sites=(8,))
    run = simulate(m, np.arange(16.0), replicas=2, seed=2, mass=4, exact=True, location=memory())
    result = check(run)
    assert result.status == "warn", result.message
    assert "too small to judge" in result.message and result.values["effective_n"] < 1000
    # the warning says what would remove it: the effective sample grows with the window's
    # length and with the replicas (common practice), so 1000 / n_eff of either would do
    factor = 1000 / result.values["effective_n"]
    assert f"about {factor:.3g}x as long" in result.message
    assert f"about {math.ceil(2 * factor)} replicas instead of 2" in result.message
