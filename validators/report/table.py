"""The human report: one compact table for all runs, then a summary line.

Colour only on a terminal (rich decides from the console it is given). Status words:
``ok``, ``warn``, ``FAIL``, ``ERROR``, ``skip``.
"""

from __future__ import annotations

from typing import IO

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from ..result import Where
from .model import AuditReport

__all__ = ["STATUS_STYLE", "render_table"]

#: (word, style) shown for each status.
STATUS_STYLE: dict[str, tuple[str, str]] = {
    "pass": ("ok", "green"),
    "warn": ("warn", "yellow"),
    "fail": ("FAIL", "bold red"),
    "error": ("ERROR", "bold magenta"),
    "skip": ("skip", "dim"),
}


def _where(where: Where | None) -> str:
    if where is None:
        return ""
    parts = []
    for key, value in where.model_dump(exclude_none=True).items():
        shown = ",".join(str(v) for v in value) if isinstance(value, list) else str(value)
        parts.append(f"{key} {shown}")
    return ", ".join(parts)


def _summary(report: AuditReport) -> str:
    runs = report.runs
    words = {
        "error": "with errors",
        "fail": "failed",
        "warn": "with warnings",
        "pass": "passed",
        "skip": "skipped",
    }
    parts = []
    for status, word in words.items():
        n = sum(r.status == status for r in runs)
        if n:
            parts.append(f"{n} {word}")
    checks = [c.status for r in runs for c in r.checks]
    tally = ", ".join(
        f"{checks.count(s)} {STATUS_STYLE[s][0]}" for s in STATUS_STYLE if s in checks
    )
    strict = " (strict: warnings fail)" if report.strict else ""
    noun = "run" if len(runs) == 1 else "runs"
    head = f"{len(runs)} {noun} audited in {report.seconds:.1f} s"
    return f"{head}: {', '.join(parts) or 'nothing run'}; checks: {tally or 'none'}{strict}"


def render_table(report: AuditReport, file: IO[str], *, quiet: bool = False) -> None:
    """Write the table to ``file`` (colour when it is a terminal). ``quiet``: only the
    checks that did not pass, and the summary."""
    console = Console(file=file, width=None if file.isatty() else 160, soft_wrap=False)
    table = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, expand=False)
    for name in ("run", "check", "status", "message", "where"):
        table.add_column(name, overflow="fold")
    rows = 0
    for run in report.runs:
        first = True
        for c in run.checks:
            if quiet and c.status == "pass":
                continue
            word, style = STATUS_STYLE[c.status]
            table.add_row(
                run.path if first else "", c.id, Text(word, style=style), c.message, _where(c.where)
            )
            first = False
            rows += 1
    if rows:
        console.print(table)
    console.print(_summary(report), highlight=False)
