"""What a Jupyter notebook shows for a run and a collection (``_repr_html_``).

Archives are hostile input: every datum that comes from one (names, metadata, problems)
is escaped with :func:`html.escape` before it goes into the page. Nothing here decodes a
chunk: the view is built from the header and the array shapes, like ``massarc info``.

>>> from massarc.archive import open_run
>>> page = run_html(open_run("samples/depot-ring.zarr"))
>>> "zrp" in page and "12288" in page
True
"""

from __future__ import annotations

import html
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from .labelled import Collection
    from .reader import Run

__all__ = ["collection_html", "rows_html", "run_html"]


def rows_html(rows: list[tuple[str, Any]]) -> str:
    """A two-column table of (label, value), both escaped."""
    body = "".join(
        f"<tr><th style='text-align:left'>{html.escape(str(k))}</th>"
        f"<td style='text-align:left'>{html.escape(str(v))}</td></tr>"
        for k, v in rows
    )
    return f"<table>{body}</table>"


def _model(run: Run) -> str:
    if run.meta is None:
        return "no valid header"
    model = run.meta.model.model_dump(mode="json", exclude_none=True)
    return ", ".join(f"{k}={v}" for k, v in model.items())


def _span(run: Run) -> str:
    if not run.has_data or run.array("time") is None:
        return "no committed snapshot"
    t = run.times
    units = run.meta.run.time_units if run.meta is not None else None
    return f"{t[0]:g} .. {t[-1]:g}" + (f" {units}" if units else "")


def run_html(run: Run) -> str:
    """The notebook view of one run: model, lattice, extent, time span, write state,
    summaries, and what is wrong with it."""
    meta = run.meta
    rows: list[tuple[str, Any]] = [("model", _model(run))]
    if meta is not None:
        rows.append(("lattice", f"{list(meta.lattice.sites)} {', '.join(meta.lattice.boundary)}"))
        rows.append(("claims", meta.run.regime))
    try:
        shape = f"{run.n_replicas} replicas x {run.n_snapshots} snapshots, {run.dtype}"
    except Exception as exc:  # an unreadable mass array: the view still shows the rest
        shape = f"unreadable: {exc}"
    rows += [("extent", shape), ("time", _span(run)), ("complete", run.complete)]
    try:
        stored = run.summaries
    except Exception as exc:  # a store that cannot list its groups
        stored, rows = None, [*rows, ("summaries", f"unreadable: {exc}")]
    if stored is not None:
        rows.append(("summaries", ", ".join(stored)))
    for problem in [*run.problems, *run.unreadable.values()]:
        rows.append(("problem", problem))
    return f"<div><strong>massarc run {html.escape(run.name)}</strong>{rows_html(rows)}</div>"


def collection_html(collection: Collection) -> str:
    """The notebook view of a collection: one row per run."""
    head = "".join(f"<th>{h}</th>" for h in ("run", "model", "extent", "complete"))
    body = []
    for run in collection:
        try:
            extent = f"{run.n_replicas} x {run.n_snapshots} x {list(run.sites)}"
        except Exception as exc:  # an unreadable mass array
            extent = f"unreadable: {exc}"
        cells = (run.name, _model(run), extent, run.complete)
        body.append("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in cells) + "</tr>")
    title = html.escape(f"massarc collection {collection.name} ({len(collection)} runs)")
    return f"<div><strong>{title}</strong><table><tr>{head}</tr>{''.join(body)}</table></div>"
