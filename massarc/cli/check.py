"""``massarc check``: audit runs and collections; render the report as a table, JSON or
JUnit XML (``--as``).

Exit status: 0 when no check failed, 1 when a check failed or raised, 2 when an input
could not be read (not a Zarr group, not a massarc run, unknown major format version) or
the command line or configuration was wrong, with one line ``massarc check: error: ...``
on stderr.

``--stamp`` writes the audit stamp into every run audited (FORMAT.md, section 10): the
massarc version, the time, each check's result with its options and where each option came
from, and the content digest. Every run must be a complete run in a writable local
directory; otherwise nothing is audited or written and the exit status is 2. The stamp
records failing verdicts too; ``massarc verify`` later tells whether the run still matches.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from massarc.archive.enclosing import enclosing_runs
from massarc.validators import (
    ConfigError,
    available_checks,
    open_for_audit,
    render,
    resolve_settings,
)
from massarc.validators.report import RENDERINGS, render_table

from ._common import (
    audit_with_settings,
    bad_input,
    command_class,
    die,
    progress_bar,
    rendering_option,
    scheduler_option,
    settings_options,
    using_scheduler,
)

__all__ = ["command"]

_NAME = "check"


def _listing() -> str:
    lines = []
    checks = available_checks()
    width = max((len(c) for c in checks), default=0)
    for cid, cls in checks.items():
        lines.append(f"{cid:<{width}}  {cls.description}")
        settings = {f"{cid}.{name}={opt.default!r}": opt for name, opt in cls.options.items()}
        pad = max((len(k) for k in settings), default=0)
        for text, opt in settings.items():
            lines.append(f"{'':<{width}}    {text:<{pad}}  {opt.help} ({opt.expected})")
    return "\n".join(lines)


@click.command(_NAME, cls=command_class(_NAME))
@click.argument("runs", nargs=-1, metavar="RUN_OR_COLLECTION...")
@rendering_option(
    RENDERINGS,
    "How to render the report. table: for people; json: for scripts; junit: JUnit XML for "
    "CI systems; csv: the sweep table, one row per run (parameters, condensed, stationary, "
    "valid).",
)
@click.option("--output", "-o", type=click.Path(dir_okay=False), help="Write the report here.")
@settings_options
@click.option("--list", "list_", is_flag=True, help="List the registered checks and exit.")
@click.option(
    "--from-files",
    is_flag=True,
    help="The arguments are files (as a pre-commit hook passes them): audit each run or "
    "collection that holds one, once; files outside any run are ignored, and none in a run "
    "is not an error.",
)
@click.option("--workers", type=click.IntRange(min=1), help="Threads reading chunks.")
@scheduler_option
@click.option("--quiet", "-q", is_flag=True, help="No progress bar; table: only non-passing.")
@click.option(
    "--stamp",
    is_flag=True,
    help="Record the audit and the content digest inside each run (complete local runs only; "
    "see massarc verify).",
)
def command(
    runs: tuple[str, ...],
    rendering: str,
    output: str | None,
    strict: bool | None,
    skip: tuple[str, ...],
    only: tuple[str, ...],
    sets: tuple[str, ...],
    config: str | None,
    list_: bool,
    from_files: bool,
    workers: int | None,
    scheduler: str | None,
    quiet: bool,
    stamp: bool,
) -> None:
    """Audit runs: metadata, integrity, time order, masses, conservation, and the
    statistical checks (see --list)."""
    if list_:
        click.echo(_listing())
        return
    if from_files:
        named = len(runs)
        runs = tuple(enclosing_runs(runs))
        if not runs:
            click.echo(f"{_NAME}: no massarc run holds any of the {named} files", err=True)
            return
    if not runs:
        die(_NAME, "expected at least one RUN_OR_COLLECTION; got none")
    try:
        settings = resolve_settings(
            config=config, skip=skip, only=only, strict=strict, sets=sets, runs=runs
        )
    except ConfigError as exc:
        die(_NAME, str(exc))
    for path in settings.ignored:
        click.echo(
            f"massarc {_NAME}: warning: ignored {path}: a configuration file inside the audited "
            "runs never sets the audit rules (use --config to choose one)",
            err=True,
        )
    opened = []
    with bad_input(_NAME):
        for location in runs:
            opened.extend(open_for_audit(location))
    if stamp:
        _refuse_unstampable(opened)
    with (
        using_scheduler(_NAME, scheduler, quiet=quiet) as dask_scheduler,
        progress_bar("auditing", quiet=quiet) as progress,
    ):
        report = audit_with_settings(
            _NAME,
            opened,
            settings,
            progress=progress,
            workers=workers,
            scheduler=dask_scheduler,
        )
    if stamp:
        _stamp(opened, report, settings, config, sets)
    if output is not None:
        try:
            with Path(output).open("w", encoding="utf-8") as out:
                if rendering == "table":
                    render_table(report, out, quiet=quiet)
                else:
                    out.write(render(report, rendering))
        except OSError as exc:
            die(_NAME, f"{output}: cannot write the report ({exc.strerror})")
    elif rendering == "table":
        render_table(report, sys.stdout, quiet=quiet)
    else:
        click.echo(render(report, rendering), nl=False)
    sys.exit(report.exit_code)


def _refuse_unstampable(runs: list) -> None:
    """Exit 2 before anything is audited when a run cannot be stamped."""
    from massarc.archive.stamp import stamp_problem

    for run in runs:
        problem = stamp_problem(run)
        if problem is not None:
            die(_NAME, f"{run.name}: cannot stamp: {problem}")


def _origins(settings: Any, config: str | None, sets: tuple[str, ...]) -> dict:
    """``{(check id, option): where its value came from}`` for every non-default option:
    ``--set`` or the settings file."""
    out = {}
    file_settings = resolve_settings(config=config) if settings.source else None
    for cid, opts in (file_settings.options if file_settings else {}).items():
        for name in opts:
            out[(cid, name)] = settings.source
    for item in sets:
        cid, _, name = item.partition("=")[0].strip().partition(".")
        out[(cid, name)] = "--set"
    return out


def _stamp(runs: list, report: Any, settings: Any, config: str | None, sets: tuple) -> None:
    """Write the stamp of every run (its digest recomputed after the audit)."""
    from massarc.archive import ArchiveError
    from massarc.archive.digest import content_digest
    from massarc.archive.stamp import stamp_document, write_stamp

    origins = _origins(settings, config, sets)
    registry = available_checks()
    for run, run_report in zip(runs, report.runs, strict=True):
        checks = []
        for result in run_report.checks:
            cls = registry.get(result.id)
            values = cls.option_values(settings.options.get(result.id)) if cls else {}
            options = {
                name: {"value": value, "from": origins.get((result.id, name), "default")}
                for name, value in values.items()
            }
            checks.append({**result.model_dump(mode="json"), "options": options})
        audit_record = {
            "status": run_report.status,
            "strict": report.strict,
            "config": settings.source,
            "checks": checks,
        }
        try:
            write_stamp(run, stamp_document(content_digest(run), audit_record))
        except ArchiveError as exc:
            die(_NAME, str(exc))
