"""Snapshot times, and the one-seed-per-replica rule."""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

from .errors import SamplerError

__all__ = ["check_times", "replica_seeds", "snapshot_times"]


def snapshot_times(
    t_max: float,
    n: int,
    spacing: Literal["linear", "log"] = "linear",
    t_first: float | None = None,
) -> np.ndarray:
    """``n`` strictly increasing snapshot times ending at ``t_max``.

    ``linear``: evenly spaced from ``t_first`` (default 0, so that the first snapshot is the
    initial condition) to ``t_max``; needs ``n >= 2`` unless ``n == 1`` (then ``[t_max]``).
    ``log``: geometric from ``t_first`` (default ``min(1, t_max / n)``; it must be > 0) to
    ``t_max``; the initial condition at t = 0 is then not a snapshot.

    >>> snapshot_times(4.0, 5).tolist()
    [0.0, 1.0, 2.0, 3.0, 4.0]
    >>> snapshot_times(100.0, 3, "log").tolist()
    [1.0, 10.0, 100.0]
    """
    if not (isinstance(t_max, int | float) and math.isfinite(t_max) and t_max > 0):
        raise SamplerError(f"t_max: expected a finite time > 0; got {t_max!r}")
    if not isinstance(n, int) or n < 1:
        raise SamplerError(f"snapshots: expected an integer >= 1; got {n!r}")
    if spacing == "linear":
        start = 0.0 if t_first is None else float(t_first)
        if not 0.0 <= start < t_max:
            raise SamplerError(f"t_first: expected 0 <= t_first < t_max = {t_max}; got {start}")
        out = np.linspace(start, t_max, n) if n > 1 else np.array([float(t_max)])
    elif spacing == "log":
        start = min(1.0, t_max / n) if t_first is None else float(t_first)
        if not 0.0 < start < t_max and n > 1:
            raise SamplerError(
                f"t_first: expected 0 < t_first < t_max = {t_max} for log spacing; got {start}"
            )
        out = np.geomspace(start, t_max, n) if n > 1 else np.array([float(t_max)])
    else:
        raise SamplerError(f"spacing: expected linear or log; got {spacing!r}")
    out[-1] = t_max
    check_times(out)
    return out


def check_times(times: np.ndarray) -> np.ndarray:
    """Return ``times`` as float64 after checking: 1D, non-empty, finite, >= 0, increasing."""
    t = np.asarray(times, dtype=np.float64)
    if t.ndim != 1 or t.size == 0:
        raise SamplerError(f"times: expected a non-empty 1D array; got shape {list(t.shape)}")
    bad = ~np.isfinite(t) | (t < 0)
    if bad.any():
        i = int(np.argmax(bad))
        raise SamplerError(f"times[{i}]: expected a finite time >= 0; got {t[i]}")
    steps = np.diff(t)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        raise SamplerError(f"times[{i}]: expected a time after the previous {t[i - 1]}; got {t[i]}")
    return t


def replica_seeds(seed: int | None, replicas: int) -> list[int]:
    """One 63-bit seed per replica, derived from the master ``seed`` by
    :class:`numpy.random.SeedSequence`. Replica ``r`` is reproduced alone by
    ``numpy.random.default_rng(seeds[r])``; more replicas keep the earlier seeds.

    ``seed=None`` draws a fresh master seed from the operating system.

    >>> replica_seeds(7, 2) == replica_seeds(7, 3)[:2]
    True
    """
    if not isinstance(replicas, int) or replicas < 1:
        raise SamplerError(f"replicas: expected an integer >= 1; got {replicas!r}")
    if seed is not None and (not isinstance(seed, int) or seed < 0):
        raise SamplerError(f"seed: expected an integer >= 0; got {seed!r}")
    words = np.random.SeedSequence(seed).generate_state(replicas, dtype=np.uint64)
    return [int(w >> np.uint64(1)) for w in words]
