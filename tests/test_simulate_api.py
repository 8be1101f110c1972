"""massarc.simulate as an API: snapshot times, seeds, initial conditions, the metadata it
writes, crash behaviour, batching of the event loop, and its errors."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import stats
from test_simulate_exact import chisquare_merged

from massarc.archive import open_run
from massarc.schema import MetadataError, RunMeta, parse_metadata
from massarc.schema.laws import canonical_site_law
from massarc.simulate import (
    SIMULATOR_NAME,
    SamplerError,
    dynamics,
    replica_seeds,
    simulate,
    snapshot_times,
)


def _meta(model: dict[str, Any], sites: list[int], boundary: Any = "periodic") -> RunMeta:
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": sites, "boundary": boundary},
            "run": {"regime": "transient"},
        }
    )


ZRP = {"family": "zrp", "b": 3.0}
CMAM = {"family": "cmam", "diffusion": 1.0, "chipping": 0.5}


def test_snapshot_times() -> None:
    lin = snapshot_times(10.0, 6)
    assert lin.tolist() == [0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
    log = snapshot_times(1000.0, 4, "log")
    np.testing.assert_allclose(log, [1.0, 10.0, 100.0, 1000.0])
    assert log[-1] == 1000.0
    assert snapshot_times(5.0, 20, "log")[0] == pytest.approx(0.25)  # min(1, t_max / n)
    assert snapshot_times(5.0, 1).tolist() == [5.0]
    for bad in [(0.0, 5), (float("nan"), 5), (5.0, 0), (5.0, 5, "cubic"), (5.0, 5, "log", 0.0)]:
        with pytest.raises(SamplerError, match="expected"):
            snapshot_times(*bad)


def test_seeds_are_derived_per_replica_and_reproduce_a_replica_alone(tmp_path: Path) -> None:
    meta = _meta({**ZRP, "drift": "asymmetric"}, [20])
    t = snapshot_times(30.0, 16)
    run = simulate(meta, t, replicas=3, seed=9, mass=25, location=tmp_path / "a.zarr")
    seeds = run.meta.run.seeds
    assert seeds == tuple(replica_seeds(9, 3)) and len(set(seeds)) == 3
    assert tuple(replica_seeds(9, 5)[:3]) == seeds  # more replicas keep the earlier seeds
    alone = simulate(meta, t, replicas=1, seeds=[seeds[2]], mass=25)
    assert np.array_equal(alone[0], run.read(2))
    assert not np.array_equal(run.read(0), run.read(1))


def test_metadata_written(tmp_path: Path) -> None:
    meta = _meta(CMAM, [6, 7], ["periodic", "reflecting"])
    where = tmp_path / "c.zarr"
    run = simulate(meta, snapshot_times(50.0, 10, "log"), replicas=2, seed=1, mass=300,
                   initial="uniform", location=where, command="massarc sample x")  # fmt: skip
    assert run.complete and run.n_replicas == 2 and run.n_snapshots == 10
    assert run.dtype == np.uint16  # smallest unsigned dtype above 300
    info = run.meta.run
    assert info.total_mass == 300 and info.density == pytest.approx(300 / 42)
    assert info.initial.kind == "uniform" and info.sampling == "log"
    assert run.meta.simulator.name == SIMULATOR_NAME
    assert run.meta.simulator.version and run.meta.simulator.command == "massarc sample x"
    assert run.meta.created
    assert meta.run.seeds is None  # the caller's metadata is not modified


def test_an_interrupted_run_stays_incomplete(tmp_path: Path) -> None:
    meta = _meta({"family": "zrp", "rate": 1.0}, [2048])
    t = snapshot_times(0.01, 2100)  # two chunks of 2048 and 52 snapshots (uint8 masses)

    def stop_in_second_chunk(done: int, total: int | None, unit: str) -> None:
        if done > 2 * 2048:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        simulate(meta, t, replicas=2, seed=3, mass=100, location=tmp_path / "k.zarr",
                 progress=stop_in_second_chunk)  # fmt: skip
    run = open_run(tmp_path / "k.zarr")
    assert not run.complete
    assert run.n_snapshots == 2048 and run.n_replicas == 2  # the committed first chunk
    assert np.all(run.read(1).sum(axis=1) == 100)


def test_progress_reaches_the_total() -> None:
    seen: list[tuple[int, int]] = []
    simulate(_meta(ZRP, [8]), [0.0, 1.0, 2.0], replicas=3, seed=0, mass=4,
             progress=lambda d, n, _u: seen.append((d, n)))  # fmt: skip
    assert seen[-1] == (9, 9) and [d for d, _ in seen] == sorted(d for d, _ in seen)


def test_initial_conditions() -> None:
    meta = _meta(ZRP, [5])
    first = {k: simulate(meta, [0.0], replicas=1, seed=0, mass=13, initial=k)[0, 0]
             for k in ("uniform", "condensed")}  # fmt: skip
    assert first["uniform"].tolist() == [3, 3, 2, 3, 2]  # remainder on sites 0, 1, 3
    assert first["condensed"].tolist() == [13, 0, 0, 0, 0]
    # random: each unit on a uniformly random site, so one site holds Binomial(M, 1/N)
    # (scipy.stats.binom), chi-square over independent replicas
    x = simulate(_meta(ZRP, [10]), [0.0], replicas=3000, seed=4, mass=12, initial="random")
    assert np.all(x.sum(axis=2) == 12)
    law = stats.binom(12, 0.1).pmf(np.arange(13))
    assert chisquare_merged(np.bincount(x[:, 0, 3], minlength=13), law) > 1e-3


def test_steady_state_start_in_2d_with_walls_is_canonical() -> None:
    meta = _meta(ZRP, [4, 5], ["reflecting", "periodic"])
    x = simulate(meta, [0.0], replicas=2000, seed=8, mass=30, initial="steady-state")
    law = canonical_site_law(meta.model, 20, 30)  # Evans and Hanney 2005, any geometry
    assert chisquare_merged(np.bincount(x[:, 0, 2, 3], minlength=31), law) > 1e-3


def test_exact_samples_are_independent_canonical_snapshots(tmp_path: Path) -> None:
    meta = _meta({**ZRP, "drift": "asymmetric"}, [30])
    t = snapshot_times(1.0, 500)
    run = simulate(meta, t, replicas=4, seed=2, mass=40, exact=True, location=tmp_path / "e.zarr")
    assert run.meta.run.initial.kind == "steady-state"
    x = np.stack([run.read(r) for r in range(4)])
    assert np.all(x.sum(axis=2) == 40)
    law = canonical_site_law(meta.model, 30, 40)
    assert chisquare_merged(np.bincount(x[:, :, 7].ravel(), minlength=41), law) > 1e-3
    alone = simulate(meta, t, replicas=1, seeds=[run.meta.run.seeds[3]], mass=40, exact=True)
    assert np.array_equal(alone[0], x[3])


class _ScriptedGenerator:
    """Stands in for numpy's Generator: hands out fixed Poisson counts, site picks and uniforms."""

    def __init__(self, counts: list[int], picks: list[int], unif: list[float]) -> None:
        self.counts, self.picks, self.unif = list(counts), list(picks), list(unif)

    def poisson(self, lam: np.ndarray) -> np.ndarray:
        out, self.counts = self.counts[: len(lam)], self.counts[len(lam) :]
        return np.array(out, dtype=np.int64)

    def integers(self, low: int, high: int, size: int, dtype: Any) -> np.ndarray:
        out, self.picks = self.picks[:size], self.picks[size:]
        return np.array(out, dtype=dtype)

    def random(self, size: int) -> np.ndarray:
        out, self.unif = self.unif[:size], self.unif[size:]
        return np.array(out, dtype=np.float64)


@pytest.mark.parametrize("batch", [1, 2, 3, 1 << 16])
def test_batches_do_not_change_when_snapshots_are_taken(
    batch: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # worked example by hand: one particle on a ring of 3, u = 1 = r_max, always to +1;
    # attempts at sites 0, 0 | (none) | 1, 2, 2 for the steps to t = 1, 2, 3
    monkeypatch.setattr(dynamics, "BATCH", batch)
    meta = _meta({"family": "zrp", "rate": 1.0, "drift": "asymmetric"}, [3])
    rng = _ScriptedGenerator([0, 2, 0, 3], [0, 0, 1, 2, 2], [0.5] * 5)
    rep = dynamics.Replica(dynamics.Dynamics.from_meta(meta, 1), np.array([1, 0, 0]), rng)
    out = np.full((4, 3), -1, dtype=np.int64)
    rep.advance(np.array([0.0, 1.0, 1.0, 1.0]), out)
    assert out.tolist() == [[1, 0, 0], [0, 1, 0], [0, 1, 0], [1, 0, 0]]
    assert rep.attempts == 5


BAD_METADATA = [
    (_meta(ZRP, [10], "open"), {}, "lattice.open: expected injection and extraction rates"),
    (_meta(ZRP, [4, 4], ["periodic", "open"]), {}, "lattice.open: expected injection"),
    (parse_metadata({"model": {"family": "custom", "description": "own rules"},
                     "lattice": {"sites": [4], "boundary": "periodic"},
                     "run": {"regime": "transient"}}), {}, "expected zrp or cmam"),
    (_meta({**ZRP, "drift": "asymmetric"}, [10], "reflecting"), {"initial": "steady-state"},
     "expected periodic axes for a steady-state start"),
    (_meta(CMAM, [10]), {"exact": True}, "expected zrp for an exact steady state; got cmam"),
]  # fmt: skip


@pytest.mark.parametrize(("meta", "kwargs", "message"), BAD_METADATA)
def test_unusable_metadata_is_refused_before_anything_is_written(
    meta: RunMeta, kwargs: dict, message: str, tmp_path: Path
) -> None:
    with pytest.raises(MetadataError, match=message):
        simulate(meta, [0.0, 1.0], replicas=1, seed=0, mass=4, location=tmp_path / "x.zarr",
                 **kwargs)  # fmt: skip
    assert not (tmp_path / "x.zarr").exists()


BAD_ARGUMENTS = [
    ({"times": [0.0, 2.0, 1.0]}, r"times\[2\]: expected a time after the previous 2.0; got 1.0"),
    ({"times": [-1.0, 1.0]}, r"times\[0\]: expected a finite time >= 0; got -1.0"),
    ({"times": []}, "expected a non-empty 1D array"),
    ({"mass": None}, "expected a total mass"),
    ({"mass": -3}, "mass: expected an integer >= 0; got -3"),
    ({"replicas": 0}, "replicas: expected an integer >= 1; got 0"),
    ({"seed": -1}, "seed: expected an integer >= 0; got -1"),
    ({"seeds": [1, 2]}, "seeds: expected 1 integers"),
    ({"initial": "heaped"}, "initial: expected one of random, uniform, condensed, steady-state"),
]


@pytest.mark.parametrize(("change", "message"), BAD_ARGUMENTS)
def test_bad_arguments_say_what_was_expected(change: dict, message: str) -> None:
    args: dict[str, Any] = {"times": [0.0, 1.0], "replicas": 1, "seed": 0, "mass": 4, **change}
    with pytest.raises(SamplerError, match=message):
        simulate(_meta(ZRP, [4]), **args)


def test_the_pure_path_can_be_forced(monkeypatch: pytest.MonkeyPatch) -> None:
    from massarc.simulate import kernels

    monkeypatch.setenv("MASSARC_PURE", "1")
    assert kernels.use_pure() and kernels.event_loop() is kernels.event_loop_py
    assert kernels.use_pure(True)
    monkeypatch.delenv("MASSARC_PURE")
    assert kernels.use_pure() is not kernels.HAVE_NUMBA
    if not kernels.HAVE_NUMBA:
        with pytest.raises(ImportError, match="expected numba"):
            kernels.use_pure(False)
