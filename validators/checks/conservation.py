"""The ``conservation`` check: the total mass is what the boundaries allow.

Closed system (no open axis): the total mass of every snapshot of every replica equals the
reference total: the declared ``run.total_mass`` when there is one, else each replica's
first (readable) snapshot. Open axes: total(t) - total(0) must equal the archived
cumulative ``inflow`` minus ``outflow`` since the first snapshot; without those series the
check is skipped. The first differing (replica, snapshot), the discrepancy and the number
of affected snapshots are reported.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from massarc.schema.spec import INFLOW, OUTFLOW

from ..engine.registry import Check, CheckContext, Option
from ..engine.result import CheckResult
from ._common import fault_note, first_index

__all__ = ["ConservationCheck"]


def _first_valid(total: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """Each replica's first readable total (0 where none is readable)."""
    idx = np.argmax(valid, axis=1)
    return total[np.arange(len(total)), idx]


class ConservationCheck(Check):
    """Total mass as the boundaries allow.

    Null hypothesis
    ---------------
    No mass is created or lost: in a closed system every replica's total mass is the same
    at every snapshot (the declared ``run.total_mass``, else the replica's first readable
    snapshot); with open axes the total changes by exactly the archived cumulative inflow
    minus outflow. Judged exactly, up to ``tolerance``.

    Where
    -----
    ``replica`` and ``snapshot`` of the first total that differs from the expected one by
    more than ``tolerance``.
    """

    id = "conservation"
    description = "total mass is conserved (closed) or matches inflow - outflow (open axes)"
    needs: ClassVar = {"snapshots": {}}
    options: ClassVar = {
        "tolerance": Option(0, float, "largest |total mass - expected| accepted, in mass units")
    }
    requires: ClassVar = ("metadata", "data")

    def run(self, ctx: CheckContext) -> CheckResult:
        assert ctx.meta is not None
        tol = ctx.options["tolerance"]
        if not isinstance(tol, int | float) or tol < 0:
            raise ValueError(f"conservation.tolerance: expected a number >= 0; got {tol!r}")
        snap = ctx.stats["snapshots"]
        total, valid = snap.total, snap.valid
        values: dict[str, Any] = {}
        if ctx.meta.lattice.closed:
            declared = ctx.meta.run.total_mass
            # one expected total per replica, broadcast along time: long runs hold no
            # second (replica, snapshot) array of it
            if declared is not None:
                expected = np.full((total.shape[0], 1), declared, dtype=total.dtype)
                values.update(reference="declared total mass", reference_total=declared)
            else:
                expected = _first_valid(total, valid)[:, None].astype(total.dtype)
                values["reference"] = "first snapshot of each replica"
            scope = "closed system"
        else:
            found = {k: ctx.run.series(k) for k in (INFLOW, OUTFLOW)}
            absent = [k for k, v in found.items() if v is None]
            if absent:
                return self.result(
                    "skip",
                    f"open boundary and no archived {' or '.join(absent)} series to compare with",
                )
            inflow = np.asarray(found[INFLOW], np.int64)
            outflow = np.asarray(found[OUTFLOW], np.int64)
            net = (inflow - inflow[:, :1]) - (outflow - outflow[:, :1])
            expected = total[:, :1] + net
            values["reference"] = "first snapshot + inflow - outflow"
            scope = "open boundary"
        expected = np.broadcast_to(expected, total.shape)
        gap = np.subtract(total, expected)  # |total - expected|, in place
        bad = np.abs(gap, out=gap) > tol
        del gap
        bad &= valid
        values["compared"] = int(np.count_nonzero(valid))
        note = fault_note(ctx)
        loc = first_index(bad)
        thresholds = {"tolerance": tol}
        if loc is None:
            return self.result(
                "pass",
                f"{scope}: total mass as expected in {values['compared']} snapshots{note}",
                values=values,
                thresholds=thresholds,
            )
        r, s = loc
        n_bad = int(np.count_nonzero(bad))
        n_rep = int(np.count_nonzero(bad.any(axis=1)))
        values.update(
            discrepancy=int(total[r, s]) - int(expected[r, s]),
            total=int(total[r, s]),
            expected=int(expected[r, s]),
            affected_snapshots=n_bad,
            affected_replicas=n_rep,
        )
        message = (
            f"{scope}: replica {r}, snapshot {s} holds total mass {int(total[r, s])}, expected "
            f"{int(expected[r, s])} ({values['reference']}), discrepancy "
            f"{values['discrepancy']:+d}; "
            f"{n_bad} snapshot{'s' if n_bad != 1 else ''} in {n_rep} "
            f"replica{'s' if n_rep != 1 else ''} affected{note}"
        )
        where = {"replica": r, "snapshot": s}
        return self.result("fail", message, values=values, thresholds=thresholds, where=where)
