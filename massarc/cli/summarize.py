"""``massarc summarize``: compute the observables of runs and collections in one pass each,
store them in each run (the ``summaries`` group), print one table across the runs (``--as
table``) or JSON (``--as json``), and optionally export them (``--export csv|json DIR``).

Running it again does nothing to runs whose summaries are up to date (same options, same
committed extent); ``--force`` recomputes. Exit status: 0, or 2 with one line
``massarc summarize: error: ...`` on stderr for bad input (not a run, a run still being
written, an unknown option, a damaged chunk), in which case no run was modified (a damaged
chunk is found while reading: the runs before it are stored).
"""

from __future__ import annotations

import sys
from pathlib import Path

import click

from massarc.summaries import (
    RENDERINGS,
    SummaryOptions,
    export_summaries,
    open_for_summaries,
    render_summaries,
    summarize,
)

from ._common import (
    bad_input,
    command_class,
    die,
    key_values,
    progress_bar,
    rendering_option,
    scheduler_option,
    using_scheduler,
)

__all__ = ["command"]

_NAME = "summarize"


def _options(sets: tuple[str, ...]) -> SummaryOptions:
    values = {}
    for key, text in key_values(sets, _NAME).items():
        values[key] = SummaryOptions.parse_text(key, text)
    return SummaryOptions.from_mapping(values)


@click.command(_NAME, cls=command_class(_NAME))
@click.argument("runs", nargs=-1, metavar="RUN_OR_COLLECTION...")
@rendering_option(
    RENDERINGS,
    "How to print. table: one row per run; json: for scripts; csv: the table's rows "
    "(parameters, condensed, stationary, findings).",
)
@click.option(
    "--force", is_flag=True, help="Recompute even when the stored summaries are up to date."
)
@click.option(
    "--set",
    "sets",
    multiple=True,
    metavar="OPTION=VALUE",
    help="Set a summary option, e.g. probes=32 (repeatable; see --list).",
)
@click.option(
    "--export",
    "export",
    type=(click.Choice(["csv", "json"]), click.Path(file_okay=False)),
    metavar="csv|json DIR",
    help="Also write the observables into DIR for tools that plot elsewhere.",
)
@click.option("--list", "list_", is_flag=True, help="List the summary options and exit.")
@click.option("--workers", type=click.IntRange(min=1), help="Threads reading chunks.")
@scheduler_option
@click.option("--quiet", "-q", is_flag=True, help="No progress bar.")
def command(
    runs: tuple[str, ...],
    rendering: str,
    force: bool,
    sets: tuple[str, ...],
    export: tuple[str, str] | None,
    list_: bool,
    workers: int | None,
    scheduler: str | None,
    quiet: bool,
) -> None:
    """Compute and store the observables of runs: largest mass, occupation law, G(r, t),
    typical condensate mass, coarsening length, growth exponents, extreme-value fits."""
    if list_:
        click.echo("\n".join(SummaryOptions.help_lines()))
        return
    if not runs:
        die(_NAME, "expected at least one RUN_OR_COLLECTION; got none")
    try:
        options = _options(sets)
    except ValueError as exc:
        die(_NAME, str(exc))
    opened = []
    with bad_input(_NAME):
        for location in runs:
            opened.extend(open_for_summaries(location))
        with (
            using_scheduler(_NAME, scheduler, quiet=quiet) as dask_scheduler,
            progress_bar("summarizing", quiet=quiet) as progress,
        ):
            outcomes = summarize(
                opened,
                options,
                force=force,
                workers=workers,
                progress=progress,
                scheduler=dask_scheduler,
            )
    if export is not None:
        kind, directory = export
        try:
            export_summaries(outcomes, kind, Path(directory))
        except OSError as exc:
            die(_NAME, f"{directory}: cannot write the export ({exc.strerror or exc})")
    render_summaries(outcomes, rendering, sys.stdout)
