"""The stationary window of a run: where it starts, how much it holds, whether it drifts.

Computed once per run from the ``snapshots`` statistic and shared by the checks that need
it (``steady-state`` judges it, ``stationary-law`` tests the stationary law inside it)::

    window = stationary_window(ctx)
    if window.found:
        first = window.start              # snapshot index where the window begins
        factor = window.efficiency        # effective samples per (replica, snapshot) draw

Observables. Per snapshot, the largest mass (``maximum``), the sum of m^2 (``sum_sq``)
and the number of occupied sites (``occupied``): the first two grow during coarsening,
the last one falls, and all three are stationary in the steady state.

Start. The equilibration detector (Chodera 2016, :mod:`.diagnostics.equilibration`) is run
on the replica mean of each observable: a transient common to all replicas keeps its size
in the mean while the noise shrinks by sqrt(replicas), and for independent replicas the
mean has the same autocorrelation as each of them. Starts are searched in the first
``max_start_fraction`` of the run only (the detector's N_eff can peak by chance on a short
tail); series longer than ``detect_length`` snapshots are searched on block means
(the start is then known to a block). On a stationary run the N_eff curve is flat within
the noise of its g estimate, and its maximum falls anywhere in the first half, throwing
away effective samples for nothing; so the start kept is the earliest one whose N_eff is
within ``start_slack`` standard errors of the maximum (the standard error of g from
Sokal's window, var(tau_int) ~ 2 (2M + 1) tau_int^2 / n, Madras and Sokal, J. Stat. Phys.
50, 109, 1988, from memory; the "one standard error" choice of the simplest model within
the noise of the best is common practice). A transient makes N_eff fall far faster than
that noise, so its cut moves by little. The window starts at the latest start over the
observables.

Inside the window, per observable and over (replica, snapshot): Sokal's g and tau_int,
rank-normalised split R-hat, bulk and tail ESS (Vehtari et al. 2021), and the replica
trend test (:mod:`.diagnostics.trend`); over the whole run, the same trend test measures
the transient at the start.

Model evidence (:mod:`.snapshot_law`). For the ZRP (exact law of the largest mass) and
the condensed CMAM (condensate scale), the first snapshot and the latest admissible start
(``max_start_fraction`` of the run) are judged against the model's steady state. A first
snapshot far from it (for the CMAM: every replica below ``condensate_fraction`` of the
condensate, then growing ``condensate_growth``-fold by the end) is a far start whatever
the metadata declare (``far_start``); a latest admissible start far from it leaves no
stationary window of the admissible length (``far_late``).

Verdicts. ``drifting``: a reliable trend test in the window exceeds ``drift_z``.
``relaxing``: ``far_late`` with replicas that have not mixed (R-hat > ``relaxing_rhat``:
a run far from the declared law whose replicas agree is more likely a wrong declared
model, which ``stationary-law`` judges); or the run cannot have relaxed: it is shorter than
``relaxing_ratio`` times the model's relaxation time (``schema.laws.relaxation_time``),
it did not start in the steady state (declared, or for an undeclared start found in it by
the exact ZRP law), the window is not certified, and its replicas have not mixed (R-hat >
``relaxing_rhat``); from a start neither declared nor shown far from the steady state
(random, uniform, condensed, or ``far_start``) a reliable whole-run trend |z| >=
``drift_z`` is also required. ``certified``: every observable has R-hat <= ``rhat_max``
and bulk and tail ESS >= ``min_ess`` (over all replicas). ``found``: a
window of at least ``min_snapshots`` snapshots that is neither drifting nor relaxing.

Replicas with an unreadable snapshot are left out (``replicas`` counts those used).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from typing import Any

import numpy as np

from massarc.schema.laws import relaxation_time

from ..engine.registry import CheckContext
from .diagnostics import (
    SOKAL_C,
    detect_equilibration,
    ess_bulk,
    ess_tail,
    integrated_autocorr_time,
    rhat_rank,
    trend_test,
)
from .snapshot_law import ExactLargestMass, SnapshotLaw, law_method, snapshot_law

__all__ = ["OBSERVABLES", "ObservableWindow", "Window", "WindowSettings", "stationary_window"]

#: SnapshotStats fields used as observables, with their plain names.
OBSERVABLES = {"maximum": "largest mass", "sum_sq": "sum of m^2", "occupied": "occupied sites"}
#: Starts that are (or may be) an exact draw of the steady state.
EXACT_STARTS = ("steady-state", "previous-run")
#: Starts far from the steady state of a condensing system.
FAR_STARTS = ("random", "uniform", "condensed")


@dataclass(frozen=True)
class WindowSettings:
    """Thresholds of the window analysis (the ``steady-state`` check's options)."""

    max_start_fraction: float = 0.5
    min_snapshots: int = 8
    rhat_max: float = 1.05
    min_ess: float = 400.0
    drift_z: float = 5.0
    relaxing_ratio: float = 0.1
    relaxing_rhat: float = 1.1
    law_alpha: float = 1e-6
    condensate_fraction: float = 0.5
    condensate_growth: float = 2.0
    start_slack: float = 1.0
    sokal_c: float = SOKAL_C
    grid: int = 200
    detect_length: int = 4096
    diagnostic_length: int = 8192

    @classmethod
    def from_options(cls, options: Mapping[str, Any]) -> WindowSettings:
        """Settings from a check's options; keys that are not settings are ignored."""
        names = {f.name for f in fields(cls)}
        return cls(**{k: v for k, v in options.items() if k in names})


@dataclass(frozen=True)
class ObservableWindow:
    """Diagnostics of one observable. Times in the run's time units, lags in snapshots.

    ``start`` is this observable's detected start; the other fields are computed in the
    common window. ``drift_*`` is the trend test in the window, ``transient_*`` the one
    over the whole run. NaN where undefined (a constant observable has ``constant`` True).
    """

    name: str
    constant: bool
    start: int
    g: float
    tau_int: float
    tau_time: float
    ess_bulk: float
    ess_tail: float
    rhat: float
    drift_z: float
    drift_p: float
    drift_reliable: bool
    transient_z: float
    transient_reliable: bool

    def values(self) -> dict[str, Any]:
        """Plain numbers for a check result."""
        out: dict[str, Any] = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name != "name":
                out[f.name] = None if isinstance(v, float) and not math.isfinite(v) else v
        return out


@dataclass(frozen=True)
class Window:
    """The stationary window of a run (fields are a stable interface).

    Attributes
    ----------
    found
        True when a window free of drift was found (see the module docstring).
    start, time
        First snapshot of the window and its time; None when the run is too short to say.
    snapshots, replicas
        Window length in snapshots; number of replicas used.
    efficiency
        Effective-sample factor: the smallest bulk ESS / (replicas x snapshots) over the
        observables, in (0, ~1]; multiply a count of draws in the window by it.
    stride
        ceil of the largest g: keep every ``stride``-th snapshot for nearly independent draws.
    certified, drifting, relaxing
        Verdicts defined in the module docstring.
    run_time, relaxation_time, ratio
        Time since the start (the first snapshot time if it is negative), the model's
        relaxation time (None for custom models) and their ratio.
    initial
        Declared initial condition kind, or None.
    observables
        Per-observable diagnostics by SnapshotStats field name.
    reason
        One line on what decided ``found``.
    window_time
        Time spanned by the window (its last minus its first snapshot time).
    far_start, far_late
        Model evidence (module docstring): the run started far from the steady state; it
        is still far from it at the latest admissible start.
    start_law, late_law
        The model's judgement of the first snapshot and of the latest admissible start
        (None when no model evidence applies).
    """

    found: bool
    start: int | None
    time: float | None
    snapshots: int
    replicas: int
    efficiency: float
    stride: int
    certified: bool
    drifting: bool
    relaxing: bool
    run_time: float
    relaxation_time: float | None
    ratio: float | None
    initial: str | None
    observables: dict[str, ObservableWindow] = field(default_factory=dict)
    reason: str = ""
    window_time: float = float("nan")
    far_start: bool = False
    far_late: bool = False
    start_law: SnapshotLaw | None = None
    late_law: SnapshotLaw | None = None


def stationary_window(ctx: CheckContext, settings: WindowSettings | None = None) -> Window:
    """The run's stationary window, computed once per run and settings (``ctx.derived``)."""
    settings = settings or WindowSettings()
    key = "stationary-window"
    if settings != WindowSettings():
        key = f"stationary-window:{settings!r}"
    return ctx.derived(key, lambda c: compute_window(c.stats["snapshots"], c, settings))


def _elapsed(times: np.ndarray) -> float:
    if times.size == 0:
        return 0.0
    return float(times[-1] if times[0] >= 0 else times[-1] - times[0])


def _start(mean: np.ndarray, latest: int, settings: WindowSettings) -> int:
    """Detected start of one replica-mean series, searched on block means when it is long.

    A series longer than ``detect_length`` is cut into blocks of b snapshots (aligned on
    its end) whose means are searched: N_eff is nearly unchanged by blocking while blocks
    are shorter than the correlation time, and a start known to b snapshots is enough.
    The start kept is the earliest candidate within ``start_slack`` standard errors of the
    best N_eff (module docstring).
    """
    block = max(1, math.ceil(mean.size / settings.detect_length))
    skip = mean.size % block
    if block > 1:
        mean = mean[skip:].reshape(-1, block).mean(axis=1)
    eq = detect_equilibration(
        mean,
        c=settings.sokal_c,
        grid=settings.grid,
        full_resolution_max=settings.grid,
        max_start=max(0, (latest - skip) // block),
    )
    first = _earliest_within_noise(eq, mean.size, settings)
    return min(latest, skip + first * block) if block > 1 else first


def _earliest_within_noise(eq: Any, n: int, settings: WindowSettings) -> int:
    """The earliest candidate start whose N_eff is within ``start_slack`` standard errors of
    the maximum: N_eff = (n - t0 + 1) / g, and g = 2 tau_int has the relative standard
    error sqrt(2 (2M + 1) / n_tail) with Sokal's window M ~ c tau_int (Madras and Sokal
    1988, from memory)."""
    if settings.start_slack <= 0 or eq.start == 0:
        return int(eq.start)
    tail = n - eq.start
    window = settings.sokal_c * eq.g / 2.0
    rel = math.sqrt(2.0 * (2.0 * window + 1.0) / max(tail, 1))
    floor = eq.n_eff * (1.0 - settings.start_slack * rel)
    ok = np.flatnonzero(np.asarray(eq.n_eff_curve) >= floor)
    return int(eq.candidates[ok[0]]) if ok.size else int(eq.start)


def _blocked(y: np.ndarray, length: int) -> tuple[np.ndarray, int]:
    """Means of blocks of b snapshots (aligned on the end), so that at most ``length``
    points per replica remain; returns (series, b).

    Blocking keeps the information while blocks are shorter than the correlation time;
    longer blocks only lower the ESS (at most ``length`` per replica) and raise g (to at
    most b): the verdicts can only become more cautious, and the diagnostics of a run of
    millions of snapshots cost no more than those of ``length``.
    """
    b = max(1, math.ceil(y.shape[1] / length))
    if b == 1:
        return y, 1
    skip = y.shape[1] % b
    return y[:, skip:].reshape(y.shape[0], -1, b).mean(axis=2), b


def compute_window(stats: Any, ctx: CheckContext, settings: WindowSettings) -> Window:
    """The analysis behind :func:`stationary_window` (``stats``: a SnapshotStats)."""
    meta = ctx.meta
    times = np.asarray(ctx.run.times, dtype=np.float64)
    keep = np.asarray(stats.valid).all(axis=1)
    # the stored arrays themselves where every replica is readable (no copy); each is made
    # floating point in turn below, so that one copy of a (replica, snapshot) array lives
    series = {
        k: np.asarray(getattr(stats, k)) if keep.all() else np.asarray(getattr(stats, k))[keep]
        for k in OBSERVABLES
    }
    reps, n_snap = series["maximum"].shape
    tau_relax = relaxation_time(meta) if meta is not None else None
    run_time = _elapsed(times[:n_snap])
    ratio = run_time / tau_relax if tau_relax else None
    initial = meta.run.initial.kind if meta is not None and meta.run.initial else None
    common = {
        "replicas": reps,
        "run_time": run_time,
        "relaxation_time": tau_relax,
        "ratio": ratio,
        "initial": initial,
    }
    if reps == 0 or n_snap < 2 * settings.min_snapshots:
        why = "no replica with every snapshot readable" if reps == 0 else "too few snapshots"
        return Window(
            found=False, start=None, time=None, snapshots=0, efficiency=float("nan"),
            stride=1, certified=False, drifting=False, relaxing=False, **common,
            reason=f"{why} ({reps} replicas x {n_snap} snapshots)",
        )  # fmt: skip

    live = {k: y for k, y in series.items() if np.ptp(y) > 0}
    latest = int(settings.max_start_fraction * (n_snap - 1))
    latest = max(0, min(latest, n_snap - settings.min_snapshots))
    starts = {k: _start(y.mean(axis=0), latest, settings) for k, y in live.items()}
    start = max(starts.values(), default=0)
    n_win = n_snap - start
    span = times[n_snap - 1] - times[start]
    spacing = float(span / (n_win - 1)) if n_win > 1 else float("nan")
    obs: dict[str, ObservableWindow] = {}
    for k, y in series.items():
        y = np.asarray(y, dtype=np.float64)
        w = y[:, start:]
        if k not in live or np.ptp(w) == 0:  # constant over the run, or in the window
            nan = float("nan")
            obs[k] = ObservableWindow(
                k, True, starts.get(k, 0), nan, nan, nan, nan, nan, nan, 0.0, 1.0, False,
                0.0, False,
            )  # fmt: skip
            continue
        w, b = _blocked(w, settings.diagnostic_length)
        ac = integrated_autocorr_time(w, settings.sokal_c)
        drift = trend_test(w, settings.sokal_c)
        full = trend_test(_blocked(y, settings.diagnostic_length)[0], settings.sokal_c)
        obs[k] = ObservableWindow(
            k, False, starts[k], ac.g * b, ac.tau_int * b, ac.tau_int * b * spacing,
            ess_bulk(w), ess_tail(w), rhat_rank(w), drift.z, drift.p, drift.reliable,
            full.z, full.reliable,
        )  # fmt: skip
        y = w = None  # free the float copy before the next one is made
    total = np.asarray(stats.total, dtype=np.int64)
    total = total if keep.all() else total[keep]
    model = _model_evidence(meta, total, series["maximum"], times, latest, settings)
    common["window_time"] = float(span)
    return _judge(obs, start, float(times[start]), n_win, settings, common, model)


def _model_evidence(
    meta: Any,
    total: np.ndarray,
    largest: np.ndarray,
    times: np.ndarray,
    latest: int,
    s: WindowSettings,
) -> dict[str, Any]:
    """The model's judgement of the first snapshot and of the latest admissible start."""
    method, _ = law_method(meta)
    out: dict[str, Any] = {"start_law": None, "late_law": None, "far_start": False}
    if method is None:
        return out
    exact = ExactLargestMass(meta.model, meta.lattice.volume) if method == "exact" else None
    kw = {"alpha": s.law_alpha, "fraction": s.condensate_fraction, "exact": exact}
    first = snapshot_law(meta, total[:, 0], largest[:, 0], 0, float(times[0]), **kw)
    late = snapshot_law(
        meta, total[:, latest], largest[:, latest], latest, float(times[latest]), **kw
    )
    far = first is not None and first.far
    if far and first is not None and first.method == "condensate":  # ... that then grows
        far = bool(np.all(largest[:, -1] >= s.condensate_growth * np.maximum(largest[:, 0], 1)))
    return {"start_law": first, "late_law": late, "far_start": far}


def _judge(
    obs: dict[str, ObservableWindow],
    start: int,
    time: float,
    n_win: int,
    s: WindowSettings,
    common: dict[str, Any],
    model: dict[str, Any] | None = None,
) -> Window:
    model = model or {"start_law": None, "late_law": None, "far_start": False}
    reps = common["replicas"]
    live = [o for o in obs.values() if not o.constant]
    certified = all(
        o.rhat <= s.rhat_max and o.ess_bulk >= s.min_ess and o.ess_tail >= s.min_ess for o in live
    )
    drifts = [o for o in live if o.drift_reliable and abs(o.drift_z) >= s.drift_z]
    transient = max((abs(o.transient_z) for o in live), default=0.0)
    transient_sure = max((abs(o.transient_z) for o in live if o.transient_reliable), default=0.0)
    worst_rhat = max((o.rhat for o in live), default=1.0)
    initial, ratio = common["initial"], common["ratio"]
    far_start = bool(model["far_start"])
    far = initial in FAR_STARTS or far_start
    exact_start = initial in EXACT_STARTS and not far_start
    first_law = model["start_law"]
    # an undeclared start that the exact law finds in the steady state is judged as one:
    # a stationary run much shorter than its relaxation time has unmixed replicas and
    # slow wanders that look like trends (measured: 1 of 30 honest condensed ZRP rings,
    # L = 200, 300 snapshots 100 hop times apart, had R-hat 2.1 and a whole-run z of 5.9)
    law_start = (
        initial is None and first_law is not None and first_law.method == "exact"
        and not first_law.far
    )  # fmt: skip
    evidence = worst_rhat > s.relaxing_rhat
    if not far:
        evidence = evidence and transient_sure >= s.drift_z
    short_relaxing = (
        ratio is not None
        and ratio < s.relaxing_ratio
        and not exact_start
        and not law_start
        and not certified
        and evidence
    )
    late = model["late_law"]
    far_late = late is not None and late.far
    relaxing = short_relaxing or (far_late and worst_rhat > s.relaxing_rhat)
    efficiency = min((o.ess_bulk / (reps * n_win) for o in live), default=1.0)
    finite_g = [o.g for o in live if math.isfinite(o.g)]  # g is NaN for a flat window
    stride = max(1, math.ceil(max(finite_g, default=1.0)))
    first = first_law
    if far_start and initial not in FAR_STARTS and first is not None:
        started = f"a start far from the steady state ({first.describe()})"
    else:
        started = f"a {initial or 'undeclared'} start"
    if drifts:
        d = max(drifts, key=lambda o: abs(o.drift_z))
        reason = f"{OBSERVABLES[d.name]} drifts in the window (trend z = {d.drift_z:.1f})"
    elif relaxing and far_late:
        assert late is not None
        reason = (
            f"at the latest admissible start of a stationary window, snapshot "
            f"{late.snapshot} (t = {late.time:.6g}), the run is still far from the steady "
            f"state ({late.describe()}) and its replicas have not mixed (R-hat "
            f"{worst_rhat:.4g} > {s.relaxing_rhat})"
        )
    elif relaxing:
        reason = (
            f"the run spans {ratio:.3g} of the relaxation time from {started} and its "
            f"replicas have not mixed (R-hat {worst_rhat:.4g} > {s.relaxing_rhat}; "
            f"whole-run trend z {transient:.1f})"
        )
    elif not live:
        reason = "every observable is constant"
    else:
        reason = f"no drift from snapshot {start}"
    return Window(
        found=not drifts and not relaxing, start=start, time=time, snapshots=n_win,
        efficiency=float(efficiency), stride=stride, certified=certified,
        drifting=bool(drifts), relaxing=bool(relaxing), **common, observables=obs,
        reason=reason, far_start=far_start, far_late=far_late, start_law=first,
        late_law=late,
    )  # fmt: skip
