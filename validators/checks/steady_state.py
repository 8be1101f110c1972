"""The ``steady-state`` check: is a run labelled stationary stationary, and from when?

Observables: per snapshot the largest mass, the sum of m^2 and the number of occupied
sites, over all replicas. The analysis is
:func:`massarc.validators.analysis.window.stationary_window`
(its docstring gives every definition); this module turns it into a verdict.

Null hypothesis (``run.regime = "stationary"``): from the detected start on, every
replica is a stationary series and the replicas are independent copies.

Statistics and calibration.

* Model evidence (:mod:`..analysis.snapshot_law`). ZRP: H0 "this snapshot of every replica is a
  draw of the canonical steady state"; statistic: the largest mass of each replica, its
  two-sided exact p-value from P(max <= K) = Z_K(N, M) / Z(N, M), combined over replicas
  by Fisher's method; ``law_alpha`` = 1e-6. Condensed CMAM: every replica's largest mass
  below ``condensate_fraction`` of (rho - rho_c) N (a decision rule calibrated by
  simulation). Asked of the first snapshot (a far start, whatever is declared) and of the
  latest admissible window start (still far half-way through: fail).
* Drift in the window: the replica trend test (:mod:`..diagnostics.trend`), a least-squares
  slope per replica with an autocorrelation-corrected variance (Sokal's g of the
  residuals), combined by Stouffer's sum and guarded by the spread over replicas. Under
  the null it is standard normal when g is right and conservative otherwise; ``drift_z`` =
  5 (two-sided p ~ 6e-7 per observable) keeps false alarms negligible even when g is
  underestimated by a factor of a few. The test may fail a run only when it is reliable
  (windows longer than 50 g, or 10 g with at least 4 replicas: in thinner windows even the
  spread over replicas does not keep the far tail of the score calibrated).
* Still relaxing: a run shorter than ``relaxing_ratio`` x the relaxation time L^z
  (:func:`massarc.schema.laws.relaxation_time`) from a start other than the steady state,
  whose window is not certified and whose replicas have not mixed (R-hat >
  ``relaxing_rhat``; from a start neither declared nor shown far from the steady state, a
  reliable whole-run trend |z| >= ``drift_z`` as well). The relaxation time carries the
  physics a short window cannot: coarsening, l(t) ~ t^(1/z), is not over before t ~ L^z,
  and while it goes on independent replicas sit at different stages (R-hat well above 1).
* Certification: rank-normalised split R-hat <= ``rhat_max`` and bulk and tail ESS >=
  ``min_ess`` over all replicas, for every observable (Vehtari et al., Bayesian Analysis
  16, 667, 2021, for the diagnostics and the ESS of 400 = 100 per chain for four chains;
  R-hat < 1.05 with at least four chains is the threshold of rstan's ``Rhat``
  documentation: at 100 effective draws per replica the sampling noise of R-hat alone
  reaches 1.01, so the stricter 1.01 warns on honest runs; see docs/steady_state.md).

Verdicts. fail: drifting or still relaxing. warn: no drift, but the evidence is too thin
to certify, or the run is shorter than ``short_ratio`` x L^z from a start neither
declared to be the steady state nor shown to be in it by the exact ZRP law. pass
otherwise. Every warning says what would remove it, computed from the measurements: ESS
grows in proportion to the window's length and to the number of replicas, and
R-hat^2 - 1 ~ g / n falls in inverse proportion to the window's length (from memory: Vats
and Knudson, Statistical Science 36, 518, 2021, R-hat^2 ~ 1 + chains / ESS), so the
shortfall of the worst observable converts into more relaxation times (or time units for
custom models) and, for ESS alone, into replicas. Custom models have no relaxation time
and no law: they are judged from the data alone.

``run.regime = "transient"``: the same analysis is reported, never as a failure: pass when
the data show a transient (a whole-run trend |z| >= ``transient_z``, a drift or a
relaxation) or cannot say, warn when the run looks stationary and certified.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any, ClassVar

from massarc.schema import ZRPModel
from massarc.schema.laws import critical_density

from ..analysis.window import (
    EXACT_STARTS,
    FAR_STARTS,
    OBSERVABLES,
    Window,
    WindowSettings,
    stationary_window,
)
from ..engine.registry import Check, CheckContext, Option
from ..engine.result import CheckResult

__all__ = ["SteadyStateCheck"]

_DEFAULTS = WindowSettings()


class SteadyStateCheck(Check):
    """Stationarity of a run: detected start, drift, R-hat, ESS, model law, run length.

    Null hypothesis
    ---------------
    For a run labelled stationary (``run.regime = "stationary"``): from the detected start
    on, every replica is a stationary series and the replicas are independent copies of
    one process. Statistics, p-values and thresholds: the module docstring.

    Where
    -----
    ``snapshot``: the detected start of the stationary window, when one was found.
    """

    id = "steady-state"
    description = "the run is stationary as labelled (drift, R-hat, ESS, law, relaxation time)"
    needs: ClassVar = {"snapshots": {}}
    options: ClassVar = {
        "rhat_max": Option(_DEFAULTS.rhat_max, float, "certify only with R-hat at most this"),
        "min_ess": Option(
            _DEFAULTS.min_ess,
            float,
            "certify only with bulk and tail ESS of at least this, over all replicas",
        ),
        "drift_z": Option(_DEFAULTS.drift_z, float, "fail on a trend |z| of at least this"),
        "transient_z": Option(
            3.0, float, "a run declared transient shows one with a whole-run trend |z| this large"
        ),
        "relaxing_ratio": Option(
            _DEFAULTS.relaxing_ratio,
            float,
            "still relaxing: shorter than this fraction of the relaxation time L^z (and unmixed)",
        ),
        "relaxing_rhat": Option(
            _DEFAULTS.relaxing_rhat, float, "replicas count as unmixed above this R-hat"
        ),
        "short_ratio": Option(
            0.1, float, "warn on runs shorter than this fraction of the relaxation time"
        ),
        "max_start_fraction": Option(
            _DEFAULTS.max_start_fraction,
            float,
            "search the start of the stationary window in this first fraction of the run",
        ),
        "min_snapshots": Option(
            _DEFAULTS.min_snapshots, int, "shortest stationary window, in snapshots"
        ),
        "law_alpha": Option(
            _DEFAULTS.law_alpha,
            float,
            "a snapshot is far from the exact ZRP steady state below this combined p-value",
        ),
        "condensate_fraction": Option(
            _DEFAULTS.condensate_fraction,
            float,
            "condensed CMAM: far when every largest mass is below this fraction of (rho - rho_c) L",
        ),
        "condensate_growth": Option(
            _DEFAULTS.condensate_growth,
            float,
            "condensed CMAM: a far start also needs the largest mass to grow this many fold",
        ),
        "start_slack": Option(
            _DEFAULTS.start_slack,
            float,
            "the window starts at the earliest start within this many standard errors of the "
            "best effective sample size",
        ),
    }

    def run(self, ctx: CheckContext) -> CheckResult:
        opts = ctx.options
        window = stationary_window(ctx, WindowSettings.from_options(opts))
        values = _values(window)
        values["to_certify"] = certify_plan(window, opts) if window.start is not None else None
        thresholds = {k: opts[k] for k in self.options}
        where = {"snapshot": window.start} if window.start is not None else None
        regime = ctx.meta.run.regime if ctx.meta is not None else "stationary"
        if window.start is None:
            need = 2 * int(opts["min_snapshots"])
            return self.result(
                "warn",
                f"cannot judge stationarity: {window.reason}; at least {need} snapshots of "
                "one replica with every snapshot readable would allow it",
                values=values, thresholds=thresholds,
            )  # fmt: skip
        if regime == "transient":
            status, message = _transient(window, opts)
        else:
            status, message = _stationary(window, ctx, opts)
        if ctx.meta is None:
            message += "; no valid metadata: judged from the data alone"
        elif window.relaxation_time is None:
            message += "; no relaxation time for this model: judged from the data alone"
        return self.result(status, message, values=values, thresholds=thresholds, where=where)


def _values(w: Window) -> dict[str, Any]:
    return {
        "start": w.start,
        "start_time": w.time,
        "window_snapshots": w.snapshots,
        "window_time": w.window_time if math.isfinite(w.window_time) else None,
        "replicas": w.replicas,
        "efficiency": w.efficiency if math.isfinite(w.efficiency) else None,
        "stride": w.stride,
        "certified": w.certified,
        "drifting": w.drifting,
        "relaxing": w.relaxing,
        "far_start": w.far_start,
        "far_late": w.far_late,
        "start_law": w.start_law.values() if w.start_law is not None else None,
        "late_law": w.late_law.values() if w.late_law is not None else None,
        "run_time": w.run_time,
        "relaxation_time": w.relaxation_time,
        "run_over_relaxation": w.ratio,
        "initial": w.initial,
        "observables": {k: o.values() for k, o in w.observables.items()},
    }


def _summary(w: Window) -> str:
    live = [o for o in w.observables.values() if not o.constant]
    if not live:
        return "every observable is constant"
    ess = min(o.ess_bulk for o in live)
    rhat = max(o.rhat for o in live)
    drift = max(abs(o.drift_z) for o in live)
    tau = max(o.tau_int for o in live)
    return (
        f"bulk ESS {ess:.0f}, R-hat {rhat:.3g}, tau_int {tau:.3g} snapshots, |drift z| {drift:.2g}"
    )


def _thin(w: Window, opts: Mapping[str, Any]) -> str:
    """What keeps the window from being certified, with the measured numbers."""
    live = [o for o in w.observables.values() if not o.constant]
    low = min(live, key=lambda o: min(o.ess_bulk, o.ess_tail))
    high = max(live, key=lambda o: o.rhat)
    parts = []
    ess = min(low.ess_bulk, low.ess_tail)
    if ess < opts["min_ess"]:
        kind = "bulk" if low.ess_bulk <= low.ess_tail else "tail"
        parts.append(f"{OBSERVABLES[low.name]} {kind} ESS {ess:.0f} < {opts['min_ess']:g}")
    if high.rhat > opts["rhat_max"]:
        parts.append(f"{OBSERVABLES[high.name]} R-hat {high.rhat:.4g} > {opts['rhat_max']}")
    return ", ".join(parts)


def _time(w: Window, dt: float) -> str:
    """A duration in relaxation times when the model has one, else in time units."""
    if w.relaxation_time:
        return f"{dt / w.relaxation_time:.2g} more relaxation times ({dt:.3g} time units)"
    return f"{dt:.3g} more time units"


def certify_plan(w: Window, opts: Mapping[str, Any]) -> dict[str, Any] | None:
    """How much longer a run (or how many replicas) would certify the window.

    ESS is proportional to the window's length and to the number of replicas; R-hat^2 - 1
    is inversely proportional to the window's length (module docstring). The window is
    assumed to keep its start, so the run grows by (factor - 1) x the window's time. When
    the window holds fewer than 50 g of some observable its g is underestimated (common
    practice: emcee's ``tol``), so the figures are lower bounds (``lower_bound``). None
    when the window is certified or has no length.
    """
    live = [o for o in w.observables.values() if not o.constant]
    if w.certified or not live or not math.isfinite(w.window_time) or w.window_time <= 0:
        return None
    ess = min(min(o.ess_bulk, o.ess_tail) for o in live)
    rhat = max(o.rhat for o in live)
    ess_factor = opts["min_ess"] / max(ess, 1e-9)
    rhat_factor = (rhat**2 - 1.0) / (opts["rhat_max"] ** 2 - 1.0)
    factor = max(ess_factor, rhat_factor, 1.0)
    more = (factor - 1.0) * w.window_time
    plan: dict[str, Any] = {
        "window_factor": factor,
        "more_time": more,
        "more_relaxation_times": more / w.relaxation_time if w.relaxation_time else None,
        "replicas": None,
        "lower_bound": not all(w.snapshots >= 50.0 * o.g for o in live),
    }
    if rhat_factor <= 1.0 and ess_factor > 1.0:
        plan["replicas"] = math.ceil(w.replicas * ess_factor)
    return plan


def _remedy(w: Window, plan: dict[str, Any] | None) -> str:
    """The plan in words."""
    if plan is None or not math.isfinite(plan["window_factor"]):
        return "a longer run would be needed"
    size = "at least" if plan["lower_bound"] else "about"
    longer = f"{size} {_time(w, plan['more_time'])}, a window {plan['window_factor']:.3g}x as long,"
    if plan["replicas"] is not None:
        longer += f" or {size} {plan['replicas']} replicas instead of {w.replicas}"
    note = " (the window is shorter than 50 autocorrelation times)" if plan["lower_bound"] else ""
    return f"{longer} would certify it{note}"


def _condensed(ctx: CheckContext) -> bool:
    meta = ctx.meta
    if meta is None or not isinstance(meta.model, ZRPModel):
        return False
    rho_c = critical_density(meta.model)
    rho = meta.run.density
    if rho is None and meta.run.total_mass is not None:
        rho = meta.run.total_mass / meta.lattice.volume
    return rho_c is not None and rho is not None and rho > rho_c


def _start_in_law(w: Window) -> bool:
    """True when the exact ZRP law finds the first snapshot consistent with the steady state
    (the run may then be short: it starts where it should)."""
    law = w.start_law
    return law is not None and law.method == "exact" and not law.far


def _stationary(w: Window, ctx: CheckContext, opts: Mapping[str, Any]) -> tuple[str, str]:
    at = f"snapshot {w.start} (t = {w.time:.6g})"
    if w.drifting:
        return "fail", f"still drifting: {w.reason}, window from {at}; {_summary(w)}"
    if w.relaxing:
        return "fail", f"still relaxing: {w.reason}; {_summary(w)}"
    head = "stationary from the start" if w.start == 0 else f"stationary from {at}"
    notes = []
    status = "pass"
    if w.far_start and w.start_law is not None and w.initial not in FAR_STARTS:
        notes.append(f"it started far from the steady state ({w.start_law.describe()})")
    if w.far_late and w.late_law is not None:
        notes.append(
            f"at snapshot {w.late_law.snapshot} it is far from the declared model's steady "
            f"state ({w.late_law.describe()}) though its replicas agree: is the declared "
            "model the simulated one?"
        )
    if not w.certified:
        status = "warn"
        plan = certify_plan(w, opts)
        note = f"too few effective samples to certify ({_thin(w, opts)}): {_remedy(w, plan)}"
        if _condensed(ctx):
            note += "; a slowly relocating condensate makes long correlation times expected"
        notes.append(note)
    short = w.ratio is not None and w.ratio < opts["short_ratio"]
    exact_start = w.initial in EXACT_STARTS and not w.far_start
    if short and not exact_start and not (w.initial is None and _start_in_law(w)):
        assert w.relaxation_time is not None and w.ratio is not None
        status = "warn"
        span = f"the run spans only {w.ratio:.3g} of the relaxation time {w.relaxation_time:.3g}"
        more = _time(w, opts["short_ratio"] * w.relaxation_time - w.run_time)
        if w.initial in FAR_STARTS or w.far_start:
            start = w.initial if w.initial in FAR_STARTS else "far"
            notes.append(
                f"{span} from a {start} start: slower modes may not have relaxed; "
                f"about {more} would reach {opts['short_ratio']:g} of it"
            )
        else:
            notes.append(
                f"{span}; it may have started in the steady state, not declared: declaring "
                f"run.initial, or about {more}, would settle it"
            )
    return status, "; ".join([f"{head}: {_summary(w)}", *notes])


def _transient(w: Window, opts: Mapping[str, Any]) -> tuple[str, str]:
    live = [o for o in w.observables.values() if not o.constant]
    moving = max(live, key=lambda o: abs(o.transient_z), default=None)
    seen = moving is not None and abs(moving.transient_z) >= opts["transient_z"]
    if w.drifting or w.relaxing or seen:
        what = w.reason if (w.drifting or w.relaxing) else (
            f"{OBSERVABLES[moving.name]} trends over the run (z = {moving.transient_z:.1f})"
            if moving is not None else "a transient"
        )  # fmt: skip
        message = f"transient as declared: {what}"
        if w.found and w.certified and w.start:
            message += f"; stationary from snapshot {w.start} (t = {w.time:.6g})"
        elif not w.found:
            message += "; no stationary window"
        return "pass", message
    if w.certified:
        return "warn", (
            f"declared transient but looks stationary from snapshot {w.start} "
            f"(t = {w.time:.6g}): {_summary(w)}; declaring run.regime stationary would "
            "remove this"
        )
    return "pass", f"transient as declared; no drift resolved ({_thin(w, opts)})"
