"""Runs of the reference dynamics reduced on the fly to the ``snapshots`` statistic.

The ``steady-state`` check reads only per-snapshot reductions, so the calibration studies
simulate each replica in stretches of snapshots and keep, per snapshot, exactly what the
``snapshots`` statistic would (total, largest mass, sum of m^2, occupied sites): long
runs at a fine snapshot spacing then cost no memory, and one run observed every 10 hop
times also gives the same run observed every 100 and 1000 (every 10th, 100th snapshot).
``tests/test_steady_state_model.py`` checks these reductions against the archive scan.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import SimpleNamespace
from typing import Any

import numpy as np

from massarc.archive.stats import SnapshotStats
from massarc.schema import CMAMModel, RunMeta, ZRPModel, parse_metadata
from massarc.simulate import replica_seeds
from massarc.simulate.dynamics import Dynamics, Replica
from massarc.simulate.exact import SteadyStateSampler
from massarc.simulate.initial import initial_masses
from massarc.validators import CheckContext

__all__ = ["Reduced", "context", "hop_time", "make_meta", "simulate_reduced"]

#: Snapshots simulated per stretch (bounds the memory: stretch x sites int64).
STRETCH = 2048


def make_meta(
    family: str, sites: int, *, initial: str | None = None, regime: str = "stationary", **model: Any
) -> RunMeta:
    """Metadata of a 1D ring; ``initial`` is declared only when given."""
    run: dict[str, Any] = {"regime": regime}
    if initial is not None:
        run["initial"] = {"kind": initial}
    return parse_metadata(
        {
            "model": {"family": family, **model},
            "lattice": {"sites": [sites], "boundary": "periodic"},
            "run": run,
        }
    )


def hop_time(meta: RunMeta) -> float:
    """1/u(infinity) for the ZRP (u(k) = 1 + b/k: 1), 1/D for the CMAM."""
    model = meta.model
    if isinstance(model, CMAMModel):
        return 1.0 / model.diffusion
    assert isinstance(model, ZRPModel)
    if model.b is not None:
        return 1.0
    return 1.0 / (model.rate if model.rate is not None else (model.rates or [1.0])[-1])


@dataclass(frozen=True)
class Reduced:
    """Per (replica, snapshot): total, maximum, sum_sq, occupied; and the times."""

    times: np.ndarray
    total: np.ndarray
    maximum: np.ndarray
    sum_sq: np.ndarray
    occupied: np.ndarray

    def every(self, k: int) -> Reduced:
        """The same run observed at every k-th snapshot (from the first)."""
        return Reduced(*(a[..., ::k] for a in (self.times, self.total, self.maximum,
                                               self.sum_sq, self.occupied)))  # fmt: skip

    def head(self, n: int) -> Reduced:
        """The first n snapshots."""
        return Reduced(*(a[..., :n] for a in (self.times, self.total, self.maximum,
                                              self.sum_sq, self.occupied)))  # fmt: skip

    def stats(self) -> SnapshotStats:
        zero = np.zeros_like(self.total)
        return SnapshotStats(
            self.total, self.maximum, zero, self.sum_sq, self.occupied, zero,
            np.ones(self.total.shape, bool), None, 0, None, 0, None, 0,
        )  # fmt: skip


def simulate_reduced(
    meta: RunMeta,
    times: np.ndarray,
    *,
    replicas: int,
    seed: int,
    mass: int,
    initial: str,
    burn_in: float = 0.0,
) -> Reduced:
    """Simulate ``replicas`` replicas from ``initial``, run them for ``burn_in`` time units
    unobserved, then observe them at ``times`` (from the end of the burn-in)."""
    t = np.asarray(times, dtype=np.float64)
    dyn = Dynamics.from_meta(meta, mass)
    n = meta.lattice.volume
    sampler = None
    if initial == "steady-state":
        assert isinstance(meta.model, ZRPModel)
        sampler = SteadyStateSampler(meta.model, n, mass)
    shape = (replicas, len(t))
    out = {k: np.zeros(shape, np.int64) for k in ("total", "maximum", "occupied")}
    sum_sq = np.zeros(shape, np.float64)
    buf = np.empty((STRETCH, n), np.int64)
    for r, s in enumerate(replica_seeds(seed, replicas)):
        rng = np.random.default_rng(s)
        rep = Replica(dyn, initial_masses(initial, meta, mass, rng, sampler), rng)
        if burn_in > 0:
            rep.advance(np.array([burn_in]), buf[:1])
        for a in range(0, len(t), STRETCH):
            b = min(a + STRETCH, len(t))
            dts = np.diff(t[a:b], prepend=t[a - 1] if a else 0.0)
            rows = buf[: b - a]
            rep.advance(dts, rows)
            out["total"][r, a:b] = rows.sum(axis=1)
            out["maximum"][r, a:b] = rows.max(axis=1)
            out["occupied"][r, a:b] = np.count_nonzero(rows, axis=1)
            sum_sq[r, a:b] = np.einsum("ij,ij->i", rows, rows, dtype=np.float64)
    return Reduced(t, out["total"], out["maximum"], sum_sq, out["occupied"])


def context(meta: RunMeta | None, red: Reduced, options: dict[str, Any] | None = None) -> Any:
    """A CheckContext holding the reduced run (no archive behind it)."""
    run = SimpleNamespace(times=red.times)
    from massarc.validators.checks.steady_state import SteadyStateCheck

    merged = SteadyStateCheck.option_values(options or {})
    return CheckContext(run, meta, {"snapshots": red.stats()}, merged)  # type: ignore[arg-type]
