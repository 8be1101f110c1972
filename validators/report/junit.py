"""The JUnit XML report: one ``<testsuite>`` per run, one ``<testcase>`` per check.

``classname`` is the run's path and ``name`` the check id. Each ``<testsuite>`` starts
with ``<properties>`` saying where the rules came from: ``massarc.config`` (the settings
file, or ``none``), ``massarc.option.ID.OPTION`` = ``VALUE (from SOURCE; default
DEFAULT)`` for each option not at its default, and ``massarc.ignored`` for each
configuration file found inside the audited runs and not read. A failed check carries a
``<failure>``, one that raised an ``<error>``, a skipped one ``<skipped>`` (the reason as
its text); a warning
passes, with its message in ``<system-out>``. Written with :mod:`xml.etree`, so the
document is well-formed and escaped whatever the messages hold.
It conforms to the JUnit schema CI servers read (the Jenkins JUnit XSD,
``tests/fixtures/junit/``).
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

from .data import _plain
from .model import AuditReport

__all__ = ["report_junit"]


def _counts(statuses: list[str], *, skipped: bool = True) -> dict[str, str]:
    counts = {
        "tests": str(len(statuses)),
        "failures": str(statuses.count("fail")),
        "errors": str(statuses.count("error")),
    }
    if skipped:  # a <testsuite> attribute; the published schema has none on <testsuites>
        counts["skipped"] = str(statuses.count("skip"))
    return counts


def _properties(suite: ET.Element, report: AuditReport) -> None:
    props = ET.SubElement(suite, "properties")
    pairs = [("massarc.config", report.config or "none")]
    for o in report.options:
        value = json.dumps(_plain(o.value))
        shown = f"{value} (from {o.source}; default {json.dumps(_plain(o.default))})"
        pairs.append((f"massarc.option.{o.check}.{o.option}", shown))
    pairs.extend(("massarc.ignored", path) for path in report.ignored)
    for name, value in pairs:
        ET.SubElement(props, "property", {"name": name, "value": value})


def report_junit(report: AuditReport) -> str:
    """The report as a JUnit XML document."""
    every = [c.status for r in report.runs for c in r.checks]
    root = ET.Element(
        "testsuites",
        {"name": "massarc check", **_counts(every, skipped=False), "time": f"{report.seconds:.3f}"},
    )
    for run in report.runs:
        suite = ET.SubElement(
            root,
            "testsuite",
            {
                "name": run.path,
                **_counts([c.status for c in run.checks]),
                "time": f"{run.seconds:.3f}",
            },
        )
        _properties(suite, report)
        for c in run.checks:
            case = ET.SubElement(
                suite,
                "testcase",
                {
                    "classname": run.path,
                    "name": c.id,
                    "time": f"{run.check_seconds.get(c.id, 0.0):.3f}",
                },
            )
            detail = json.dumps(
                {
                    "where": c.where.model_dump(exclude_none=True) if c.where else {},
                    "values": _plain(c.values),
                    "thresholds": _plain(c.thresholds),
                },
                allow_nan=False,
            )
            if c.status == "fail":
                ET.SubElement(case, "failure", {"message": c.message, "type": "fail"}).text = detail
            elif c.status == "error":
                ET.SubElement(case, "error", {"message": c.message, "type": "error"}).text = detail
            elif c.status == "skip":
                # the reason as text: the published schema gives <skipped> no attributes
                ET.SubElement(case, "skipped").text = c.message
            elif c.status == "warn":
                ET.SubElement(case, "system-out").text = f"warning: {c.message}\n{detail}"
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=True) + "\n"
