"""The ``boundary`` check: do the declared boundaries agree with the data?

From snapshots (statistical; :mod:`.judge`, on the ``transfers`` statistic of
:mod:`.transfers`, which the check brings itself). Consecutive
snapshots give the net mass moved across every bond of an axis up to one constant per
snapshot pair: zero behind walls, the inflow increment at an open end, the unknown seam
transfer on a ring. Along every axis of at least 8 sites (in 2D, on the masses summed over
the other axis):

* periodic axis, H0 "the axis is a ring": the seam is a translate of evenly spaced cut
  bonds, so in each replica its rank among them, by how far its transfers stray from the
  cuts' mean (or, where most of the axis is frozen, by the density step across it), is
  uniform; fail when the seam ranks too low or too high in the replicas together (exact
  two-sided p-value of a sum of uniform ranks), as a wall does;
* reflecting or open axis, H0 "the reconstructed transfers are the true ones": two bonds
  far apart compared with the spreading distance carry nearly independent transfers; fail
  when their changes are more correlated than a stated tolerance (a ring's seam transfer,
  or reservoir books that do not match, shifts every bond alike; one-sided batch-means
  t-test on normal scores); with a declared total drift, also fail on any transfer against
  the drift (exact).

Under H0 a clean run fails with probability at most about ``alpha`` per axis. An axis is
judged (pass or fail) when a boundary of the other kind would be caught, or the data rule
it out; otherwise it is not judged, and the check says why with the measured spreading
distance and the axis length: snapshots so far apart that they are effectively independent
samples (walls and a ring then look alike), a declared drift that carries fluctuations
across the tested bonds between snapshots, mass that barely moves, a pair correlated
between what walls allow and what a ring shows, a declared start that breaks the ring's
symmetry, or an open axis without an inflow record. The check skips when
an axis is not judged, or too short to test (it passes only when every axis is judged),
saying which axes were judged and how.

From the event log (exact; :mod:`.events`). When the run
archives an ``events`` group, every move must join declared neighbours; the first that
does not is reported (index, replica, time, source, target) and the check fails. A clean
log settles axes the snapshots could not resolve.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from massarc.schema.spec import mass_dimensions

from ...analysis.transport import carried, run_density, transport_of
from ...engine.registry import Check, CheckContext, Option
from ...engine.result import CheckResult
from .events import EventAudit, audit_events
from .judge import FLOOR, REACH, TOLERANCE, AxisVerdict, judge_axis
from .transfers import MIN_LENGTH, TransferStatistic, TransferStats

__all__ = ["BoundaryCheck"]


def _axis_name(axis: int, ndim: int) -> str:
    return mass_dimensions(ndim)[2 + axis]


def _fmt(x: float) -> str:
    return f"{x:.3g}" if math.isfinite(x) else "nan"


class BoundaryCheck(Check):
    """Declared boundaries against the data: transfer tests per axis, exact event audit.

    Null hypothesis
    ---------------
    Per axis of at least 8 sites: on a periodic axis, the axis is a ring (the seam's rank
    among evenly spaced cut bonds is uniform); on a reflecting or open axis, the transfers
    reconstructed from the masses are the true ones (far-apart bonds carry nearly
    independent transfers; none runs against a declared total drift). From an event log,
    exactly: every logged move joins declared neighbours. Statistics and p-values: the
    module docstring. Without an event log the check passes only when every axis is
    judged, a periodic axis when the data reject walls and a reflecting or open one when
    they reject a ring, both at ``alpha``; an axis the data cannot decide, or shorter than
    8 sites, makes it skip.

    Where
    -----
    An event log move between undeclared neighbours: its ``replica`` and ``site``
    [source, target]. A transfer against the declared drift: its ``replica`` and
    ``snapshot``. A failed statistical test of an axis: no location (the message names the
    axis).
    """

    id = "boundary"
    description = "declared boundaries agree with the data (bond transfers, event log)"
    needs: ClassVar = {"transfers": {}, "snapshots": {}}
    provides: ClassVar = (TransferStatistic,)
    options: ClassVar = {
        "alpha": Option(1e-4, float, "false-alarm rate of each axis's test"),
        "margin": Option(
            2.0,
            float,
            "an axis is judged only when a boundary of the other kind would be caught by this "
            "many standard errors to spare",
        ),
        "reach": Option(
            REACH,
            float,
            "walls are tested only on bonds at least this many spreading distances apart",
        ),
        "tolerance": Option(
            TOLERANCE,
            float,
            "correlation of the transfers at a third and two thirds of the axis tolerated "
            "behind walls (a ring gives 1/2)",
        ),
        "floor": Option(
            FLOOR,
            float,
            "the tolerated correlation shrinks with the distance in spreading distances, not "
            "below this",
        ),
    }

    def run(self, ctx: CheckContext) -> CheckResult:
        meta = ctx.meta
        if meta is None:
            return self.result("skip", "no valid metadata: the declared boundaries are unknown")
        lattice = meta.lattice
        opts = {k: float(ctx.options[k]) for k in self.options}
        thresholds = dict(opts)
        ndim = lattice.ndim

        audit = None
        if ctx.run.events is not None:
            audit = audit_events(ctx.run.events, lattice, ctx.run.n_replicas)
            bad = self._bad_events(audit, thresholds)
            if bad is not None:
                return bad

        st: TransferStats | None = ctx.stats.get("transfers")
        right_probability = getattr(meta.model, "right_probability", None)
        initial = meta.run.initial.kind if meta.run.initial is not None else None
        invariant = initial != "condensed"
        wave = _carried(ctx, right_probability)
        verdicts: list[AxisVerdict] = []
        notes: list[str] = []
        for axis, kind in enumerate(lattice.boundary):
            data = st.axes[axis] if st is not None and axis < len(st.axes) else None
            if data is None:
                notes.append(
                    f"axis {_axis_name(axis, ndim)} has fewer than {MIN_LENGTH} sites: not tested"
                )
                continue
            verdicts.append(
                judge_axis(
                    data,
                    kind,
                    alpha=opts["alpha"],
                    margin=opts["margin"],
                    reach=opts["reach"],
                    tolerance=opts["tolerance"],
                    floor=opts["floor"],
                    right_probability=right_probability,
                    invariant_start=invariant,
                    stationary=meta.run.regime == "stationary",
                    carried=wave,
                )
            )
        values: dict[str, Any] = {"axes": [v.values for v in verdicts]}
        if audit is not None:
            values["events"] = audit.events
        finite = [v.p_value for v in verdicts if math.isfinite(v.p_value)]
        values["p_value"] = min(finite) if finite else None

        failed = [v for v in verdicts if v.outcome == "fail"]
        if failed:
            v = min(failed, key=lambda x: x.p_value)
            where = None
            if v.against_drift is not None:
                e = v.against_drift
                where = {"replica": e.replica, "snapshot": e.snapshot}
            suffix = f" ({'; '.join(notes)})" if notes else ""
            return self.result(
                "fail", _failure(v, ndim) + suffix, values=values, thresholds=thresholds,
                where=where,
            )  # fmt: skip
        logged = f"all {audit.events} logged moves join declared neighbours" if audit else ""
        judged = [v for v in verdicts if v.outcome == "pass"]
        open_ = [v for v in verdicts if v.outcome == "undecided"]
        if open_ and audit is None:
            notes += [_undecided(v, ndim) for v in open_]
        suffix = f" ({'; '.join(notes)})" if notes else ""
        if not judged and audit is None:
            text = "no axis could be judged" if verdicts else "no axis long enough to test"
            return self.result("skip", text + suffix, values=values, thresholds=thresholds)
        parts = [_passed(v, ndim) for v in judged]
        if audit is None and (open_ or len(verdicts) < ndim):
            # a pass would claim the declared boundaries hold on an axis nobody tested
            text = "not every axis could be judged; the judged ones agree with the declared "
            text += "boundaries: " + ", ".join(parts)
            return self.result("skip", text + suffix, values=values, thresholds=thresholds)
        text = "the bond transfers agree with the declared boundaries: " + ", ".join(parts)
        if not parts:
            text = logged
        elif logged:
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


def _carried(ctx: CheckContext, right_probability: float | None) -> float:
    """Sites the declared drift carries a fluctuation between the two most distant
    consecutive snapshots (:func:`massarc.validators.analysis.transport.carried`)."""
    meta = ctx.meta
    times = np.asarray(ctx.run.times, dtype=np.float64)
    if meta is None or right_probability is None or len(times) < 2:
        return 0.0
    density = run_density(ctx.stats.get("snapshots"), meta, meta.lattice.volume)
    if density is None:
        return 0.0
    dt = float(np.max(np.diff(times)))
    drift = abs(2.0 * float(right_probability) - 1.0)
    return carried(dt, drift, transport_of(meta.model, density), meta.lattice.ndim)


def _passed(v: AxisVerdict, ndim: int) -> str:
    spread = f"spreading distance {_fmt(v.ell)} of {v.length} sites"
    how = f"p = {v.p_value:.2g}"
    if not math.isfinite(v.p_value) and v.ring is not None:  # walls judged by the ring test
        how = f"not a ring: p = {v.ring.p_value:.2g}"
    elif v.reason == "pile":
        how += "; walls would pile the declared drift's mass against one of them"
    return f"{_axis_name(v.axis, ndim)} {v.boundary} ({how}, {spread})"


def _undecided(v: AxisVerdict, ndim: int) -> str:
    name = _axis_name(v.axis, ndim)
    spread = f"spreading distance {_fmt(v.ell)} sites on an axis of {v.length}"
    if v.reason == "inflow":
        return f"axis {name} not judged: it is open but the run has no inflow record for it alone"
    if v.reason == "still":
        return f"axis {name} not judged: the mass barely moves between snapshots"
    if v.reason == "start":
        return (
            f"axis {name} not judged: the declared start (all mass on one site) breaks the "
            "ring's symmetry, and the transfers alone do not rule out walls"
        )
    if v.reason == "spread":
        wall = v.wall
        return (
            f"axis {name} not judged: snapshots too far apart to tell walls from a ring "
            f"({spread}; two bonds a third of the axis apart must be at least "
            f"{REACH:g} of them apart)"
            if wall is None
            else f"axis {name} not judged ({spread})"
        )
    if v.reason == "wave":
        far = v.wall.spacing if v.wall is not None else float("nan")
        wave = float(v.values.get("carried") or 0.0)  # type: ignore[arg-type]
        return (
            f"axis {name} not judged: the declared drift carries a fluctuation about "
            f"{_fmt(wave)} sites between snapshots, which correlates distant bonds on a ring "
            f"as it would behind walls ({spread}; the tested bonds are {far} apart and "
            f"should be {_fmt(REACH * v.ell + wave)}: snapshots closer in time would decide)"
        )
    if v.reason == "between" and v.wall is not None:
        w = v.wall
        return (
            f"axis {name} not judged: bonds {w.bonds[0]} and {w.bonds[1]} correlate by "
            f"{w.mean:.2f}, above the {w.rho0:.2f} walls allow but not clearly below the "
            f"{w.ring_like:.2f} a ring of these data shows ({spread}; more snapshot pairs "
            "would decide)"
        )
    return (
        f"axis {name} not judged: too little motion (or too few snapshot pairs) for a "
        f"boundary of the other kind to be caught ({spread})"
    )


def _failure(v: AxisVerdict, ndim: int) -> str:
    name = _axis_name(v.axis, ndim)
    head = f"axis {name} is declared {v.boundary} but"
    spread = f"spreading distance {_fmt(v.ell)} of {v.length} sites"
    if v.reason == "seam" and v.ring is not None:
        ranks = ", ".join(f"{r:g}" for r in v.ring.seam_ranks)
        how = {
            "shares": "how far their transfers stray from the cuts' mean",
            "profile": "the density step across them",
        }
        used = " / ".join(how[m] for m in dict.fromkeys(v.ring.modes))
        return (
            f"{head} its seam is unlike the bonds (a wall?): ranked by {used}, the seam "
            f"comes {ranks} of {v.ring.k} evenly spaced bonds in the {v.ring.replicas} "
            f"replicas; p = {v.p_value:.2g} ({spread})"
        )
    if v.reason == "drift" and v.against_drift is not None:
        e = v.against_drift
        return (
            f"{head} net {e.value:+d} units crossed bond {e.bond} against the declared total "
            f"drift (replica {e.replica}, snapshots {e.snapshot - 1} to {e.snapshot}): the "
            "transfers are off by a common amount, as on a ring"
        )
    assert v.wall is not None
    a, b = v.wall.bonds
    return (
        f"{head} all its bonds share one extra transfer per snapshot pair, as on a ring: "
        f"the transfers across bonds {a} and {b} change together (correlation "
        f"{v.wall.mean:.2f} of normal scores, tolerated {v.wall.rho0:.2f}, t = "
        f"{v.wall.statistic:.3g}); p = {v.p_value:.2g} ({spread})"
    )
