"""The ``boundary`` check: do the declared boundaries agree with the data?

From snapshots (statistical; :mod:`.seam`). Along every axis
of at least 8 sites, the seam pair (last site, site 0) is compared with interior bonds and
with distant site pairs through the correlation of their sign increments between
consecutive snapshots (the ``increments`` statistic):

* periodic axis, H0 "the seam is a bond" (on a ring the seam is a translate of every
  bond): fail when the seam correlation lies above the interior-bond correlations, or the
  activity step across the seam is unlike the steps across bonds; one-sided and
  two-sided prediction t-tests, Bonferroni-combined, p < ``alpha``;
* reflecting or open axis, H0 "the seam is not a bond": fail when the seam correlation
  lies below the distant-pair correlations (one-sided prediction t-test, with the seam's
  own batch-means variance when it is larger), p < ``alpha``.

Under H0 a clean run fails with probability about ``alpha`` per axis. When bonds and
distant pairs are too close for a seam of the other kind to be caught (snapshots too far
apart to resolve single moves, or hardly any motion), the axis cannot be judged and the
check warns, reporting the measured interior-bond correlation.

From the event log (exact; :mod:`.events`). When the run
archives an ``events`` group, every move must join declared neighbours; the first that
does not is reported (index, replica, time, source, target) and the check fails. A clean
log settles axes the snapshots could not resolve.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

from massarc.schema.spec import mass_dimensions

from ...engine.registry import Check, CheckContext, Option
from ...engine.result import CheckResult
from .events import EventAudit, audit_events
from .increments import MIN_LENGTH, IncrementStatistic, IncrementStats
from .seam import SeamTest, seam_test

__all__ = ["BoundaryCheck"]


def _axis_name(axis: int, ndim: int) -> str:
    return mass_dimensions(ndim)[2 + axis]


def _fmt(x: float) -> str:
    return f"{x:.3g}" if math.isfinite(x) else "nan"


class BoundaryCheck(Check):
    """Declared boundaries against the data: seam test per axis, exact event audit."""

    id = "boundary"
    description = "declared boundaries agree with the data (seam correlations, event log)"
    needs: ClassVar = {"increments": {}}
    provides: ClassVar = (IncrementStatistic,)
    options: ClassVar = {
        "alpha": Option(1e-4, float, "false-alarm rate of the seam test, per axis"),
        "margin": Option(
            2.0,
            float,
            "an axis is judged only when a seam of the other kind would be caught even this "
            "many standard deviations short of its mean",
        ),
    }

    def run(self, ctx: CheckContext) -> CheckResult:
        meta = ctx.meta
        if meta is None:
            return self.result("skip", "no valid metadata: the declared boundaries are unknown")
        lattice = meta.lattice
        alpha = float(ctx.options["alpha"])
        margin = float(ctx.options["margin"])
        thresholds = {"alpha": alpha, "margin": margin}
        ndim = lattice.ndim

        audit = None
        if ctx.run.events is not None:
            audit = audit_events(ctx.run.events, lattice, ctx.run.n_replicas)
            bad = self._bad_events(audit, thresholds)
            if bad is not None:
                return bad

        inc: IncrementStats | None = ctx.stats.get("increments")
        initial = meta.run.initial.kind if meta.run.initial is not None else None
        tests: list[SeamTest] = []
        notes: list[str] = []
        for axis, kind in enumerate(lattice.boundary):
            name = _axis_name(axis, ndim)
            data = inc.axes[axis] if inc is not None and axis < len(inc.axes) else None
            if data is None:
                notes.append(f"axis {name} has fewer than {MIN_LENGTH} sites: not tested")
                continue
            tests.append(
                seam_test(data, kind, alpha=alpha, margin=margin, activity=initial != "condensed")
            )
        if initial == "condensed" and "periodic" in lattice.boundary:
            notes.append("condensed start: activity steps not compared")

        values: dict[str, Any] = {"axes": [t.values() for t in tests]}
        if audit is not None:
            values["events"] = audit.events
        finite = [t.p_value for t in tests if math.isfinite(t.p_value)]
        values["p_value"] = min(finite) if finite else None
        suffix = f" ({'; '.join(notes)})" if notes else ""

        failed = [t for t in tests if math.isfinite(t.p_value) and t.p_value < alpha]
        if failed:
            t = min(failed, key=lambda x: x.p_value)
            return self.result(
                "fail",
                _failure(t, ndim) + suffix,
                values=values,
                thresholds=thresholds,
            )
        logged = f"all {audit.events} logged moves join declared neighbours" if audit else ""
        coarse = [t for t in tests if not t.resolved]
        if not tests or (coarse and audit is not None):
            status = "pass" if audit is not None else "skip"
            text = logged or "no axis long enough to test"
            return self.result(status, text + suffix, values=values, thresholds=thresholds)
        if coarse:
            parts = [
                f"axis {_axis_name(t.axis, ndim)}: interior-bond correlation "
                f"{_fmt(t.bond_mean)}, distant pairs {_fmt(t.far_mean)}, separation "
                f"{_fmt(t.separation)}"
                for t in coarse
            ]
            return self.result(
                "warn",
                "snapshots too far apart (or too few moves) to tell walls from a ring: "
                + "; ".join(parts)
                + suffix,
                values=values,
                thresholds=thresholds,
            )
        summary = ", ".join(
            f"{_axis_name(t.axis, ndim)} {t.boundary} (p = {t.p_value:.2g})" for t in tests
        )
        text = f"seams agree with the declared boundaries: {summary}"
        if logged:
            text += f"; {logged}"
        return self.result("pass", text + suffix, values=values, thresholds=thresholds)

    def _bad_events(self, audit: EventAudit, thresholds: dict[str, Any]) -> CheckResult | None:
        """A ``fail`` for a malformed log or a move between non-neighbours, else None."""
        if audit.problem is not None:
            return self.result("fail", audit.problem, thresholds=thresholds)
        e = audit.bad
        if e is None:
            return None
        return self.result(
            "fail",
            f"event {e.index} (replica {e.replica}, time {e.time:g}) moves mass from site "
            f"{e.source} to site {e.target}: {e.reason}; {audit.n_bad} of {audit.events} "
            "events are bad",
            values={
                "event": e.index,
                "replica": e.replica,
                "time": e.time,
                "source": e.source,
                "target": e.target,
                "bad_events": audit.n_bad,
                "events": audit.events,
            },
            thresholds=thresholds,
            where={"replica": e.replica, "site": [e.source, e.target]},
        )


def _failure(t: SeamTest, ndim: int) -> str:
    name = _axis_name(t.axis, ndim)
    head = f"axis {name} is declared {t.boundary} but"
    if t.boundary != "periodic":
        return (
            f"{head} its seam behaves like a bond (a ring?): seam correlation {_fmt(t.seam)}, "
            f"distant pairs {_fmt(t.far_mean)} +- {_fmt(t.far_sd)}, interior bonds "
            f"{_fmt(t.bond_mean)}; p = {t.p_value:.2g}"
        )
    if t.cause == "correlation":
        return (
            f"{head} its seam does not behave like a bond (walls?): seam correlation "
            f"{_fmt(t.seam)}, interior bonds {_fmt(t.bond_mean)} +- {_fmt(t.bond_sd)}; "
            f"p = {t.p_value:.2g}"
        )
    return (
        f"{head} the sites at its ends change unlike interior sites (walls?); p = {t.p_value:.2g}"
    )
