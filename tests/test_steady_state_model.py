"""The ``steady-state`` check on runs stored as groups store them: no declared start.

Outside truth: the exact canonical ZRP steady state (Evans and Hanney, J. Phys. A 38, R195,
2005) is stationary under the dynamics, so a run started from an exact sample is stationary
from its first snapshot, declared or not; a random start in the condensed phase coarsens,
l(t) ~ t^(1/z), until t ~ L^z (z = 3 symmetric ZRP, Godreche, J. Phys. A 36, 6313, 2003;
z = 2 driven ZRP and CMAM, Majumdar, Krishnamurthy and Barma, PRL 81, 3691, 1998), so a run
of 0.05 L^z from a random start is not stationary, whatever its metadata say.

Runs are written by the archive writer with metadata that declare no ``run.initial`` and
read back through the single pass, as ``massarc check`` reads them.
"""

from __future__ import annotations

import json
import re
import sys
import uuid
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from conftest import make_meta
from scipy.signal import lfilter

from massarc.archive import create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import SnapshotStatistic, SnapshotStats
from massarc.schema import RunMeta
from massarc.schema.laws import relaxation_time
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.steady_state import SteadyStateCheck

RHO = 2  # condensed: ZRP b = 4 (rho_c = 1/2), CMAM D = w (rho_c = 0.414)


def stored_run(meta: RunMeta, times: np.ndarray, seed: int, initial: str, shift: float = 0.0):
    """Simulate, then store with ``meta`` (no run.initial) the snapshots at ``times``; with
    ``shift``, the replicas first run ``shift`` time units unobserved (a burn-in) and the
    stored times start at 0."""
    sites = meta.lattice.volume
    t = np.concatenate([[0.0], shift + times]) if shift else times
    x = simulate(meta, t, replicas=4, seed=seed, mass=RHO * sites, initial=initial)
    x = np.asarray(x)[:, 1:] if shift else np.asarray(x)
    location = f"memory://model-{uuid.uuid4().hex}"
    with create_run(location, meta, strict=False) as w:
        w.append(np.asarray(times, dtype=float), x)
    run = open_run(location)
    assert run.meta is not None and run.meta.run.initial is None
    stats = scan(run, {"snapshots": SnapshotStatistic(run)}).results
    return SteadyStateCheck().run(
        CheckContext(run, run.meta, stats, SteadyStateCheck.option_values())
    )


def ring(family: str, sites: int, regime: str = "stationary", **model) -> RunMeta:
    return make_meta(family, sites=(sites,), regime=regime, **model)


# -- coarsening labelled stationary, no declared start: fail ------------------------------


@pytest.mark.parametrize("seed", [1, 2])
def test_driven_zrp_coarsening_without_declared_start_fails_on_the_exact_law(seed):
    meta = ring("zrp", 200, b=4.0, drift="asymmetric")
    times = np.arange(0.0, 0.05 * 200**2 + 1, 100.0)  # every 100 hop times, 21 snapshots
    res = stored_run(meta, times, seed, "random")
    assert res.status == "fail", res.message
    assert res.values["initial"] is None
    assert res.values["far_start"] and res.values["start_law"]["p_value"] < 1e-6
    assert "far from the steady state" in res.message
    assert "exact steady state of 200 sites holding 400 units" in res.message


@pytest.mark.parametrize("seed", [3, 4])
def test_cmam_coarsening_without_declared_start_fails_on_the_condensate(seed):
    # the case users met: L = 200, a snapshot every 100 hop times, stopped at 0.05 L^2 / D
    meta = ring("cmam", 200, diffusion=1.0, chipping=1.0)
    times = np.arange(0.0, 0.05 * 200**2 + 1, 100.0)
    res = stored_run(meta, times, seed, "random")
    assert res.status == "fail", res.message
    assert res.message.startswith("still relaxing")
    assert res.values["far_start"] and "condensate of about" in res.message


@pytest.mark.parametrize("seed", [5, 6])
def test_symmetric_zrp_coarsening_without_declared_start_fails(seed):
    meta = ring("zrp", 64, b=4.0)
    times = np.arange(0.0, 0.01 * 64**3 + 1, 10.0)
    res = stored_run(meta, times, seed, "random")
    assert res.status == "fail", res.message


# -- honest runs, no declared start: never fail -------------------------------------------


def test_short_exact_start_run_is_not_warned_for_its_length():
    # stationary from its first snapshot; the exact law finds the start in the steady
    # state, so a run of 0.05 L^2 is no reason to warn
    meta = ring("zrp", 200, b=4.0, drift="asymmetric")
    times = np.arange(0.0, 0.05 * 200**2 + 1, 10.0)
    res = stored_run(meta, times, 7, "steady-state")
    assert res.status in ("pass", "warn"), res.message
    assert not res.values["far_start"] and not res.values["far_late"]
    assert "spans only" not in res.message


def test_long_cmam_run_after_a_burn_in_passes():
    meta = ring("cmam", 48, diffusion=1.0, chipping=1.0)
    tau = relaxation_time(meta)
    times = np.arange(0.0, 20 * tau + 1, 10.0)
    res = stored_run(meta, times, 8, "random", shift=2 * tau)
    assert res.status == "pass", res.message
    assert res.values["certified"] and not res.values["far_start"]


def test_coarsening_declared_transient_passes():
    meta = ring("cmam", 200, regime="transient", diffusion=1.0, chipping=1.0)
    times = np.arange(0.0, 0.05 * 200**2 + 1, 100.0)
    res = stored_run(meta, times, 9, "random")
    assert res.status == "pass" and res.message.startswith("transient as declared")


# -- warnings say what would remove them ---------------------------------------------------


def _ar1_stats(seed: int, replicas: int, n: int, phi: float) -> SnapshotStats:
    e = np.random.default_rng(seed).standard_normal((3, replicas, n))
    e[..., 0] /= np.sqrt(1 - phi**2)
    x = lfilter([1.0], [1.0, -phi], e, axis=-1) * np.sqrt(1 - phi**2)
    zero = np.zeros((replicas, n), np.int64)
    return SnapshotStats(
        zero, 50 + 5 * x[0], zero, 4000 + 300 * x[1], 30 - 3 * x[2], zero,
        np.ones((replicas, n), bool), None, 0, None, 0, None, 0,
    )  # fmt: skip


def _judge(stats: SnapshotStats, meta: RunMeta | None, spacing: float = 1.0):
    n = stats.maximum.shape[1]
    run = SimpleNamespace(times=np.arange(n) * spacing)
    return SteadyStateCheck().run(
        CheckContext(run, meta, {"snapshots": stats}, SteadyStateCheck.option_values())  # type: ignore[arg-type]
    )


def test_following_the_advice_of_a_warning_certifies_the_run():
    # stationary AR(1), phi = 0.9 (g = 19, from memory): 4 x 1200 draws hold about 250
    # effective samples, short of the 400 needed, while R-hat is near 1
    custom = make_meta("custom")
    res = _judge(_ar1_stats(21, 4, 1200, 0.9), custom)
    assert res.status == "warn" and "too few effective samples" in res.message
    m = re.search(r"a window ([0-9.]+)x as long, or about (\d+) replicas instead of 4",
                  res.message)  # fmt: skip
    assert m, res.message
    factor, replicas = float(m.group(1)), int(m.group(2))
    plan = res.values["to_certify"]
    assert plan["replicas"] == replicas and not plan["lower_bound"]
    assert plan["window_factor"] == pytest.approx(factor, rel=1e-2)
    json.dumps(res.model_dump())  # report-ready values
    assert 1.1 < factor < 4.0 and replicas > 4
    assert "more time units" in res.message  # custom model: no relaxation time
    longer = _judge(_ar1_stats(22, 4, int(1.3 * factor * 1200), 0.9), custom)
    assert longer.status == "pass", longer.message
    wider = _judge(_ar1_stats(23, int(1.3 * replicas), 1200, 0.9), custom)
    assert wider.status == "pass", wider.message


def test_remedy_is_counted_in_relaxation_times_when_the_model_has_one():
    meta = ring("cmam", 10)  # relaxation time 100; totals are 0 here, so no model evidence
    res = _judge(_ar1_stats(24, 4, 1000, 0.95), meta, spacing=5.0)  # 50 relaxation times
    assert res.status == "warn"
    m = re.search(r"least ([0-9.e+]+) more relaxation times \(([0-9.e+]+) time units\), a",
                  res.message)  # fmt: skip
    assert m, res.message
    window = res.values["window_time"]
    factor = float(re.search(r"a window ([0-9.]+)x", res.message).group(1))
    # the advice is (factor - 1) windows, in units of L^2 / D = 100 (2 significant digits)
    assert float(m.group(1)) == pytest.approx((factor - 1) * window / 100.0, rel=0.06)


# -- the bench reduction is the archive's ------------------------------------------------


def test_bench_reduction_equals_the_snapshot_statistic():
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from bench._steady_runs import simulate_reduced  # the calibration's runs

    meta = ring("zrp", 40, b=4.0)
    times = np.arange(0.0, 500.0, 5.0)
    red = simulate_reduced(meta, times, replicas=3, seed=4, mass=80, initial="random")
    run = simulate(meta, times, replicas=3, seed=4, mass=80, initial="random",
                   location=f"memory://bench-{uuid.uuid4().hex}")  # fmt: skip
    stats = scan(run, {"snapshots": SnapshotStatistic(run)}).results["snapshots"]
    for field in ("total", "maximum", "sum_sq", "occupied"):
        np.testing.assert_array_equal(getattr(red, field), np.asarray(getattr(stats, field)))
