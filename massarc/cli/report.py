"""``massarc report RUN_OR_COLLECTION... -o report.html``: audit runs and write one
self-contained HTML page a referee can open: metadata, every check (failures first),
the summaries with their figures, and the provenance.

The audit takes the settings ``massarc check`` takes (``--config``, ``--set``, ``--skip``,
``--only``, ``--strict``). Summaries are those stored in each run; ``--summarize`` computes
them for the page, held in memory, for runs that have none stored. The runs are only read:
a FILE inside a run (or inside a collection given) is refused, and the page is written
under a temporary name first and renamed when complete.

Exit status: 0 when the page was written, whatever the checks found (``massarc check`` is
the gate), or 2 with one line ``massarc report: error: ...`` on stderr for bad input: a
location that is not a run, a wrong setting, an output that cannot be written there.
"""

from __future__ import annotations

import os
import shlex
import tempfile
from pathlib import Path
from typing import Any

import click

from massarc.archive import ArchiveError, Run
from massarc.archive.store import local_path
from massarc.summaries import SummaryOutcome, summarize_in_memory
from massarc.summaries.report import PageRun, report_page
from massarc.validators import ConfigError, open_for_audit, resolve_settings

from ._common import (
    audit_with_settings,
    bad_input,
    command_class,
    die,
    progress_bar,
    settings_options,
)

__all__ = ["command"]

_NAME = "report"


def _inside(target: Path, locations: list[str]) -> str | None:
    """The location ``target`` lies in (or is), if any."""
    where = target.resolve()
    for location in locations:
        root = local_path(location)
        if root is not None and where.is_relative_to(root.resolve()):
            return location
    return None


def _command_line(params: dict[str, Any]) -> str:
    """The command as given, rebuilt from the parsed options (defaults left out)."""
    words = ["massarc", _NAME, *params["runs"], "-o", params["output"]]
    for name in ("skip", "only", "sets"):
        flag = "--set" if name == "sets" else f"--{name}"
        for item in params[name]:
            words += [flag, item]
    if params["config"]:
        words += ["--config", params["config"]]
    if params["strict"] is not None:
        words.append("--strict" if params["strict"] else "--no-strict")
    if params["summarize"]:
        words.append("--summarize")
    return shlex.join(words)


def _summaries(run: Run, compute: bool) -> tuple[SummaryOutcome | None, str, str | None]:
    """The run's summaries: (outcome, source, why they could not be computed)."""
    try:
        stored = run.summaries
    except ArchiveError as exc:
        return None, "absent", str(exc)
    if stored is not None:
        return SummaryOutcome(run, stored, False, 0.0), "stored", None
    if not compute:
        return None, "absent", None
    try:
        return summarize_in_memory(run), "computed", None
    except (ArchiveError, ValueError) as exc:
        return None, "absent", str(exc)


def _write(text: str, output: Path) -> None:
    """Write under a temporary name beside ``output``, then rename it into place."""
    handle, temporary = tempfile.mkstemp(prefix=f".{output.name}.", dir=output.parent)
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            out.write(text)
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(temporary, 0o666 & ~mask)  # as an ordinary new file (mkstemp makes 0600)
        os.replace(temporary, output)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


@click.command(_NAME, cls=command_class(_NAME))
@click.argument("runs", nargs=-1, metavar="RUN_OR_COLLECTION...")
@click.option("--output", "-o", required=True, metavar="FILE", help="The HTML file to write.")
@click.option(
    "--summarize",
    is_flag=True,
    help="Compute summaries for runs that have none stored, for the page only "
    "(held in memory; the runs are not written).",
)
@settings_options
@click.option("--workers", type=click.IntRange(min=1), help="Threads reading chunks.")
@click.option("--quiet", "-q", is_flag=True, help="No progress bar, no closing line.")
def command(
    runs: tuple[str, ...],
    output: str,
    summarize: bool,
    strict: bool | None,
    skip: tuple[str, ...],
    only: tuple[str, ...],
    sets: tuple[str, ...],
    config: str | None,
    workers: int | None,
    quiet: bool,
) -> None:
    """Audit runs and write one HTML page with their metadata, checks, summaries and
    figures (self-contained: no network, no script)."""
    if not runs:
        die(_NAME, "expected at least one RUN_OR_COLLECTION; got none")
    target = Path(output)
    if not target.parent.is_dir():
        die(_NAME, f"{output}: directory {target.parent} does not exist")
    if target.is_dir():
        die(_NAME, f"{output}: is a directory; expected a file name such as report.html")
    try:
        settings = resolve_settings(config=config, skip=skip, only=only, strict=strict, sets=sets)
    except ConfigError as exc:
        die(_NAME, str(exc))
    opened: list[Run] = []
    with bad_input(_NAME):
        for location in runs:
            opened.extend(open_for_audit(location))
    home = _inside(target, [*runs, *(r.name for r in opened)])
    if home is not None:
        die(_NAME, f"{output}: lies inside {home}; the report never writes into a run")
    with progress_bar("auditing", quiet=quiet) as progress:
        report = audit_with_settings(_NAME, opened, settings, progress=progress, workers=workers)
    pages = []
    for run, checked in zip(opened, report.runs, strict=True):
        outcome, source, problem = _summaries(run, summarize)
        pages.append(PageRun(run, checked, outcome, source, problem))
    params = click.get_current_context().params
    text = report_page(pages, report, settings, command=_command_line(params))
    try:
        _write(text, target)
    except OSError as exc:
        die(_NAME, f"{output}: cannot write the report ({exc.strerror or exc})")
    if not quiet:
        click.echo(f"report of {len(pages)} run(s) written to {target}")
