"""The ``boundary`` check on runs of the reference samplers (massarc.simulate).

Outside truth: the planted faults are real. A run simulated with one boundary (the
sampler suppresses moves into a wall) is declared with the other, and the check must
name the axis; the clean run must not fail. The statistic itself is tested in
test_boundary_increments.py, the event audit in test_boundary_events.py.

Runs are small (L = 32 or 16 x 24, four replicas, 300 snapshots 0.5 apart).
"""

from __future__ import annotations

import uuid

import numpy as np
import pytest

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.boundary import BoundaryCheck
from massarc.validators.checks.boundary.increments import IncrementStatistic

TIMES = np.arange(300) * 0.5


def meta(family: str, sites: tuple[int, ...], boundary: list[str], drift: str = "symmetric"):
    model: dict = {"family": family, "drift": drift}
    model.update({"b": 4.0} if family == "zrp" else {"diffusion": 1.0, "chipping": 1.0})
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": list(sites), "boundary": boundary},
            "run": {"regime": "transient"},
        }
    )


def memory() -> str:
    return f"memory://boundary-{uuid.uuid4().hex}"


def sampled(m: RunMeta, seed: int, times: np.ndarray = TIMES, replicas: int = 4) -> Run:
    mass = int(np.prod(m.lattice.sites))
    return simulate(m, times, replicas=replicas, seed=seed, mass=mass, location=memory())


def redeclare(run: Run, boundary: list[str]) -> Run:
    """The same data under other declared boundaries (the planted fault)."""
    d = run.meta.model_dump(mode="json", exclude_none=True)
    d["lattice"]["boundary"] = boundary
    loc = memory()
    with create_run(loc, parse_metadata(d)) as w:
        w.append(run.times, np.stack([run.read(r) for r in range(run.n_replicas)]))
    return open_run(loc)


def check(run: Run, **options):
    stats = scan(run, {"increments": IncrementStatistic(run)}).results
    ctx = CheckContext(run, run.meta, stats, BoundaryCheck.option_values(options))
    return BoundaryCheck().run(ctx)


# -- the check -------------------------------------------------------------------------------

CASES_1D = [
    (family, drift, truth)
    for family in ("zrp", "cmam")
    for drift in ("symmetric", "asymmetric")
    for truth in ("periodic", "reflecting")
]


@pytest.mark.parametrize(("family", "drift", "truth"), CASES_1D)
def test_ring_and_walls_are_told_apart_in_1d(family, drift, truth):
    run = sampled(meta(family, (32,), [truth], drift), seed=2)
    clean = check(run)
    assert clean.status != "fail", clean.message
    if not (drift == "asymmetric" and truth == "reflecting"):
        assert clean.status == "pass", clean.message
    other = "reflecting" if truth == "periodic" else "periodic"
    fault = check(redeclare(run, [other]))
    assert fault.status == "fail", fault.message
    assert f"declared {other}" in fault.message
    assert fault.values["axes"][0]["p_value"] < 1e-3


def test_a_piled_up_chain_with_walls_is_not_judged_as_a_ring():
    # total asymmetry between walls piles the mass on the last site: almost nothing moves
    # near site 0, so the seam cannot be judged; the check says so instead of passing
    run = sampled(meta("zrp", (32,), ["reflecting"], "asymmetric"), seed=2)
    result = check(run)
    assert result.status == "warn"
    assert "too far apart (or too few moves)" in result.message
    assert result.values["axes"][0]["resolved"] is False


@pytest.mark.parametrize("family", ["zrp", "cmam"])
@pytest.mark.parametrize("drift", ["symmetric", "asymmetric"])
def test_each_axis_of_a_2d_lattice_is_judged(family, drift):
    truth = ["periodic", "reflecting"]  # periodic in y, walls in x
    run = sampled(meta(family, (16, 24), truth, drift), seed=3)
    clean = check(run)
    assert clean.status != "fail", clean.message
    fault = check(redeclare(run, ["reflecting", "periodic"]))
    assert fault.status == "fail", fault.message
    assert [a["p_value"] < 1e-3 for a in fault.values["axes"]] == [True, True]
    half = check(redeclare(run, ["periodic", "periodic"]))
    assert half.status == "fail" and "axis x is declared periodic" in half.message
    assert half.values["axes"][0]["p_value"] > 1e-3


def test_snapshots_too_far_apart_give_a_warning_with_the_measured_correlation():
    m = meta("zrp", (16,), ["periodic"])
    far = check(sampled(m, seed=4, times=np.arange(200) * 100.0))
    assert far.status == "warn"
    assert "interior-bond correlation" in far.message
    assert abs(far.values["axes"][0]["bond_correlation"]) < 0.2
    near = check(sampled(m, seed=4, times=np.arange(200) * 0.5, replicas=8))
    assert near.status == "pass", near.message


def test_short_axes_are_not_tested_and_a_condensed_start_is_noted():
    m = meta("zrp", (6,), ["periodic"])
    short = check(simulate(m, TIMES[:50], replicas=2, seed=1, mass=6, location=memory()))
    assert short.status == "skip" and "fewer than 8 sites" in short.message
    m = meta("zrp", (32,), ["periodic"])
    run = simulate(m, TIMES, replicas=4, seed=1, mass=32, initial="condensed", location=memory())
    result = check(run)
    assert result.status != "fail"
    assert "condensed start" in result.message
    assert result.values["axes"][0]["p_activity"] is None


def test_an_open_axis_is_tested_for_a_ring_like_a_wall():
    # mass enters at site 0 and leaves from the last site through reservoirs, never
    # directly between them: an open seam must not behave like a bond either
    run = sampled(meta("zrp", (32,), ["periodic"]), seed=6)
    result = check(redeclare(run, ["open"]))
    assert result.status == "fail" and "declared open" in result.message
