"""The tests behind the ``boundary`` check, on runs whose transfers are known by construction.

Masses are built from prescribed bond transfers (m(t+1) = m(t) + transfers in - transfers
out): independent Skellam transfers on every bond of a ring, or on every bond but the last
behind walls; or a frozen pile that trades units across one bond only. Then the null
hypotheses hold exactly (cuts are exchangeable on the ring; bond transfers are independent
behind walls), and:

* the exact ring p-value is checked against brute-force enumeration of rank sums, and its
  false-alarm rate against its level (binomial test, scipy.stats.binomtest), for moving
  and for frozen (profile-ranked) rings;
* on a ring the transfers reconstructed at a third and two thirds of the axis have
  correlation 1/2: x_a - C and x_b - C with x_a, x_b, C independent of equal variance
  (derived, common practice);
* behind walls the batch-means t statistic of the pair correlation about its true value 0
  follows Student's t with its degrees of freedom (Kolmogorov-Smirnov, scipy.stats.kstest);
* the spreading distance of independent bond transfers is below one site;
* each kind of data declared as the other kind fails with the smallest reachable p.
"""

from __future__ import annotations

import itertools
from types import SimpleNamespace

import numpy as np
import pytest
from scipy import stats

from massarc.archive import Chunk, ChunkRef
from massarc.schema import parse_metadata
from massarc.validators.checks.boundary.judge import (
    WallTest,
    judge_axis,
    ring_test,
    spreading,
    sum_of_ranks_cdf,
    wall_test,
)
from massarc.validators.checks.boundary.transfers import TransferStatistic

L, T, R = 60, 240, 4


def built(kind: str, seed: int) -> np.ndarray:
    """(replica, time, L) masses from independent Skellam(2, 2) bond transfers; behind
    walls the last bond carries nothing."""
    rng = np.random.default_rng(seed)
    j = rng.poisson(2.0, (R, T - 1, L)) - rng.poisson(2.0, (R, T - 1, L))
    if kind == "walls":
        j[..., -1] = 0
    m = np.full((R, T, L), 400, np.int64)
    m[:, 1:] += np.cumsum(np.roll(j, 1, axis=2) - j, axis=1)
    assert m.min() >= 0
    return m


def piled(kind: str, seed: int) -> np.ndarray:
    """A pile of 300 units on two sites that trade units across the bond between them;
    nothing else moves. On a ring the pile sits anywhere (uniformly, each replica), behind
    walls it leans on the right wall."""
    rng = np.random.default_rng(seed)
    m = np.zeros((R, T, L), np.int64)
    for r in range(R):
        c = int(rng.integers(L)) if kind == "ring" else L - 2
        left = rng.binomial(300, 0.5, T)
        m[r, :, c] = left
        m[r, :, (c + 1) % L] = 300 - left
    return m


def reduced(mass: np.ndarray, boundary: str):
    meta = parse_metadata(
        {
            "model": {"family": "custom", "description": "built from bond transfers"},
            "lattice": {"sites": [L], "boundary": boundary},
            "run": {"regime": "stationary"},
        }
    )
    # the statistic fed directly, one chunk per replica (the scan engine is tested elsewhere)
    run = SimpleNamespace(sites=(L,), n_replicas=R, n_snapshots=T, meta=meta)
    stat = TransferStatistic(run)
    for r in range(R):
        stat.merge(ChunkRef(r, 0, T, ""), stat.chunk(Chunk(r, 0, T, mass[r])))
    return stat.finish([]).axes[0]


def judged(mass: np.ndarray, boundary: str, **options):
    data = reduced(mass, boundary)
    return judge_axis(data, boundary, **options), data


def test_rank_sum_law_is_the_enumerated_one():
    for reps, k in ((1, 7), (2, 5), (3, 4), (4, 3)):
        sums = np.array([sum(c) for c in itertools.product(range(1, k + 1), repeat=reps)])
        for s in range(reps, reps * k + 1):
            # brute force over all k^reps equally likely rank tuples (common practice)
            assert sum_of_ranks_cdf(reps, k, s) == pytest.approx(np.mean(sums <= s), abs=1e-12)


@pytest.mark.parametrize("make", [built, piled])
def test_ring_p_values_hold_their_level_and_walls_reach_the_floor(make):
    ps = []
    for seed in range(60):
        ring = ring_test(reduced(make("ring", seed), "periodic"))
        assert set(ring.modes) == {"shares" if make is built else "profile"}
        ps.append(ring.p_value)
    ps = np.array(ps)
    for level in (0.1, 0.3):  # an exact test: P(p <= level) <= level
        hits = int((ps <= level).sum())
        assert stats.binomtest(hits, len(ps), level, alternative="greater").pvalue > 1e-3
    verdict, data = judged(make("walls", 99), "periodic")
    k = data.plan.ring_k
    assert verdict.outcome == "fail" and verdict.reason == "seam", verdict
    assert verdict.ring is not None
    assert set(verdict.ring.seam_ranks) == ({1.0} if make is built else {float(k)})
    assert verdict.p_value == pytest.approx(2 * k**-R)  # two-sided


def test_a_ring_reconstructed_from_its_seam_correlates_its_thirds_by_one_half():
    rho = []
    for seed in range(8):
        data = reduced(built("ring", 200 + seed), "periodic")
        a, b = data.plan.wall
        x = data.x[:, :, [a, b]].reshape(-1, 2).astype(float)
        rho.append(np.corrcoef(x.T)[0, 1])
    # 8 x 956 intervals: the standard error of a correlation of 1/2 is about 0.01
    assert np.mean(rho) == pytest.approx(0.5, abs=0.03)
    verdict, _ = judged(built("ring", 7), "reflecting")
    assert verdict.outcome == "fail" and verdict.reason == "common", verdict
    assert verdict.wall is not None and verdict.wall.mean == pytest.approx(0.5, abs=0.08)
    assert verdict.p_value < 1e-10


def test_wall_statistic_about_its_true_value_follows_student_t():
    ts, dofs = [], set()
    for seed in range(60):
        verdict, data = judged(built("walls", 1000 + seed), "reflecting")
        assert verdict.outcome == "pass", verdict
        ell = spreading(data).ell
        assert ell < 1.0  # independent bonds: nothing spreads
        wall = wall_test(data, ell)
        assert wall is not None
        ts.append(wall.mean / wall.se)  # about the true correlation 0 of independent bonds
        dofs.add(wall.dof)
    (dof,) = dofs
    assert stats.kstest(ts, stats.t(dof).cdf).pvalue > 1e-3


def test_a_piled_axis_behind_walls_is_judged_by_the_ring_test():
    verdict, _ = judged(piled("walls", 5), "reflecting")
    # the bulk never moves: no wall test, but the seam is unlike a ring's
    assert verdict.outcome == "pass" and verdict.ring is not None, verdict
    assert verdict.wall is None or verdict.wall.blocks == 0
    assert verdict.ring.p_value < 1e-4
    verdict, _ = judged(piled("ring", 5), "reflecting")
    assert verdict.outcome == "undecided", verdict


def jumpy(kind: str, seed: int) -> np.ndarray:
    """A ring of small Skellam(0.3, 0.3) bond transfers plus a condensate of 500 units that
    relocates to a uniformly drawn site at every snapshot: a few huge moves carry the arcs'
    changes. Only rings (``kind``)."""
    assert kind == "ring"
    rng = np.random.default_rng(seed)
    j = rng.poisson(0.3, (R, T - 1, L)) - rng.poisson(0.3, (R, T - 1, L))
    m = np.full((R, T, L), 200, np.int64)
    m[:, 1:] += np.cumsum(np.roll(j, 1, axis=2) - j, axis=1)
    at = rng.integers(L, size=(R, T))
    np.put_along_axis(m, at[:, :, None], np.take_along_axis(m, at[:, :, None], 2) + 500, 2)
    assert m.min() >= 0
    return m


def _van_der_waerden(a: np.ndarray, b: np.ndarray) -> float:
    """Pearson correlation of normal scores Phi^-1(rank / (n + 1)), from scipy.stats
    (rankdata, norm.ppf, pearsonr): the correlation the wall test averages."""
    n = len(a)
    za = stats.norm.ppf(stats.rankdata(a) / (n + 1))
    zb = stats.norm.ppf(stats.rankdata(b) / (n + 1))
    return float(stats.pearsonr(za, zb).statistic)


@pytest.mark.parametrize("make", [built, jumpy])
def test_a_ring_declared_walls_is_weighed_against_its_own_thirds_correlation(make):
    # Outside truth: on a ring the changes of the three arcs are translates of one another
    # (derived), so the pair (-A1, A3) and its turns (-A2, A1), (-A3, A2) share one law:
    # the turned estimate must match the pair's own normal-score correlation, computed
    # here block by block with scipy.stats. That is below Pearson's 1/2 even for nearly
    # Gaussian transfers, since blocks of 15 changes bias a correlation towards 0 (from
    # memory: E r is about rho (1 - (1 - rho^2) / (2 n)) for normal data), and with a
    # condensate relocating between arcs.
    own, turned = [], []
    for seed in range(6):
        data = reduced(make("ring", 300 + seed), "reflecting")
        a, b = data.plan.wall
        y = np.diff(data.x[:, :, [a, b]].astype(float), axis=1)
        edges = np.linspace(0, y.shape[1], 17).astype(int)  # the wall test's 16 blocks
        own.extend(
            _van_der_waerden(y[r, lo:hi, 0], y[r, lo:hi, 1])
            for r in range(R)
            for lo, hi in itertools.pairwise(edges)
        )
        wall = wall_test(data, 1.0, reach=0.0)  # the pair tested whatever the spreading
        assert wall is not None
        turned.append(wall.ring_like)
    assert np.mean(turned) == pytest.approx(min(0.5, float(np.mean(own))), abs=0.03)
    assert np.mean(own) < 0.48 and max(turned) < 0.48  # 1/2 would overstate a ring


def test_walls_pass_only_when_the_data_reject_a_ring():
    # Outside truth: the one-sided critical t of scipy.stats.t. The numbers are those of a
    # symmetric CMAM ring declared walls (L = 200, a snapshot every 10 hop times; seed
    # 100026 of bench/calibrate_boundary.py): its pair correlated by 0.294, between the
    # 0.15 walls tolerate and the 0.439 of its turns. Power alone passed it; the mirror of
    # the wall test, (rho_ring - mean) / se >= t_crit, does not.
    alpha, dof = 1e-4, 63
    crit = stats.t.isf(alpha, dof)
    se = (0.294 - 0.15) / 3.327
    marginal = WallTest((66, 132), 66, 1.29, 0.15, 0.294, se, 3.327, dof, 7.3e-4, 64, 0.439)
    assert marginal.caught(alpha, 2.0)  # a ring of these data would be caught ...
    assert (0.439 - 0.294) / se < crit and not marginal.ring_rejected(alpha)  # ... not this
    walls = WallTest((66, 132), 66, 1.29, 0.15, 0.02, se, -3.0, dof, 0.99, 64, 0.439)
    assert (0.439 - 0.02) / se >= crit and walls.ring_rejected(alpha)
    edge = 0.439 - crit * se  # just below and just above the critical value

    def at(mean: float) -> WallTest:
        return WallTest((66, 132), 66, 1.29, 0.15, mean, se, 0.0, dof, 0.5, 64, 0.439)

    assert at(edge - 1e-9).ring_rejected(alpha) and not at(edge + 1e-9).ring_rejected(alpha)
