"""The ``integrity`` check: every chunk is present, decodes and passes its checksum, and no
stored value is the never-written fill value.

Missing chunks (absent from the store, which zarr would silently fill in) and corrupt ones
(checksum mismatch, truncated or garbled bytes) are found by the single pass and reported
by key, replica and snapshot range; the other checks go on without them. Values equal to
the fill value of ``mass`` (the largest value of its dtype, which the writer never stores)
inside a present chunk are also reported here, since they mean data that were never written.
A chunk of ``time`` absent from the store (zarr would read NaN) fails too.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from massarc.archive.scan import missing_time_chunks

from ..engine.registry import Check, CheckContext
from ..engine.result import CheckResult
from ._common import site_of

__all__ = ["IntegrityCheck"]

#: Chunks listed one by one in ``values["chunks"]``.
_LISTED = 50


def _time_text(lost: list[tuple[str, int, int]]) -> str:
    key, lo, hi = lost[0]
    more = f"; {len(lost) - 1} more" if len(lost) > 1 else ""
    return (
        f"time chunk {key} (snapshots {lo}..{hi - 1}) is missing: not in the store (it "
        f"would read as NaN, the fill value){more}"
    )


class IntegrityCheck(Check):
    """Every chunk present, decodable and intact; no never-written values.

    Null hypothesis
    ---------------
    The stored bytes are the written ones: every chunk of ``mass`` and ``time`` is present,
    decodes and matches its checksum, and no stored mass equals the fill value the writer
    never stores. Judged exactly.

    Where
    -----
    A missing or corrupt ``mass`` chunk: its ``chunk`` key, its ``replica`` and the first
    ``snapshot`` it holds. A missing ``time`` chunk: its ``chunk`` key and first
    ``snapshot``. A never-written value: its ``replica``, ``snapshot`` and ``site``.
    """

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
        lost_times = missing_time_chunks(ctx.run)
        if lost_times:
            values["missing_time"] = [key for key, _, _ in lost_times]
        if faults:
            values["faulty"] = [
                {
                    "key": f.chunk,
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
                f"{len(faults)} of {total} chunks unreadable: {f.chunk} is {f.kind} "
                f"(replica {f.ref.replica}, snapshots {f.ref.start}..{f.ref.stop - 1}): "
                f"{f.message}{more}"
            )
            if n_sentinel:
                message += f"; and {n_sentinel} never-written values"
            if lost_times:
                message += f"; and {_time_text(lost_times)}"
            where = {"replica": f.ref.replica, "snapshot": f.ref.start, "chunk": f.chunk}
            return self.result("fail", message, values=values, where=where)
        if lost_times:
            key, lo, _hi = lost_times[0]
            where = {"snapshot": lo, "chunk": key}
            return self.result("fail", _time_text(lost_times), values=values, where=where)
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
