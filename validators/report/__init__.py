"""Reports of an audit: the model (:class:`AuditReport`) and its renderings as a terminal
table, JSON and JUnit XML.

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
from .junit import report_junit
from .model import AuditReport, RunReport
from .table import STATUS_STYLE, render_table

__all__ = [
    "FORMATS",
    "STATUS_STYLE",
    "AuditReport",
    "RunReport",
    "render",
    "render_table",
    "report_dict",
    "report_json",
    "report_junit",
]

#: Names of the report formats.
FORMATS = ("table", "json", "junit")


def render(report: AuditReport, fmt: str = "table") -> str:
    """The report as text in one of :data:`FORMATS` (the table without colour)."""
    if fmt == "json":
        return report_json(report)
    if fmt == "junit":
        return report_junit(report)
    if fmt == "table":
        buf = io.StringIO()
        render_table(report, buf)
        return buf.getvalue()
    raise ValueError(f"report format: expected one of {', '.join(FORMATS)}; got {fmt!r}")
