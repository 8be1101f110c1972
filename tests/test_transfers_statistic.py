"""The ``transfers`` statistic: reconstructed bond transfers against the sampler's own count.

Outside truth:

* the reference sampler counts the net mass moved across every bond move by move
  (``simulate(..., transfers=True)``, itself checked against continuity and a Skellam law
  in test_simulate_transfers.py); reconstructed transfers must equal that count exactly
  behind walls, up to one constant per snapshot pair (the seam transfer) on rings, along
  each axis of a 2D lattice (summed over the other axis), and at open ends with the
  recorded inflow as the constant and the outflow at the far end;
* the transfers and the profile the statistic keeps are the sampler's transfers at the
  kept bonds and the masses summed directly;
* the compiled and NumPy paths agree exactly, and chunking changes nothing.
"""

from __future__ import annotations

import itertools
import uuid

import numpy as np
import pytest

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators.checks.boundary.transfers import (
    BUDGET,
    TransferStatistic,
    bond_transfers,
    plan_axis,
)


def meta(family: str, sites: list[int], boundary, **extra) -> RunMeta:
    rates = {"b": 3.0} if family == "zrp" else {"diffusion": 1.0, "chipping": 1.0}
    model = {"family": family, **rates}
    model.update(extra.pop("model", {}))
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": sites, "boundary": boundary, **extra},
            "run": {"regime": "transient"},
        }
    )


def archive(m: RunMeta, times: np.ndarray, traj, chunk: int) -> Run:
    loc = f"memory://transfers-{uuid.uuid4().hex}"
    kw = {}
    if not m.lattice.closed:
        kw = {"inflow": traj.inflow, "outflow": traj.outflow}
    with create_run(loc, m, snapshots_hint=chunk, dtype="uint16") as w:
        w.append(times, traj.mass, **kw)
    return open_run(loc)


def reduce(run: Run, **options):
    return scan(run, {"transfers": TransferStatistic(run, **options)}).results["transfers"]


def projected(transfers: np.ndarray, axis: int) -> np.ndarray:
    """Sampler transfers (time, axis, *lattice) summed over the other axis: (time, L)."""
    t = transfers[:, axis]
    return t if t.ndim == 2 else t.sum(axis=2 - axis)


CASES = [
    ("zrp", [40], "periodic", {"model": {"drift": "asymmetric", "right_probability": 0.8}}),
    ("cmam", [40], "reflecting", {}),
    ("zrp", [12, 30], ["periodic", "reflecting"], {}),
    ("cmam", [30, 12], ["reflecting", "periodic"], {"model": {"drift": "asymmetric"}}),
]


@pytest.mark.parametrize(("family", "sites", "boundary", "extra"), CASES)
def test_reconstruction_is_the_sampler_count_up_to_the_seam(family, sites, boundary, extra):
    m = meta(family, sites, boundary, **extra)
    t = np.arange(60) * 3.0
    traj = simulate(m, t, replicas=2, seed=4, mass=int(np.prod(sites)), transfers=True)
    for axis, kind in enumerate(m.lattice.boundary):
        for r in range(2):
            x = bond_transfers(traj.mass[r], axis)
            truth = projected(traj.transfers[r, 1:], axis)
            if kind == "reflecting":
                assert np.array_equal(x, truth)  # walls: exactly the counted transfers
            else:  # a ring: shifted by the seam transfer, the same at every bond
                assert np.array_equal(x, truth - truth[:, -1:])
            assert np.abs(truth).sum() > 0


def test_open_axes_take_the_inflow_as_constant_and_close_on_the_outflow() -> None:
    m = meta("zrp", [10, 24], ["periodic", "open"], open={"injection": 0.3, "extraction": 0.6})
    m = m.model_copy(update={"model": m.model.model_copy(update={"rate": 1.0, "b": None})})
    t = np.arange(80) * 2.0
    traj = simulate(m, t, replicas=2, seed=5, mass=100, transfers=True)
    for r in range(2):
        x = bond_transfers(traj.mass[r], 1, np.diff(traj.inflow[r]))
        truth = projected(traj.transfers[r, 1:], 1)
        assert np.array_equal(x[:, :-1], truth[:, :-1])
        assert np.array_equal(x[:, -1], np.diff(traj.outflow[r]))  # what left at the far end
        assert np.diff(traj.inflow[r]).sum() > 0 and np.diff(traj.outflow[r]).sum() > 0


@pytest.mark.parametrize(("family", "sites", "boundary", "extra"), CASES)
def test_kept_transfers_and_profile_are_the_sampler_ones(family, sites, boundary, extra):
    m = meta(family, sites, boundary, **extra)
    t = np.arange(90) * 2.0
    traj = simulate(m, t, replicas=2, seed=6, mass=int(np.prod(sites)), transfers=True)
    run = archive(m, t, traj, chunk=13)
    st = reduce(run, intervals=30)  # every third interval
    assert st.stride == 3
    for axis, data in enumerate(st.axes):
        plan = data.plan
        kept = np.arange(0, len(t) - 1, 3)
        assert data.valid.all() and data.x.shape == (2, len(kept), len(plan.positions))
        for r in range(2):
            truth = projected(traj.transfers[r, 1:], axis)  # interval g: snapshots g, g + 1
            if m.lattice.boundary[axis] == "periodic":
                truth = truth - truth[:, -1:]
            assert np.array_equal(data.x[r], truth[kept][:, plan.positions])
            mass = np.asarray(traj.mass[r], np.int64)
            line = mass if mass.ndim == 2 else mass.sum(axis=2 - axis)
            cuts = np.concatenate([[-1], plan.ring_cuts])
            segments = np.stack(
                [line[kept, a + 1 : b + 1].sum(axis=1) for a, b in itertools.pairwise(cuts)],
                axis=1,
            )
            assert np.array_equal(data.profile[r], segments.sum(axis=0))
            assert data.profile_n[r] == len(kept)


@pytest.mark.parametrize("chunk", [7, 33])
def test_both_paths_agree_and_chunking_changes_nothing(chunk, monkeypatch):
    m = meta("zrp", [9, 20], ["reflecting", "periodic"])
    t = np.arange(101) * 1.5
    traj = simulate(m, t, replicas=3, seed=8, mass=180, transfers=True)
    run = archive(m, t, traj, chunk=chunk)
    one = archive(m, t, traj, chunk=len(t))
    results = []
    for pure in ("0", "1"):
        monkeypatch.setenv("MASSARC_PURE", pure)
        results.append(reduce(run, intervals=40))  # every third interval
    monkeypatch.delenv("MASSARC_PURE")
    whole = reduce(one, intervals=40)
    assert results[0].stride == 3
    for fast, slow, ref in zip(results[0].axes, results[1].axes, whole.axes, strict=True):
        for key in ("x", "valid", "profile", "profile_n"):
            assert np.array_equal(getattr(fast, key), getattr(slow, key)), key
            assert np.array_equal(getattr(fast, key), getattr(ref, key)), key
        assert fast.intervals == 3 * 34  # intervals 0, 3, ..., 99 of every replica


def test_memory_is_bounded_whatever_the_run_length():
    from types import SimpleNamespace

    long = SimpleNamespace(sites=(5000,), n_replicas=4, n_snapshots=10**7, meta=None)
    stat = TransferStatistic(long)
    kept = stat._x[0]
    assert kept is not None and kept.size <= BUDGET
    assert stat.stride * stat.slots >= 10**7 - 1  # the whole run is sampled, evenly


def test_plans_keep_ring_cuts_evenly_spaced_and_the_wall_pair_at_thirds():
    plan = plan_axis(0, 200)
    assert plan.ring_k == 50 and plan.ring_exact
    assert np.all(np.diff(plan.ring_cuts) == 4) and plan.ring_cuts[-1] == 199
    assert plan.pair.tolist() == [66, 132] and plan.middle_bond == 99
    assert plan.class_dist[0] == 1 and plan.class_dist[-1] == 100
    assert plan_axis(0, 97).ring_k == 97  # no divisor: every bond is a cut
    assert not plan_axis(0, 401).ring_exact  # a prime too long for that
    assert plan_axis(0, 7) is None
