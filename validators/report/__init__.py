"""Reports of an audit: the model (:class:`AuditReport`) and its renderings as a terminal
table, JSON, JUnit XML and the sweep table as CSV (one row per run).

>>> from massarc.validators.report import AuditReport, render
>>> empty = AuditReport(runs=[], status="skip", massarc_version="0")
>>> print(render(empty, "json"))  # doctest: +ELLIPSIS
{
  "runs": [],
...
"""

from __future__ import annotations

import io

from .data import report_dict, report_json
from .document import report_schema
from .junit import report_junit
from .model import AuditReport, RunReport
from .sweep import SweepRow, sweep_csv, sweep_rows
from .table import STATUS_STYLE, render_table

__all__ = [
    "RENDERINGS",
    "STATUS_STYLE",
    "AuditReport",
    "RunReport",
    "SweepRow",
    "render",
    "render_table",
    "report_dict",
    "report_json",
    "report_junit",
    "report_schema",
    "sweep_csv",
    "sweep_rows",
]

#: Names of the renderings of a report (``massarc check --as NAME``).
RENDERINGS = ("table", "json", "junit", "csv")


def render(report: AuditReport, rendering: str = "table") -> str:
    """The report as text in one of :data:`RENDERINGS` (the table without colour)."""
    if rendering == "json":
        return report_json(report)
    if rendering == "junit":
        return report_junit(report)
    if rendering == "csv":
        buf = io.StringIO()
        sweep_csv(report, buf)
        return buf.getvalue()
    if rendering == "table":
        buf = io.StringIO()
        render_table(report, buf)
        return buf.getvalue()
    raise ValueError(f"rendering: expected one of {', '.join(RENDERINGS)}; got {rendering!r}")
