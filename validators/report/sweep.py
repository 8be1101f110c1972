"""The sweep table of an audit: one row per run across the parameters of a collection.

Each row shows the run's model parameters (:class:`massarc.schema.SweepPoint`) and three
verdicts at a glance:

* ``condensed``: theory's verdict, density above the critical density rho_c (see
  :mod:`massarc.schema.sweep`); None when either is unknown;
* ``stationary``: the status of the ``steady-state`` check, with the start of the
  stationary window it found (``window_start``, a snapshot index) and whether the window is
  certified (R-hat and ESS within their limits);
* ``valid``: the run's status, the worst of all its checks.

It is part of every rendering of a report of several runs: below the check table, under
``"sweep"`` in JSON, and alone as CSV (``--as csv``, one run per line).
"""

from __future__ import annotations

from typing import IO, TYPE_CHECKING, Any

from pydantic import BaseModel, ConfigDict

from massarc.schema.sweep import SweepPoint, write_rows

from ..engine.result import Status
from .model import AuditReport, RunReport

if TYPE_CHECKING:
    from rich.console import Console

__all__ = ["STEADY_CHECK", "SweepRow", "render_sweep", "sweep_csv", "sweep_rows"]

#: The check whose verdict is the ``stationary`` column.
STEADY_CHECK = "steady-state"


class SweepRow(BaseModel):
    """One row of the sweep table; ``SweepRow.model_json_schema()`` is its JSON Schema.
    The point's fields are None for a run without valid metadata."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    run: str
    family: str | None
    drift: str | None
    parameter: str | None
    b: float | None
    chipping: float | None
    diffusion: float | None
    sites: list[int] | None
    volume: int | None
    density: float | None
    critical_density: float | None
    condensed: bool | None
    #: The ``steady-state`` check's status, the start of its stationary window (snapshot),
    #: and whether the window is certified.
    stationary: Status
    window_start: int | None
    certified: bool | None
    #: The run's status: the worst of its checks.
    valid: Status


def _row(run: RunReport) -> SweepRow:
    point = run.point.model_dump() if run.point is not None else {}
    steady = next((c for c in run.checks if c.id == STEADY_CHECK), None)
    values = steady.values if steady is not None else {}
    blank = dict.fromkeys(SweepPoint.model_fields)
    return SweepRow(
        run=run.path,
        **{**blank, **point},
        stationary=steady.status if steady is not None else "skip",
        window_start=values.get("start"),
        certified=values.get("certified"),
        valid=run.status,
    )


def sweep_rows(report: AuditReport) -> list[dict[str, Any]]:
    """One JSON-ready row per run (:class:`SweepRow`), in the report's order."""
    return [_row(run).model_dump() for run in report.runs]


def sweep_csv(report: AuditReport, file: IO[str]) -> None:
    """The sweep rows as CSV (header, then one line per run)."""
    write_rows(sweep_rows(report), file)


def _yes_no(value: bool | None) -> str:
    return "-" if value is None else ("yes" if value else "no")


def _num(value: float | None) -> str:
    return "-" if value is None else f"{value:.3g}"


def render_sweep(report: AuditReport, console: Console, styles: dict[str, str]) -> None:
    """Print the sweep table on ``console`` (statuses in ``styles``)."""
    from rich import box  # imported when a table is drawn: --list and JSON need none of it
    from rich.table import Table
    from rich.text import Text

    table = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, expand=False)
    heads = ("run", "model", "L", "rho", "rho_c", "condensed", "stationary", "from", "valid")
    for name in heads:
        table.add_column(name, overflow="fold")
    for row in sweep_rows(report):
        drift = {"asymmetric": " driven", "symmetric": " sym."}.get(row["drift"] or "", "")
        model = f"{row['family']}{drift} {row['parameter']}" if row["family"] else "-"
        table.add_row(
            row["run"],
            model,
            "x".join(str(s) for s in row["sites"] or []) or "-",
            _num(row["density"]),
            _num(row["critical_density"]),
            _yes_no(row["condensed"]),
            Text(row["stationary"], style=styles[row["stationary"]]),
            "-" if row["window_start"] is None else str(row["window_start"]),
            Text(row["valid"], style=styles[row["valid"]]),
        )
    console.print(table)
