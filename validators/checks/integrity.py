"""The ``integrity`` check: every chunk is present, decodes and passes its checksum, and no
stored value is the never-written fill value.

Missing chunks (absent from the store, which zarr would silently fill in) and corrupt ones
(checksum mismatch, truncated or garbled bytes) are found by the single pass and reported
by key, replica and snapshot range; the other checks go on without them. Values equal to
the fill value of ``mass`` (the largest value of its dtype, which the writer never stores)
inside a present chunk are also reported here, since they mean data that were never written.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from ..engine.registry import Check, CheckContext
from ..engine.result import CheckResult
from ._common import site_of

__all__ = ["IntegrityCheck"]

#: Chunks listed one by one in ``values["chunks"]``.
_LISTED = 50


class IntegrityCheck(Check):
    id = "integrity"
    description = "every chunk is present, decodes and passes its checksum; no never-written values"
    needs: ClassVar = {"snapshots": {}}
    requires: ClassVar = ("data",)

    def run(self, ctx: CheckContext) -> CheckResult:
        faults = list(ctx.faults)
        total = len(ctx.run.chunk_refs())
        snap = ctx.stats.get("snapshots")
        n_sentinel = int(snap.n_sentinel) if snap is not None else 0
        values: dict[str, Any] = {
            "chunks": total,
            "missing": sum(f.kind == "missing" for f in faults),
            "corrupt": sum(f.kind == "corrupt" for f in faults),
            "never_written": n_sentinel,
        }
        if faults:
            values["faulty"] = [
                {
                    "key": f.ref.key,
                    "kind": f.kind,
                    "replica": f.ref.replica,
                    "snapshots": [f.ref.start, f.ref.stop],
                    "message": f.message,
                }
                for f in faults[:_LISTED]
            ]
            f = faults[0]
            more = f"; {len(faults) - 1} more" if len(faults) > 1 else ""
            message = (
                f"{len(faults)} of {total} chunks unreadable: {f.ref.key} is {f.kind} "
                f"(replica {f.ref.replica}, snapshots {f.ref.start}..{f.ref.stop - 1}): "
                f"{f.message}{more}"
            )
            if n_sentinel:
                message += f"; and {n_sentinel} never-written values"
            where = {"replica": f.ref.replica, "snapshot": f.ref.start, "chunk": f.ref.key}
            return self.result("fail", message, values=values, where=where)
        if n_sentinel:
            r, s, flat = snap.first_sentinel
            dtype = ctx.run.dtype
            fill_txt = f" {np.iinfo(dtype).max}" if dtype.kind in "ui" else ""
            site = site_of(tuple(ctx.run.sites), flat)
            message = (
                f"{n_sentinel} values equal the fill value{fill_txt} (never written); first at "
                f"replica {r}, snapshot {s}, site {site}"
            )
            where = {"replica": r, "snapshot": s, "site": site}
            return self.result("fail", message, values=values, where=where)
        return self.result(
            "pass", f"all {total} chunks present, decoded and checksummed", values=values
        )
