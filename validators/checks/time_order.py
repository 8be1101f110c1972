"""The ``time-order`` check: snapshot times are finite and strictly increasing."""

from __future__ import annotations

from typing import ClassVar

import numpy as np

from ..engine.registry import Check, CheckContext
from ..engine.result import CheckResult

__all__ = ["TimeOrderCheck"]


class TimeOrderCheck(Check):
    """Snapshot times finite and strictly increasing.

    Null hypothesis
    ---------------
    The ``time`` array has one finite entry per snapshot, each larger than the one before.
    Judged exactly.

    Where
    -----
    ``snapshot``: the first snapshot whose time is not finite or not larger than the
    previous one.
    """

    id = "time-order"
    description = "snapshot times are finite and strictly increasing"
    requires: ClassVar = ("data",)

    def run(self, ctx: CheckContext) -> CheckResult:
        try:
            t = ctx.run.times
        except (ValueError, RuntimeError) as exc:  # zarr's verdict on a damaged time chunk
            # (anything else, a missing library or an unreadable disk, is not a verdict on the
            # data: the runner reports it as an error)
            text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            return self.result("fail", f"time array unreadable: {text}")
        n = ctx.run.n_snapshots
        if len(t) != n:
            return self.result(
                "fail",
                f"time array: expected {n} committed times (one per snapshot); got {len(t)}",
                values={"times": len(t), "snapshots": n},
            )
        finite = np.isfinite(t)
        with np.errstate(invalid="ignore"):
            back = np.zeros(len(t), bool)
            back[1:] = (t[1:] <= t[:-1]) & finite[1:] & finite[:-1]
        bad = ~finite | back
        count = int(np.count_nonzero(bad))
        if not count:
            span = f" from {t[0]:g} to {t[-1]:g}" if len(t) else ""
            return self.result("pass", f"{len(t)} times increase strictly{span}")
        i = int(np.argmax(bad))
        values = {"time": float(t[i]), "offending": count}
        if not finite[i]:
            message = f"snapshot {i}: time {t[i]} is not finite"
        else:
            values["previous"] = float(t[i - 1])
            message = f"snapshot {i}: time {t[i]:g} is not after the previous {t[i - 1]:g}"
        if count > 1:
            message += f" ({count} snapshots out of order or not finite)"
        return self.result("fail", message, values=values, where={"snapshot": i})
