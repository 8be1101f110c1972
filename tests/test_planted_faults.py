"""Every kind of planted fault, in ZRP and CMAM runs of the reference sampler, is caught by
the check meant for it, at the planted location; the clean runs never fail.

Outside truth: the faults are planted by hand at known places; the clean runs are honest
simulations of the models (their correctness is tested in test_simulate_*.py against
scipy.stats and exact laws), and the laws behind the statistical checks are published
(Evans and Hanney, J. Phys. A 38, R195, 2005; Majumdar, Krishnamurthy and Barma, PRL 81,
3691, 1998).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from massarc.archive import create_run
from massarc.schema import InitialCondition, RunMeta, parse_metadata
from massarc.simulate import simulate, snapshot_times
from massarc.validators import audit

L, R = 24, 4


def meta_for(family: str, boundary: str = "periodic", **model: object) -> RunMeta:
    body: dict[str, object] = {"family": family, **model}
    if family == "zrp":
        body.setdefault("b", 3.0)
    else:
        body.update(diffusion=1.0, chipping=1.0)
    return parse_metadata(
        {
            "model": body,
            "lattice": {"sites": [L], "boundary": boundary},
            "run": {"regime": "stationary"},
        }
    )


def honest(family: str, boundary: str = "periodic", seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """A short run with a snapshot every 0.5 time units, started near the steady state."""
    meta = meta_for(family, boundary)
    times = snapshot_times(300.0, 600)
    initial = "steady-state" if family == "zrp" else "uniform"
    x = simulate(meta, times, replicas=R, seed=seed, mass=L, initial=initial)
    return np.asarray(x, dtype=np.int64), np.asarray(times, dtype=float)


def store(path: Path, meta: RunMeta, x: np.ndarray, t: np.ndarray, **kw: object) -> Path:
    with create_run(path, meta, strict=False, **kw) as w:
        w.append(t, x)
    return path


def verdicts(path: Path) -> dict:
    return {c.id: c for c in audit([path]).runs[0].checks}


@pytest.fixture(scope="module", params=["zrp", "cmam"])
def family_run(request):
    return request.param, *honest(request.param)


def test_clean_runs_never_fail(family_run, tmp_path) -> None:
    family, x, t = family_run
    got = verdicts(store(tmp_path / "clean.zarr", meta_for(family), x, t))
    assert not [k for k, v in got.items() if v.status in ("fail", "error")], got


@pytest.mark.parametrize("delta", [-1, +1], ids=["lost", "duplicated"])
def test_lost_or_duplicated_particle(family_run, tmp_path, delta) -> None:
    family, x, t = family_run
    x = x.copy()
    site = int(np.flatnonzero(x[2, 345] > 0)[0])
    x[2, 345:, site] = np.maximum(x[2, 345:, site] + delta, 0)
    got = verdicts(store(tmp_path / "f.zarr", meta_for(family), x, t, max_mass=L + 1))
    c = got["conservation"]
    assert c.status == "fail"
    assert (c.where.replica, c.where.snapshot) == (2, 345)


def test_negative_mass(family_run, tmp_path) -> None:
    family, x, t = family_run
    x = x.astype(np.int32)
    moved = int(x[1, 77, 5]) + 1
    x[1, 77, 5] = -1  # the difference goes to site 9: the total is unchanged
    x[1, 77, 9] += moved
    got = verdicts(store(tmp_path / "f.zarr", meta_for(family), x, t, dtype="int32"))
    c = got["nonnegative"]
    assert c.status == "fail"
    assert (c.where.replica, c.where.snapshot, c.where.site) == (1, 77, 5)
    assert got["conservation"].status == "pass"


def test_swapped_times(family_run, tmp_path) -> None:
    family, x, t = family_run
    t = t.copy()
    t[200], t[201] = t[201], t[200]
    got = verdicts(store(tmp_path / "f.zarr", meta_for(family), x, t))
    c = got["time-order"]
    assert c.status == "fail" and c.where.snapshot == 201


@pytest.mark.parametrize(
    ("truth", "declared"), [("reflecting", "periodic"), ("periodic", "reflecting")]
)
def test_boundary_declared_the_other_way(family_run, tmp_path, truth, declared) -> None:
    family = family_run[0]
    x, t = honest(family, truth, seed=7)
    got = verdicts(store(tmp_path / "f.zarr", meta_for(family, declared), x, t))
    assert got["boundary"].status == "fail", got["boundary"].message
    assert "site" in got["boundary"].message  # names the axis


def test_wrong_declared_b_zrp(tmp_path) -> None:
    # exact samples of the canonical law of b = 4 in the condensed phase, declared b = 3
    meta = meta_for("zrp", b=4.0)
    x = simulate(meta, np.arange(400.0), replicas=R, seed=3, mass=2 * L, exact=True)
    wrong = meta.model_copy(update={"model": meta.model.model_copy(update={"b": 3.0})})
    got = verdicts(store(tmp_path / "f.zarr", wrong, np.asarray(x), np.arange(400.0)))
    assert got["stationary-law"].status == "fail", got["stationary-law"].message
    right = verdicts(store(tmp_path / "r.zarr", meta, np.asarray(x), np.arange(400.0)))
    assert right["stationary-law"].status == "pass"


def test_wrong_declared_rates_are_not_judged_for_cmam(tmp_path) -> None:
    x, t = honest("cmam")
    got = verdicts(store(tmp_path / "c.zarr", meta_for("cmam"), x, t))
    assert got["stationary-law"].status == "skip" and "cmam" in got["stationary-law"].message


@pytest.mark.parametrize("family", ["zrp", "cmam"])
def test_coarsening_run_labelled_stationary(tmp_path, family) -> None:
    meta = meta_for(family, b=4.0) if family == "zrp" else meta_for(family)
    t_max = 0.01 * L**3 if family == "zrp" else 0.03 * L**2
    times = snapshot_times(t_max, 512, spacing="log")
    x = simulate(meta, times, replicas=R, seed=11, mass=2 * L, initial="random")
    run = meta.run.model_copy(update={"initial": InitialCondition(kind="random")})
    got = verdicts(
        store(
            tmp_path / "f.zarr",
            meta.model_copy(update={"run": run}),
            np.asarray(x),
            np.asarray(times),
        )
    )
    assert got["steady-state"].status == "fail", got["steady-state"].message
