"""The ``nonnegative`` check: every mass is a non-negative integer.

Archives written by massarc use unsigned dtypes, where this holds by construction; foreign
archives may store int32 or float64. Floating-point values that are not finite or not
integers are reported as well. Never-written (fill) values are reported by ``integrity``.
"""

from __future__ import annotations

from typing import ClassVar

from ..engine.registry import Check, CheckContext
from ..engine.result import CheckResult
from ._common import fault_note, mass_at, site_of

__all__ = ["NonNegativeCheck"]


class NonNegativeCheck(Check):
    """Every mass a non-negative integer.

    Null hypothesis
    ---------------
    Every stored mass is a finite, non-negative integer. Judged exactly.

    Where
    -----
    ``replica``, ``snapshot`` and ``site`` of the first offending value.
    """

    id = "nonnegative"
    description = "every mass is a non-negative integer"
    needs: ClassVar = {"snapshots": {}}
    requires: ClassVar = ("data",)

    def run(self, ctx: CheckContext) -> CheckResult:
        dtype = ctx.run.dtype
        snap = ctx.stats["snapshots"]
        values = {
            "dtype": str(dtype),
            "negative": int(snap.n_negative),
            "fractional": int(snap.n_fractional),
        }
        note = fault_note(ctx)
        if dtype.kind == "u":
            return self.result(
                "pass", f"dtype {dtype} holds only non-negative integers{note}", values=values
            )
        found = [
            (loc, what, label, n)
            for loc, what, label, n in (
                (snap.first_negative, "negative", "negative", snap.n_negative),
                (snap.first_fractional, "not an integer", "fractional", snap.n_fractional),
            )
            if loc is not None
        ]
        if not found:
            return self.result(
                "pass", f"every mass is a non-negative integer (dtype {dtype}){note}", values=values
            )
        (r, s, flat), what, _, _ = min(found)
        site = site_of(tuple(ctx.run.sites), flat)
        value = mass_at(ctx.run, r, s, flat)
        shown = f" {value}" if value is not None else ""
        counts = ", ".join(f"{n} {label}" for _, _, label, n in found)
        message = f"replica {r}, snapshot {s}, site {site}: mass{shown} is {what} ({counts}){note}"
        if value is not None:
            values["value"] = value
        return self.result(
            "fail", message, values=values, where={"replica": r, "snapshot": s, "site": site}
        )
