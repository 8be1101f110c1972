"""Print and export summaries: one table across a sweep, JSON, and files for other tools.

The table has one row per run with the model (family, b or w, L, density), the critical
density and theory's verdict on condensation (:func:`massarc.schema.sweep_point`), whether
a stationary window was found, the window, the
condensate fraction measured against 1 - rho_c / rho, and the growth exponents of the
typical mass, the largest mass and the coarsening length next to the expected 1/z (a
``?`` marks a fitting range too short to mean anything; a run started in the steady state
shows ``-``: it has no growth to measure). It reads only the group
attributes, so a sweep of many runs prints at once.

Export: ``csv`` writes ``DIR/<run>/<array>.csv`` in long form (one column per dimension,
the time dimension as ``snapshot`` followed by its ``time``, then ``value``) and
``DIR/runs.csv`` (the table);
``json`` writes ``DIR/<run>.json`` with every array (dimensions, units, values,
attributes) and the provenance.
"""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Sequence
from pathlib import Path
from typing import IO, Any

import numpy as np

from massarc.archive.summaries import plain
from massarc.schema.sweep import sweep_point, write_rows

from .api import SummaryOutcome

__all__ = ["RENDERINGS", "export_summaries", "render_summaries", "sweep_table"]

#: How ``massarc summarize`` prints (``--as``).
RENDERINGS = ("table", "json", "csv")


def _num(value: Any, digits: int = 3) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-"
    return f"{value:.{digits}g}"


def _yes_no(value: bool | None) -> str:
    return "-" if value is None else ("yes" if value else "no")


def _exponent(fit: dict[str, Any]) -> str:
    if fit.get("exponent") is None or fit.get("steady_start"):
        return "-"
    text = f"{fit['exponent']:.3f}"
    if fit.get("stderr") is not None:
        text += f"±{fit['stderr']:.3f}"
    return text + ("?" if fit.get("too_short") else "")


def sweep_table(outcomes: Sequence[SummaryOutcome]) -> list[dict[str, Any]]:
    """One plain row per run: model, window, condensate, exponents, extreme-value law."""
    rows = []
    for out in outcomes:
        f = out.findings
        model, cond, window = f.get("model", {}), f.get("condensate", {}), f.get("window", {})
        expo, ext = f.get("exponents", {}), f.get("extremes", {})
        best = ext.get("best")
        point = sweep_point(out.run.meta)
        rows.append({
            "run": out.run.name,
            "family": model.get("family"),
            "drift": model.get("drift"),
            "parameter": model.get("parameter"),
            "sites": "x".join(str(s) for s in model.get("sites", [])),
            "density": model.get("density"),
            "critical_density": point.critical_density,
            "condensed": point.condensed,
            "stationary": window.get("stationary_found"),
            "window_start": window.get("start"),
            "replicas": f.get("extent", {}).get("replicas"),
            "snapshots": f.get("extent", {}).get("snapshots"),
            "window": f"{window.get('rule')} from {window.get('start')}",
            "condensate_fraction": cond.get("condensate_fraction"),
            "expected_fraction": cond.get("fraction"),
            "largest_mass": cond.get("largest_mass", {}).get("mean"),
            "expected_mass": cond.get("mass"),
            "largest_mass_var": cond.get("largest_mass", {}).get("var"),
            "largest_mass_half_width_68": cond.get("largest_mass", {}).get("half_width_68"),
            "expected_exponent": expo.get("typical_mass", {}).get("expected"),
            **{f"{k}_exponent": expo.get(k, {}).get("exponent") for k in
               ("typical_mass", "largest_mass", "coarsening_length")},
            **{f"{k}_stderr": expo.get(k, {}).get("stderr") for k in
               ("typical_mass", "largest_mass", "coarsening_length")},
            "fit_too_short": bool(expo.get("typical_mass", {}).get("too_short", True)),
            "extreme_law": best,
            "extreme_p_value": ext.get("laws", {}).get(best, {}).get("p_value") if best else None,
            "computed": out.computed,
        })  # fmt: skip
    return rows


def _table(outcomes: Sequence[SummaryOutcome], file: IO[str]) -> None:
    from rich import box
    from rich.console import Console
    from rich.table import Table

    console = Console(file=file, width=None if file.isatty() else 200, soft_wrap=False)
    table = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False)
    heads = ["run", "model", "L", "rho", "rho_c", "condensed", "stationary", "window",
             "cond. frac", "expected", "m_typ ~ t^a", "m_max ~ t^a", "l ~ t^a", "1/z",
             "extremes (p)"]  # fmt: skip
    for h in heads:
        table.add_column(h, overflow="fold")
    for out, row in zip(outcomes, sweep_table(outcomes), strict=True):
        expo = out.findings.get("exponents", {})
        drift = {"asymmetric": " driven", "symmetric": " sym."}.get(row["drift"] or "", "")
        law = row["extreme_law"] or "-"
        if row["extreme_p_value"] is not None:
            law += f" ({row['extreme_p_value']:.2g})"
        table.add_row(
            row["run"], f"{row['family']}{drift} {row['parameter']}", row["sites"],
            _num(row["density"]), _num(row["critical_density"]), _yes_no(row["condensed"]),
            _yes_no(row["stationary"]), row["window"], _num(row["condensate_fraction"]),
            _num(row["expected_fraction"]), _exponent(expo.get("typical_mass", {})),
            _exponent(expo.get("largest_mass", {})), _exponent(expo.get("coarsening_length", {})),
            _num(row["expected_exponent"]), law,
        )  # fmt: skip
    console.print(table)
    fresh = sum(o.computed for o in outcomes)
    console.print(
        f"{len(outcomes)} run(s): {fresh} summarised, {len(outcomes) - fresh} already up to "
        "date; ? = fitting range too short to mean anything; - = none, or a steady start",
        highlight=False,
    )


def render_summaries(outcomes: Sequence[SummaryOutcome], rendering: str, file: IO[str]) -> None:
    """Write the table (``table``), every run's findings and table row (``json``), or the
    table's rows as CSV (``csv``)."""
    if rendering == "table":
        _table(outcomes, file)
        return
    if rendering == "csv":
        write_rows(sweep_table(outcomes), file)
        return
    if rendering != "json":
        raise ValueError(f"rendering: expected one of {', '.join(RENDERINGS)}; got {rendering!r}")
    doc = {
        "runs": [
            {"path": o.run.name, "row": row, "arrays": sorted(o.summaries), **o.findings}
            for o, row in zip(outcomes, sweep_table(outcomes), strict=True)
        ]
    }
    file.write(json.dumps(plain(doc), indent=2) + "\n")


def _stems(outcomes: Sequence[SummaryOutcome]) -> list[str]:
    stems: list[str] = []
    for o in outcomes:
        base = Path(o.run.name.rstrip("/")).name.removesuffix(".zarr") or "run"
        stem, k = base, 2
        while stem in stems:
            stem, k = f"{base}-{k}", k + 1
        stems.append(stem)
    return stems


def _long_rows(data: np.ndarray, dims: tuple[str, ...], times: np.ndarray) -> tuple[list, list]:
    """Long form: one row per element, its indices (the ``time`` index as ``snapshot``,
    followed by its ``time``) and its value (NaN as an empty cell)."""
    index = np.indices(data.shape).reshape(data.ndim, -1)
    cols: list[np.ndarray] = list(index)
    head = ["snapshot" if d == "time" else d for d in dims]
    if "time" in dims:
        head.append("time")
        cols.append(times[index[dims.index("time")]])
    head.append("value")
    values = data.reshape(-1).astype(object)
    if data.dtype.kind == "f":
        values[~np.isfinite(data.reshape(-1))] = ""
    cols.append(values)
    return head, list(zip(*(c.tolist() for c in cols), strict=True))


def export_summaries(outcomes: Sequence[SummaryOutcome], kind: str, directory: Path) -> list[Path]:
    """Write the summaries for tools that plot elsewhere (``csv`` or ``json``); returns
    the files written."""
    directory.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    for out, stem in zip(outcomes, _stems(outcomes), strict=True):
        s, times = out.summaries, np.asarray(out.run.times)
        if kind == "json":
            doc = {
                "path": out.run.name,
                "provenance": s.provenance,
                "arrays": {
                    n: {"dims": s.dims(n), "values": s.array(n), "attrs": s.attrs(n)} for n in s
                },
            }
            path = directory / f"{stem}.json"
            path.write_text(json.dumps(plain(doc)) + "\n", encoding="utf-8")
            written.append(path)
            continue
        folder = directory / stem
        folder.mkdir(exist_ok=True)
        for name in s:
            head, rows = _long_rows(s.array(name), s.dims(name), times)
            path = folder / f"{name}.csv"
            with path.open("w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(head)
                w.writerows(rows)
            written.append(path)
    if kind == "csv":
        rows = sweep_table(outcomes)
        path = directory / "runs.csv"
        with path.open("w", newline="", encoding="utf-8") as fh:
            write_rows(plain(rows), fh)
        written.append(path)
    return written
