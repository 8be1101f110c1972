"""Print a :class:`~.result.Comparison`: a table for people, JSON for scripts."""

from __future__ import annotations

import json
import math
from typing import IO, Any

from massarc.archive.summaries import plain

from .result import Comparison

__all__ = ["COMPARE_RENDERINGS", "render_comparison"]

#: How ``massarc compare`` prints (``--as``).
COMPARE_RENDERINGS = ("table", "json")

_VERDICT = {"pass": "compatible", "fail": "incompatible", "skip": "not compared"}


def _num(value: Any) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-"
    if isinstance(value, float):
        return f"{value:.3g}"
    return str(value)


def _table(c: Comparison) -> str:
    lines = [f"A  {c.a}", f"B  {c.b}", "", "metadata"]
    for d in c.metadata:
        mark = "same" if d.same else ("DIFFERS" if d.kind == "claim" else "differs")
        value = _num(d.a) if d.same else f"{_num(d.a)} | {_num(d.b)}"
        lines.append(f"  {d.key:<28} {mark:<8} {value}")
    lines += ["", f"observables (Holm-adjusted p against level {c.level:g})"]
    for o in c.observables:
        if o.status == "skip":
            lines.append(f"  {o.observable:<13} skip  not compared: {o.reason}")
            continue
        sizes = "/".join(f"{s:.3g}" for s in o.sizes or ())
        lines.append(
            f"  {o.observable:<13} {o.status:<5} p = {_num(o.p_value)}, adjusted "
            f"{_num(o.adjusted_p)}; {o.test}, statistic {_num(o.statistic)}, "
            f"effective sizes {sizes}"
        )
    verdict = _VERDICT[c.status]
    why = f": {', '.join(c.failed())}" if c.status == "fail" else ""
    forced = " (claims differ; compared with --force)" if c.forced else ""
    lines += ["", f"{c.status}: the runs are {verdict}{why}{forced}"]
    return "\n".join(lines)


def render_comparison(comparison: Comparison, rendering: str, out: IO[str]) -> None:
    """Write ``comparison`` to ``out`` as ``table`` or ``json`` (one document)."""
    if rendering == "json":
        out.write(json.dumps(plain(comparison.model_dump(mode="python")), indent=2) + "\n")
    elif rendering == "table":
        out.write(_table(comparison) + "\n")
    else:
        raise ValueError(f"rendering: expected one of {', '.join(COMPARE_RENDERINGS)}; got "
                         f"{rendering!r}")  # fmt: skip
