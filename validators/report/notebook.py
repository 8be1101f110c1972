"""What a Jupyter notebook shows for an audit report (``AuditReport._repr_html_``).

One row per run and check: run, check id, status, message and where it points. Every
datum is escaped with :func:`html.escape` (run paths and messages come from archives,
which are hostile input). The status words are the statuses themselves, as in every other
rendering.

>>> from massarc.validators.report import AuditReport
>>> page = report_notebook_html(AuditReport(runs=[], status="skip", massarc_version="0"))
>>> "0 runs" in page
True
"""

from __future__ import annotations

import html

from .model import AuditReport
from .table import STATUS_STYLE
from .table import _where as where_text

__all__ = ["report_notebook_html"]

_COLOUR = {"green": "#1a7f37", "yellow": "#9a6700", "bold red": "#cf222e"}


def _status(status: str) -> str:
    colour = _COLOUR.get(STATUS_STYLE.get(status, ""), "inherit")
    weight = "bold" if status in ("fail", "error") else "normal"
    return f"<td style='color:{colour};font-weight:{weight}'>{html.escape(status)}</td>"


def report_notebook_html(report: AuditReport) -> str:
    """The notebook view of ``report``."""
    rows = []
    for run in report.runs:
        for c in run.checks:
            cells = "".join(
                f"<td style='text-align:left'>{html.escape(str(v))}</td>" for v in (run.path, c.id)
            )
            tail = "".join(
                f"<td style='text-align:left'>{html.escape(v)}</td>"
                for v in (c.message, where_text(c.where))
            )
            rows.append(f"<tr>{cells}{_status(c.status)}{tail}</tr>")
    head = "".join(f"<th>{h}</th>" for h in ("run", "check", "status", "message", "where"))
    noun = "run" if len(report.runs) == 1 else "runs"
    title = (
        f"massarc audit: {len(report.runs)} {noun}, status {report.status}"
        f" (massarc {report.massarc_version})"
    )
    return (
        f"<div><strong>{html.escape(title)}</strong>"
        f"<table><tr>{head}</tr>{''.join(rows)}</table></div>"
    )
