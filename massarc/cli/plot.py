"""``massarc plot RUN FIGURE -o FILE``: draw one figure of a run from its stored summaries
and write it as PNG, SVG or PDF (chosen by the suffix of FILE).

FIGURE is one of ``largest-mass``, ``occupation``, ``correlation``, ``coarsening``,
``extremes``, ``space-time`` (:data:`massarc.summaries.figures.FIGURES`). The run is only
read: the file is written elsewhere (a FILE inside the run is refused), under a temporary
name first and renamed when complete. Exit status: 0, or 2 with one line
``massarc plot: error: ...`` on stderr for bad input: an unknown figure, a suffix other
than .png, .svg or .pdf, an option the figure does not take, a run without the summary the
figure needs (the message names it and ``massarc summarize RUN``), or matplotlib missing
(``pip install "massarc[plot]"``).
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Any

import click

from massarc.archive import NotARunError, open_run, open_runs
from massarc.archive.store import local_path
from massarc.summaries.figures import FIGURES

from ._common import bad_input, command_class, die

__all__ = ["SUFFIXES", "command"]

_NAME = "plot"

#: File suffixes written, and the format each means.
SUFFIXES = {".png": "png", ".svg": "svg", ".pdf": "pdf"}

#: Option -> the figure that takes it.
_ONLY = {"log": "largest-mass", "times": "correlation", "replica": "space-time",
         "snapshots": "space-time", "rows": "space-time"}  # fmt: skip


def _stretch(text: str) -> tuple[int | None, int | None]:
    first, sep, last = text.partition(":")
    try:
        if not sep:
            raise ValueError(text)
        return (int(first) if first.strip() else None, int(last) if last.strip() else None)
    except ValueError:
        die(_NAME, f"--snapshots {text!r}: expected FIRST:LAST, e.g. 0:1000 or 500:")


def _times(text: str) -> list[float]:
    try:
        return [float(t) for t in text.split(",") if t.strip()]
    except ValueError:
        die(_NAME, f"--times {text!r}: expected times separated by commas, e.g. 10,100,1000")


def _inside(path: Path, run_dir: Path | None) -> bool:
    if run_dir is None:
        return False
    return path.resolve().is_relative_to(run_dir.resolve())


def _write(fig: Any, output: Path, kind: str, dpi: int) -> None:
    """Save under a temporary name beside ``output``, then rename it into place."""
    handle, temporary = tempfile.mkstemp(prefix=f".{output.name}.", dir=output.parent)
    os.close(handle)
    try:
        fig.savefig(temporary, format=kind, dpi=dpi)
        os.replace(temporary, output)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


@click.command(_NAME, cls=command_class(_NAME))
@click.argument("run", metavar="RUN")
@click.argument("figure", metavar="FIGURE")
@click.option("--output", "-o", required=True, metavar="FILE",
              help="The file to write: .png, .svg or .pdf.")  # fmt: skip
@click.option("--log", "log", is_flag=True,
              help="largest-mass: logarithmic time and value axes.")  # fmt: skip
@click.option("--times", metavar="T1,T2,...",
              help="correlation: G at the probes nearest these times (run's units).")  # fmt: skip
@click.option("--replica", type=int, help="space-time: the replica shown (default 0).")
@click.option("--snapshots", metavar="FIRST:LAST",
              help="space-time: snapshots FIRST .. LAST-1 (either may be left out).")  # fmt: skip
@click.option("--rows", type=int,
              help="space-time: read at most this many snapshots (default 512).")  # fmt: skip
@click.option("--dpi", type=click.IntRange(20, 1200), default=150, show_default=True,
              help="Resolution of a PNG file.")  # fmt: skip
def command(
    run: str,
    figure: str,
    output: str,
    log: bool,
    times: str | None,
    replica: int | None,
    snapshots: str | None,
    rows: int | None,
    dpi: int,
) -> None:
    """Draw FIGURE of RUN from its stored summaries: largest-mass, occupation, correlation,
    coarsening, extremes or space-time (the masses of one replica)."""
    if figure not in FIGURES:
        die(_NAME, f"unknown figure {figure!r}; expected one of {', '.join(FIGURES)}")
    target = Path(output)
    kind = SUFFIXES.get(target.suffix.lower())
    if kind is None:
        die(_NAME, f"{output}: suffix {target.suffix or '(none)'!r} is not one of "
            f"{', '.join(SUFFIXES)}")  # fmt: skip
    given = {"log": log, "times": times, "replica": replica, "snapshots": snapshots,
             "rows": rows}  # fmt: skip
    for option, value in given.items():
        if value not in (None, False) and _ONLY[option] != figure:
            die(_NAME, f"--{option} applies to the {_ONLY[option]} figure, not {figure}")
    options: dict[str, Any] = {}
    if log:
        options["log"] = True
    if times is not None:
        options["times"] = _times(times)
    if replica is not None:
        options["replica"] = replica
    if snapshots is not None:
        options["start"], options["stop"] = _stretch(snapshots)
    if rows is not None:
        options["rows"] = rows
    if not target.parent.is_dir():
        die(_NAME, f"{output}: directory {target.parent} does not exist")
    with bad_input(_NAME):
        try:
            opened = open_run(run)
        except NotARunError:
            names = [r.name for r in open_runs(run)]  # raises when not a collection either
            die(_NAME, f"{run}: a collection, not a run; plot one of its runs, e.g. {names[0]}")
        if _inside(target, local_path(run)):
            die(_NAME, f"{output}: lies inside the run {run}; plotting never writes into a run")
        fig = FIGURES[figure](opened, **options)
    try:
        _write(fig, target, kind, dpi)
    except OSError as exc:
        die(_NAME, f"{output}: cannot write the figure ({exc.strerror or exc})")
