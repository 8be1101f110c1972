"""The ``drift`` check on runs of the reference samplers (massarc.simulate).

Outside truth: the planted faults are real. A run simulated with one right-hop
probability is declared with another (symmetric, the other direction), and the check must
fail on the axis concerned; the clean run must not fail; where the data cannot decide
(snapshots so far apart that fluctuations wrap the ring), the check skips.

Runs are small (L = 64 or 16 x 24, four replicas, a few hundred snapshots).
"""

from __future__ import annotations

import uuid

import numpy as np
import pytest
from conftest import make_meta

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import ProfileStatistic, SnapshotStatistic
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.drift import DriftCheck
from massarc.validators.checks.drift.spacetime import SpacetimeStatistic


def sampled(meta: RunMeta, times: np.ndarray, seed: int, mass: int, initial: str) -> Run:
    loc = f"memory://drift-{uuid.uuid4().hex}"
    return simulate(
        meta, times, replicas=4, seed=seed, mass=mass, initial=initial, location=loc
    )  # fmt: skip


def redeclare(run: Run, p: float | None = None, family: str | None = None) -> Run:
    """The same data under another declared drift (or model family)."""
    d = run.meta.model_dump(mode="json", exclude_none=True)
    if family == "custom":
        d["model"] = {"family": "custom", "description": "depots on a ring"}
    else:
        d["model"].pop("right_probability", None)
        d["model"]["drift"] = "symmetric" if p == 0.5 else "asymmetric"
        if p != 0.5:
            d["model"]["right_probability"] = p
    loc = f"memory://drift-{uuid.uuid4().hex}"
    with create_run(loc, parse_metadata(d)) as w:
        w.append(run.times, np.stack([run.read(r) for r in range(run.n_replicas)]))
    return open_run(loc)


def check(run: Run, **options):
    stats = {
        "spacetime": SpacetimeStatistic(run),
        "profiles": ProfileStatistic(run),
        "snapshots": SnapshotStatistic(run),
    }
    res = scan(run, stats)
    assert not res.errors
    ctx = CheckContext(run, run.meta, res.results, DriftCheck.option_values(options))
    return DriftCheck().run(ctx)


@pytest.mark.parametrize("family", ["zrp", "cmam"])
def test_a_driven_ring_is_told_from_a_symmetric_one(family):
    driven = make_meta(family, sites=(64,), drift="asymmetric", right_probability=0.8)
    initial = "steady-state" if family == "zrp" else "random"
    run = sampled(driven, np.arange(400) * 2.0, seed=1, mass=24, initial=initial)
    clean = check(run)
    assert clean.status == "pass", clean.message
    assert clean.values["axes"][0]["p_value"] < 1e-4
    hidden = check(redeclare(run, 0.5))
    assert hidden.status == "fail", hidden.message
    assert "declared symmetric but the data are driven (towards +site)" in hidden.message
    assert hidden.where.axis == "site"
    reversed_ = check(redeclare(run, 0.2))
    assert reversed_.status == "fail", reversed_.message
    assert "fluctuations travel towards +site" in reversed_.message


def test_a_symmetric_ring_declared_driven_fails_only_with_enough_signal():
    sym = make_meta("zrp", sites=(64,), b=4.0)
    run = sampled(sym, np.arange(400) * 2.0, seed=2, mass=24, initial="steady-state")
    clean = check(run)
    assert clean.status == "pass", clean.message
    assert "would have shown" in clean.message
    claimed = check(redeclare(run, 0.8))
    assert claimed.status == "fail", claimed.message
    assert "look mirror-symmetric" in claimed.message
    assert claimed.values["axes"][0]["ratio"] < 0.3


def test_snapshots_too_far_apart_give_a_skip_with_the_reason():
    driven = make_meta("zrp", sites=(32,), drift="asymmetric", right_probability=0.8)
    run = sampled(driven, np.arange(120) * 500.0, seed=3, mass=12, initial="steady-state")
    result = check(run)
    assert result.status == "skip", result.message
    assert "too far apart" in result.message
    assert "would decide" in result.message


def test_each_axis_of_a_torus_is_judged():
    driven = make_meta("cmam", sites=(24, 32), drift="asymmetric", right_probability=0.75)
    run = sampled(driven, np.arange(300) * 1.0, seed=4, mass=192, initial="random")
    clean = check(run)
    assert clean.status == "pass", clean.message
    assert [a["status"] for a in clean.values["axes"]] == ["pass", "pass"]
    hidden = check(redeclare(run, 0.5))
    assert hidden.status == "fail"
    assert {a["status"] for a in hidden.values["axes"]} == {"fail"}
    assert hidden.where.axis in ("y", "x")


def test_walls_pile_the_mass_and_the_centre_of_mass_decides():
    driven = make_meta("zrp", sites=(40,), boundary="reflecting", b=1.0, drift="asymmetric",
                       right_probability=0.7)  # fmt: skip
    run = sampled(driven, np.arange(300) * 5.0, seed=5, mass=20, initial="random")
    clean = check(run)
    assert clean.status == "pass", clean.message
    hidden = check(redeclare(run, 0.5))
    assert hidden.status == "fail" and "towards +site" in hidden.message
    sym = make_meta("zrp", sites=(40,), boundary="reflecting", b=1.0)
    flat = sampled(sym, np.arange(300) * 5.0, seed=6, mass=20, initial="steady-state")
    claimed = check(redeclare(flat, 0.7))
    assert claimed.status == "fail", claimed.message
    assert "centre of mass" in claimed.message


def test_models_without_drift_and_open_axes_are_not_judged():
    sym = make_meta("zrp", sites=(32,))
    run = sampled(sym, np.arange(50) * 1.0, seed=7, mass=10, initial="steady-state")
    assert check(redeclare(run, family="custom")).status == "skip"
    d = run.meta.model_dump(mode="json", exclude_none=True)
    d["lattice"]["boundary"] = "open"
    d["lattice"]["open"] = {"injection": 1.0, "extraction": 1.0}
    loc = f"memory://drift-{uuid.uuid4().hex}"
    with create_run(loc, parse_metadata(d)) as w:
        w.append(run.times, np.stack([run.read(r) for r in range(4)]))
    result = check(open_run(loc))
    assert result.status == "skip" and "open" in result.message
