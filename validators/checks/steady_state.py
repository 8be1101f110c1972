"""The ``steady-state`` check: is a run labelled stationary stationary, and from when?

Observables: per snapshot the largest mass, the sum of m^2 and the number of occupied
sites, over all replicas. The analysis is
:func:`massarc.validators.analysis.window.stationary_window`
(its docstring gives every definition); this module turns it into a verdict.

Null hypothesis (``run.regime = "stationary"``): from the detected start on, every
replica is a stationary series and the replicas are independent copies.

Statistics and calibration.

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
  ``relaxing_rhat``; from a start not declared far from the steady state, a reliable
  whole-run trend |z| >= ``drift_z`` as well). The relaxation time carries the physics a
  short window cannot: coarsening, l(t) ~ t^(1/z), is not over before t ~ L^z, and while
  it goes on independent replicas sit at different stages (R-hat well above 1).
* Certification (Vehtari et al., Bayesian Analysis 16, 667, 2021): rank-normalised split
  R-hat <= ``rhat_max`` (1.01) and bulk and tail ESS >= ``min_ess_per_chain`` (100) per
  replica, for every observable.

Verdicts. fail: drifting or still relaxing. warn: no drift, but the evidence is too thin
to certify (few effective samples or R-hat above its threshold: in the condensed ZRP the
condensate relocates slowly, Godreche and Luck, J. Phys. A 38, 7215, 2005, so long
autocorrelation times are expected and are not a fault), or the run is shorter than
``short_ratio`` x L^z from a start not declared to be the steady state. pass otherwise.
Custom models have no relaxation time: they are judged from the data alone.

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
    """Stationarity of a run: detected start, drift, R-hat, ESS, run length versus L^z."""

    id = "steady-state"
    description = "the run is stationary as labelled (drift, R-hat, ESS, relaxation time)"
    needs: ClassVar = {"snapshots": {}}
    options: ClassVar = {
        "rhat_max": Option(_DEFAULTS.rhat_max, float, "certify only with R-hat at most this"),
        "min_ess_per_chain": Option(
            _DEFAULTS.min_ess_per_chain,
            float,
            "certify only with bulk and tail ESS of at least this per replica",
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
    }

    def run(self, ctx: CheckContext) -> CheckResult:
        opts = ctx.options
        window = stationary_window(ctx, WindowSettings.from_options(opts))
        values = _values(window)
        thresholds = {k: opts[k] for k in self.options}
        thresholds["min_ess"] = opts["min_ess_per_chain"] * window.replicas
        where = {"snapshot": window.start} if window.start is not None else None
        regime = ctx.meta.run.regime if ctx.meta is not None else "stationary"
        if window.start is None:
            return self.result(
                "warn", f"cannot judge stationarity: {window.reason}",
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
        "replicas": w.replicas,
        "efficiency": w.efficiency if math.isfinite(w.efficiency) else None,
        "stride": w.stride,
        "certified": w.certified,
        "drifting": w.drifting,
        "relaxing": w.relaxing,
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
    live = [o for o in w.observables.values() if not o.constant]
    min_ess = opts["min_ess_per_chain"] * w.replicas
    low = min(live, key=lambda o: min(o.ess_bulk, o.ess_tail))
    high = max(live, key=lambda o: o.rhat)
    parts = []
    if min(low.ess_bulk, low.ess_tail) < min_ess:
        ess = min(low.ess_bulk, low.ess_tail)
        parts.append(f"{OBSERVABLES[low.name]} ESS {ess:.0f} < {min_ess:.0f}")
    if high.rhat > opts["rhat_max"]:
        parts.append(f"{OBSERVABLES[high.name]} R-hat {high.rhat:.4g} > {opts['rhat_max']}")
    return ", ".join(parts)


def _condensed(ctx: CheckContext) -> bool:
    meta = ctx.meta
    if meta is None or not isinstance(meta.model, ZRPModel):
        return False
    rho_c = critical_density(meta.model)
    rho = meta.run.density
    if rho is None and meta.run.total_mass is not None:
        rho = meta.run.total_mass / meta.lattice.volume
    return rho_c is not None and rho is not None and rho > rho_c


def _stationary(w: Window, ctx: CheckContext, opts: Mapping[str, Any]) -> tuple[str, str]:
    at = f"snapshot {w.start} (t = {w.time:.6g})"
    if w.drifting:
        return "fail", f"still drifting: {w.reason}, window from {at}; {_summary(w)}"
    if w.relaxing:
        return "fail", f"still relaxing: {w.reason}; {_summary(w)}"
    head = "stationary from the start" if w.start == 0 else f"stationary from {at}"
    notes = []
    status = "pass"
    if not w.certified:
        status = "warn"
        note = f"too few effective samples to certify ({_thin(w, opts)})"
        if _condensed(ctx):
            note += "; a slowly relocating condensate makes long correlation times expected"
        notes.append(note)
    short = w.ratio is not None and w.ratio < opts["short_ratio"]
    if short and w.initial not in EXACT_STARTS:
        status = "warn"
        span = f"the run spans only {w.ratio:.3g} of the relaxation time {w.relaxation_time:.3g}"
        if w.initial in FAR_STARTS:
            notes.append(f"{span} from a {w.initial} start: slower modes may not have relaxed")
        else:
            notes.append(f"{span}; it may have started in the steady state, not declared")
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
            f"(t = {w.time:.6g}): {_summary(w)}"
        )
    return "pass", f"transient as declared; no drift resolved ({_thin(w, opts)})"
