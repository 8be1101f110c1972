"""The parts of one run's section of the report page: its metadata, its check results
(failed first) and its summaries with the figures. Each returns markup; every datum is
escaped by :mod:`.markup`."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from massarc.archive import Run
from massarc.archive.facts import run_facts
from massarc.summaries.api import SummaryOutcome
from massarc.summaries.render import sweep_table
from massarc.validators import CheckResult, RunReport

from .images import Drawn, draw_figures, missing_plot_extra, plotting_available
from .markup import Cell, Markup, join, key_values, status_mark, table, tag, value

__all__ = ["PAGE_ORDER", "checks_section", "metadata_section", "ordered", "summaries_section"]

#: The order of checks on the page: failures first, then what a referee must read.
PAGE_ORDER = ("fail", "error", "warn", "skip", "pass")


def ordered(checks: Sequence[CheckResult]) -> list[CheckResult]:
    """The checks in :data:`PAGE_ORDER` (the audit's order within one status)."""
    return sorted(checks, key=lambda c: PAGE_ORDER.index(c.status))


def _flat(data: Any, prefix: str = "") -> dict[str, Any]:
    """Nested metadata as ``{"model.family": "zrp", ...}`` (lists kept whole)."""
    if not isinstance(data, Mapping):
        return {prefix: data}
    out: dict[str, Any] = {}
    for key, val in data.items():
        path = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(val, Mapping) and val:
            out.update(_flat(val, path))
        else:
            out[path] = val
    return out


def _facts_rows(f: Mapping[str, Any]) -> list[tuple[str, str]]:
    rows = [
        ("model", f["model"]),
        (
            "lattice",
            " x ".join(str(s) for s in f["lattice"])
            + " sites, boundary "
            + ", ".join(f["boundary"]),
        ),
        (
            "regime",
            f"{f['regime']} (claimed)" + (f", started {f['initial']}" if f.get("initial") else ""),
        ),
    ]
    if f.get("total_mass") is not None:
        rows.append(("mass", f"{f['total_mass']} per replica, density {value(f['density'])}"))
    complete = "" if f.get("complete") else " (incomplete: the writer did not finish)"
    rows.append(("data", f"{f['n_replicas']} replicas x {f['n_snapshots']} snapshots{complete}"))
    if "time_first" in f:
        units = f.get("time_units") or ""
        rows.append(("time", f"{value(f['time_first'])} .. {value(f['time_last'])} {units}"))
    if f.get("simulator"):
        rows.append(
            (
                "written by",
                f"{f['simulator']}" + (f" on {f['created']}" if f.get("created") else ""),
            )
        )
    return rows


def metadata_section(run: Run) -> Markup:
    """What the run is (the facts ``massarc info`` shows) and every metadata entry it
    declares."""
    facts = run_facts(run)
    parts: list[Any] = [tag("h3", "Metadata")]
    if "problems" in facts:
        parts.append(
            tag("p", "The metadata cannot be read: ", "; ".join(facts["problems"]), class_="note")
        )
    if run.meta is None:
        return join(parts)
    parts.append(table(("fact", "value"), _facts_rows(facts), caption="The run at a glance"))
    declared = _flat(run.meta.model_dump(mode="json", exclude_none=True))
    rows = [(tag("code", key), value(val)) for key, val in declared.items()]
    parts.append(table(("entry", "declared value"), rows, caption="Every declared entry"))
    return join(parts)


def _where(result: CheckResult) -> str:
    if result.where is None:
        return ""
    return ", ".join(
        f"{k} {value(v)}" for k, v in result.where.model_dump(exclude_none=True).items()
    )


def checks_section(report: RunReport) -> Markup:
    """Every check of the run with its message, location, measured values and thresholds,
    failures first; each status is a word in a box and a tinted row."""
    checks = ordered(report.checks)
    counts = ", ".join(
        f"{sum(c.status == s for c in checks)} {s}"
        for s in PAGE_ORDER
        if any(c.status == s for c in checks)
    )
    rows = [
        (
            tag("code", c.id),
            status_mark(c.status),
            Cell(c.message, "msg"),
            _where(c),
            Cell(key_values(c.values), "kvs"),
            Cell(key_values(c.thresholds), "kvs"),
        )
        for c in checks
    ]
    head = ("check", "status", "message", "where", "measured", "thresholds")
    return join(
        [
            tag("h3", "Checks"),
            tag("p", f"{len(checks)} checks: {counts or 'none'}. Failed checks come first."),
            table(head, rows, row_classes=[f"st-{c.status}" for c in checks], class_="checks"),
        ]
    )


def _finding_rows(outcome: SummaryOutcome) -> list[tuple[str, str]]:
    row = sweep_table([outcome])[0]

    def fit(key: str) -> str:
        exponent, err = row[f"{key}_exponent"], row[f"{key}_stderr"]
        return "-" if exponent is None else f"{value(exponent)} ± {value(err)}"

    law = row["extreme_law"] or "-"
    if row["extreme_p_value"] is not None:
        law += f" (goodness-of-fit p = {value(row['extreme_p_value'])})"
    return [
        ("window", row["window"]),
        (
            "condensate fraction",
            f"{value(row['condensate_fraction'])} (expected {value(row['expected_fraction'])})",
        ),
        (
            "mean largest mass",
            f"{value(row['largest_mass'])} (expected {value(row['expected_mass'])})",
        ),
        ("growth exponent, typical mass", fit("typical_mass")),
        ("growth exponent, largest mass", fit("largest_mass")),
        ("growth exponent, coarsening length", fit("coarsening_length")),
        ("expected growth exponent 1/z", value(row["expected_exponent"])),
        ("extreme-value law", law),
    ]


def _figure(drawn: Drawn) -> Markup:
    if drawn.uri is None:
        return tag("p", f"{drawn.name}: not drawn: {drawn.missing}", class_="note")
    img = Markup(f'<img src="{drawn.uri}" alt="{join([drawn.alt])}">')
    return tag("figure", img, tag("figcaption", tag("strong", drawn.name), ": ", drawn.caption))


def summaries_section(
    run: Run, outcome: SummaryOutcome | None, source: str, problem: str | None = None
) -> Markup:
    """The run's summaries (``source``: ``stored`` in the run or ``computed`` for the page
    and held in memory) with their figures; without summaries, a line saying so and which
    command makes them (and ``problem``, when computing them failed)."""
    parts: list[Any] = [tag("h3", "Summaries")]
    if outcome is None:
        parts.append(
            tag(
                "p",
                "This run has no stored summaries. ",
                tag("code", f"massarc summarize {run.name}"),
                " computes and stores them; ",
                tag("code", "massarc report --summarize"),
                " computes them for the page only, without writing into the run.",
                class_="note",
            )
        )
        if problem:
            parts.append(tag("p", f"They could not be computed here: {problem}", class_="note"))
        return join(parts)
    prov = outcome.findings
    if source == "stored":
        said = (
            f"Stored in the run by massarc {prov.get('massarc_version', '?')} on "
            f"{prov.get('created', '?')}."
        )
    else:
        said = "Computed for this page and held in memory; the run was not written."
    parts.append(tag("p", said))
    parts.append(table(("observable", "value"), _finding_rows(outcome), caption="Findings"))
    if not plotting_available():
        parts.append(tag("p", missing_plot_extra(), class_="note"))
        return join(parts)
    parts.extend(_figure(d) for d in draw_figures(outcome.run))
    return join(parts)
