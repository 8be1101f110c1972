"""The ``increments`` statistic behind the ``boundary`` check.

Outside truth:

* the correlations are checked against a direct NumPy computation and against
  ``numpy.corrcoef`` of the sign increments, and the compiled and NumPy paths agree;
* for snapshots much closer than the hop time, at most one move touches a site between
  two snapshots, so corr(s_i, s_{i+1}) -> -1/(2d) on a lattice of d axes: a site changes
  through its 2d bonds equally often, and a move across (i, i+1) changes both ends with
  opposite signs (derivation, from memory; it holds for single units and whole clusters,
  for any drift). The runs come from massarc.simulate.
"""

from __future__ import annotations

import uuid

import numpy as np
import pytest

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.schema import parse_metadata
from massarc.simulate import simulate
from massarc.validators.checks.boundary.increments import IncrementStatistic, plan_axis


def meta(sites: tuple[int, ...]):
    return parse_metadata(
        {
            "model": {"family": "zrp", "b": 4.0},
            "lattice": {"sites": list(sites), "boundary": "periodic"},
            "run": {"regime": "transient"},
        }
    )


def memory() -> str:
    return f"memory://increments-{uuid.uuid4().hex}"


def _data_run(data: np.ndarray, chunk: int) -> Run:
    sites = data.shape[2:]
    loc = memory()
    with create_run(loc, meta(sites), snapshots_hint=chunk) as w:
        w.append(np.arange(data.shape[1], dtype=float), data)
    return open_run(loc)


def _signs_along(data: np.ndarray, axis: int, lines: np.ndarray) -> np.ndarray:
    """Sign increments as (replica, time, [line,] position along ``axis``)."""
    signs = np.sign(np.diff(data.astype(np.int64), axis=1))
    along = np.moveaxis(signs, 2 + axis, -1)
    return along[:, :, lines] if along.ndim == 4 else along


@pytest.mark.parametrize("sites", [(20,), (9, 12)])
def test_moments_match_a_direct_computation_and_both_paths_agree(sites, monkeypatch):
    rng = np.random.default_rng(1)
    data = rng.integers(0, 6, size=(2, 41, *sites)).astype(np.uint8)
    run = _data_run(data, chunk=7)  # many chunk edges: the straddling pairs must count
    results = []
    for pure in ("0", "1"):
        monkeypatch.setenv("MASSARC_PURE", pure)
        results.append(
            scan(run, {"increments": IncrementStatistic(run, blocks=1)}).results["increments"]
        )
    for axis, (fast, slow) in enumerate(zip(*(r.axes for r in results), strict=True)):
        assert np.array_equal(fast.sums, slow.sums)
        plan = fast.plan
        along = _signs_along(data, axis, plan.lines)
        r = fast.correlations()
        for p in range(len(plan.kind)):
            a, b = along[..., plan.first[p]], along[..., plan.second[p]]
            # one block per replica: centre within each replica, then pool (common practice)
            keep = tuple(range(1, a.ndim))
            ca, cb = a - a.mean(axis=keep, keepdims=True), b - b.mean(axis=keep, keepdims=True)
            direct = (ca * cb).sum() / np.sqrt((ca**2).sum() * (cb**2).sum())
            assert r[p] == pytest.approx(direct, rel=1e-12, abs=1e-12)


def test_one_replica_gives_numpy_corrcoef():
    rng = np.random.default_rng(2)
    data = rng.integers(0, 4, size=(1, 60, 16)).astype(np.uint8)
    run = _data_run(data, chunk=9)
    ax = scan(run, {"increments": IncrementStatistic(run, blocks=1)}).results["increments"].axes[0]
    along = _signs_along(data, 0, ax.plan.lines)[0]
    for p in range(len(ax.plan.kind)):
        ref = np.corrcoef(along[:, ax.plan.first[p]], along[:, ax.plan.second[p]])[0, 1]
        assert ax.correlations()[p] == pytest.approx(ref, rel=1e-12)


def test_plan_keeps_bonds_away_from_the_ends_and_skips_short_axes():
    plan = plan_axis(0, 40, positions=8)
    bonds = plan.first[plan.kind == 1]
    assert bonds.min() >= 1 and (plan.second[plan.kind == 1]).max() <= 38
    assert np.all(np.abs(plan.first - plan.second)[plan.kind == 2] >= 40 // 3)
    assert plan_axis(0, 7) is None


@pytest.mark.parametrize(("sites", "expected"), [((32,), -0.5), ((24, 24), -0.25)])
def test_bond_correlation_tends_to_minus_one_over_twice_the_dimension(sites, expected):
    # dt = 0.005: about 0.01 moves per site between snapshots
    mass = int(np.prod(sites))
    run = simulate(
        meta(sites), np.arange(2000) * 0.005, replicas=2, seed=5, mass=mass, location=memory()
    )
    inc = scan(run, {"increments": IncrementStatistic(run)}).results["increments"]
    for ax in inc.axes:
        bonds = ax.correlations()[ax.plan.kind == 1]
        assert np.mean(bonds) == pytest.approx(expected, abs=0.04)
