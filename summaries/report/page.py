"""The report page: one self-contained HTML document of one or more runs.

Layout: the title and the verdict; for several runs a table of runs with the status of
each check; one section per run (metadata, checks with failures first, summaries with
the figures); the provenance (massarc version, command, time, settings, and where each
option that differs from its default was set). Everything is inline: the style sheet, the
images (PNG ``data:`` URIs); no script, nothing fetched.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime

from massarc.archive import Run
from massarc.schema.version import __version__
from massarc.summaries.api import SummaryOutcome
from massarc.validators import AuditReport, AuditSettings, RunReport, available_checks

from .markup import Markup, join, status_mark, table, tag, value
from .sections import PAGE_ORDER, checks_section, metadata_section, summaries_section
from .style import STYLE

__all__ = ["PageRun", "report_page"]


@dataclass(frozen=True)
class PageRun:
    """One run of the page: the run, its audit, and its summaries.

    ``source`` is ``stored`` (read from the run), ``computed`` (computed for the page and
    held in memory) or ``absent``; ``problem`` says why summaries could not be computed.
    """

    run: Run
    audit: RunReport
    outcome: SummaryOutcome | None = None
    source: str = "absent"
    problem: str | None = None


def _anchor(k: int) -> str:
    return f"run-{k + 1}"


def _verdict(report: RunReport | AuditReport, what: str) -> Markup:
    checks = (
        report.checks
        if isinstance(report, RunReport)
        else [c for r in report.runs for c in r.checks]
    )
    bad = [c for c in checks if c.status in ("fail", "error")]
    warned = [c for c in checks if c.status == "warn"]
    if bad:
        words = f"{len(bad)} of {len(checks)} checks failed"
    elif warned:
        words = f"no check failed; {len(warned)} warned"
    else:
        words = "no check failed or warned"
    return tag(
        "p", status_mark(report.status), f" {what}: {words}.", class_=f"verdict st-{report.status}"
    )


def _overview(runs: Sequence[PageRun]) -> Markup:
    ids = list(dict.fromkeys(c.id for p in runs for c in p.audit.checks))
    rows = []
    for k, p in enumerate(runs):
        by_id = {c.id: c.status for c in p.audit.checks}
        cells = [status_mark(by_id[c]) if c in by_id else "-" for c in ids]
        link = tag("a", p.run.name, href=f"#{_anchor(k)}")
        rows.append((link, status_mark(p.audit.status), *cells))
    head = ("run", "overall", *ids)
    return join(
        [
            tag("h2", "Runs at a glance", id="glance"),
            table(head, rows, caption="Status of every check of every run", class_="glance"),
        ]
    )


def _run_section(k: int, p: PageRun) -> Markup:
    return tag(
        "section",
        tag("h2", f"Run {p.run.name}"),
        _verdict(p.audit, "this run"),
        checks_section(p.audit),
        metadata_section(p.run),
        summaries_section(p.run, p.outcome, p.source, p.problem),
        id=_anchor(k),
        class_="run",
    )


def _thresholds(settings: AuditSettings) -> Markup:
    registry = available_checks()
    rows = []
    for cid, opts in settings.options.items():
        declared = registry[cid].options if cid in registry else {}
        for name, val in opts.items():
            default = declared[name].default if name in declared else None
            if name in declared and val == default:
                continue
            origin = settings.origins.get(cid, {}).get(name, settings.source or "settings")
            rows.append((tag("code", f"{cid}.{name}"), value(val), value(default), origin))
    if not rows:
        return tag("p", "Every check option had its default value.")
    return table(
        ("option", "value", "default", "set by"),
        rows,
        caption="Options that differ from their defaults",
    )


def _provenance(
    audit: AuditReport, settings: AuditSettings, command: str, created: str, runs: Sequence[PageRun]
) -> Markup:
    computed = [p for p in runs if p.source == "computed" and p.outcome is not None]
    rows: list[tuple[str, object]] = [
        ("massarc version", audit.massarc_version),
        ("page made by massarc", __version__),
        ("made at (UTC)", created),
        ("command", tag("code", command)),
        ("settings file", settings.source or "none (defaults and the command line)"),
        ("warnings fail (strict)", "yes" if audit.strict else "no"),
        ("checks skipped by the settings", ", ".join(settings.skip) or "none"),
        ("only these checks", ", ".join(settings.only) if settings.only else "all"),
        ("audit time", f"{audit.seconds:.1f} s"),
    ]
    if computed:
        options = computed[0].outcome.findings.get("options", {}) if computed[0].outcome else {}
        rows.append(("summaries computed for the page with", value(options)))
    return join(
        [
            tag("h2", "Provenance", id="provenance"),
            table(("item", "value"), rows, caption="How this page was made"),
            tag("h3", "Thresholds"),
            _thresholds(settings),
        ]
    )


def report_page(
    runs: Sequence[PageRun],
    audit: AuditReport,
    settings: AuditSettings,
    *,
    command: str,
    created: str | None = None,
) -> str:
    """The whole HTML document of ``runs`` (in the audit's order).

    Parameters
    ----------
    runs
        The runs with their audit results and summaries.
    audit
        The audit they come from (version, strictness, time).
    settings
        The settings of the audit (file, skipped checks, options and where each was set).
    command
        The command line that made the page, shown in the provenance.
    created
        The time shown (default: now, UTC, ISO 8601).
    """
    created = created or datetime.now(UTC).replace(microsecond=0).isoformat()
    name = runs[0].run.name if len(runs) == 1 else f"{len(runs)} runs"
    title = f"massarc audit report: {name}"
    order = " > ".join(PAGE_ORDER)
    body = [
        tag("h1", title),
        tag(
            "p",
            f"Made by massarc {__version__} on {created}. Checks are listed in the order {order}.",
            class_="lede",
        ),
    ]
    if len(runs) > 1:
        body.extend([_verdict(audit, "the audit"), _overview(runs)])
    body.extend(_run_section(k, p) for k, p in enumerate(runs))
    body.append(_provenance(audit, settings, command, created, runs))
    head = join(
        [
            Markup('<meta charset="utf-8">'),
            Markup('<meta name="viewport" content="width=device-width, initial-scale=1">'),
            tag("title", title),
            tag("style", Markup(STYLE)),
        ]
    )
    doc = tag("html", tag("head", head), tag("body", tag("main", *body)), lang="en")
    return f"<!DOCTYPE html>\n{doc}\n"
