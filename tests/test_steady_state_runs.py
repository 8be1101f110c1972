"""The ``steady-state`` check on runs from the reference samplers (massarc.simulate).

Outside truth: the exact canonical ZRP steady state (product measure, Evans and Hanney,
J. Phys. A 38, R195, 2005) is stationary under the dynamics, so a run started from an
exact sample is stationary from its first snapshot; a run from a random start in the
condensed phase coarsens, l(t) ~ t^(1/z), until t ~ L^z (z = 3 symmetric ZRP, Godreche,
J. Phys. A 36, 6313, 2003; z = 2 CMAM, Majumdar, Krishnamurthy and Barma, PRL 81, 3691,
1998), so a run much shorter than L^z from a random start is not stationary.

Runs are small (L = 32, 4 replicas, 300 snapshots); each takes a fraction of a second.
"""

from __future__ import annotations

import uuid

import numpy as np
import pytest

from massarc.archive.scan import scan
from massarc.archive.stats import SnapshotStatistic
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.analysis.window import stationary_window
from massarc.validators.checks.steady_state import SteadyStateCheck

L = 32
MASS = 64  # density 2: condensed for the ZRP b = 4 (rho_c = 1/2) and the CMAM D = w


def meta(family: str, regime: str = "stationary", **model) -> RunMeta:
    return parse_metadata(
        {
            "model": {"family": family, **model},
            "lattice": {"sites": [L], "boundary": "periodic"},
            "run": {"regime": regime},
        }
    )


def audit_one(m: RunMeta, times, seed: int, initial: str, exact: bool = False):
    run = simulate(
        m,
        times,
        replicas=4,
        seed=seed,
        mass=MASS,
        initial=initial,
        exact=exact,
        location=f"memory://steady-{uuid.uuid4().hex}",
    )
    stats = scan(run, {"snapshots": SnapshotStatistic(run)}).results
    ctx = CheckContext(run, run.meta, stats, SteadyStateCheck.option_values())
    return SteadyStateCheck().run(ctx), ctx


@pytest.mark.parametrize("seed", [1, 2])
def test_asymmetric_zrp_from_the_exact_steady_state_does_not_fail(seed):
    m = meta("zrp", b=4.0, drift="asymmetric")
    res, ctx = audit_one(m, np.linspace(0.0, 4.0 * L**2, 300), seed, "steady-state")
    assert res.status in ("pass", "warn"), res.message
    assert res.values["initial"] == "steady-state"
    assert res.values["run_over_relaxation"] == pytest.approx(4.0)
    window = stationary_window(ctx)
    assert window.found and window.start is not None and window.start <= 150


def test_independent_exact_samples_pass_from_the_start():
    m = meta("zrp", b=4.0)
    res, _ = audit_one(m, np.linspace(0.0, 100.0, 200), 3, "random", exact=True)
    assert res.status == "pass", res.message
    # independent snapshots: g close to 1 for every observable
    for obs in res.values["observables"].values():
        assert obs["g"] == pytest.approx(1.0, abs=0.4)


@pytest.mark.parametrize("seed", [4, 5, 6])
def test_symmetric_zrp_coarsening_labelled_stationary_fails(seed):
    m = meta("zrp", b=4.0)
    res, ctx = audit_one(m, np.linspace(0.0, 0.01 * L**3, 300), seed, "random")
    assert res.status == "fail", res.message
    assert not stationary_window(ctx).found


@pytest.mark.parametrize("seed", [7, 8])
def test_cmam_coarsening_labelled_stationary_fails(seed):
    m = meta("cmam", diffusion=1.0, chipping=1.0)
    res, _ = audit_one(m, np.linspace(0.0, 0.03 * L**2, 300), seed, "random")
    assert res.status == "fail", res.message


def test_coarsening_labelled_transient_passes():
    m = meta("zrp", regime="transient", b=4.0)
    res, _ = audit_one(m, np.linspace(0.0, 0.01 * L**3, 300), 9, "random")
    assert res.status == "pass", res.message
    assert res.message.startswith("transient as declared")
