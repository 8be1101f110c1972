"""The human report: one compact table for all runs, for a collection the sweep table
(one line per run across its parameters, :mod:`.sweep`), then a summary line.

Colour only on a terminal (rich decides from the console it is given). Status words are
the statuses themselves, as in JSON and JUnit: ``pass``, ``warn``, ``fail``, ``skip``,
``error``; emphasis comes from the style alone.
"""

from __future__ import annotations

from typing import IO

from ..engine.result import Where
from .model import AuditReport
from .sweep import render_sweep

__all__ = ["STATUS_STYLE", "render_table"]

#: The style each status is shown in (the word is the status itself).
STATUS_STYLE: dict[str, str] = {
    "pass": "green",
    "warn": "yellow",
    "fail": "bold red",
    "error": "bold magenta",
    "skip": "dim",
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

    def tally(statuses: list[str]) -> str:
        return ", ".join(f"{statuses.count(s)} {s}" for s in STATUS_STYLE if s in statuses)

    by_run = tally([r.status for r in runs])
    by_check = tally([c.status for r in runs for c in r.checks])
    strict = " (strict: warnings fail)" if report.strict else ""
    noun = "run" if len(runs) == 1 else "runs"
    head = f"{len(runs)} {noun} audited in {report.seconds:.1f} s"
    rules = f"settings from {report.config}" if report.config else "default settings"
    return f"{head}; runs: {by_run or 'none'}; checks: {by_check or 'none'}{strict}; {rules}"


def _rules(report: AuditReport) -> list[str]:
    """Where the rules came from: each option not at its default, each file ignored."""
    lines = [
        f"option {o.check}.{o.option} = {o.value!r} (from {o.source}; default {o.default!r})"
        for o in report.options
    ]
    lines.extend(
        f"ignored {path}: a configuration file inside the audited runs never sets the rules"
        for path in report.ignored
    )
    return lines


def render_table(report: AuditReport, file: IO[str], *, quiet: bool = False) -> None:
    """Write the table to ``file`` (colour when it is a terminal). ``quiet``: only the
    checks that did not pass, and the summary."""
    from rich import box  # imported when a table is drawn: --list and JSON need none of it
    from rich.console import Console
    from rich.table import Table
    from rich.text import Text

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
            status = Text(c.status, style=STATUS_STYLE[c.status])
            table.add_row(run.path if first else "", c.id, status, c.message, _where(c.where))
            first = False
            rows += 1
    if rows:
        console.print(table)
    if len(report.runs) > 1:  # a collection: one line per run across its parameters
        render_sweep(report, console, STATUS_STYLE)
    console.print(_summary(report), highlight=False)
    for line in _rules(report):
        console.print(line, highlight=False, markup=False, soft_wrap=True)  # paths stay whole
