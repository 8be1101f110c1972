"""Shared plumbing of the CLI commands: one-line errors with exit status 2, the progress
bar, and the options several commands take. Command modules import this module and never
one another."""

from __future__ import annotations

import sys
import traceback
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any, NoReturn, TypeVar

import click

from massarc.archive import ArchiveError
from massarc.archive.progress import Progress
from massarc.schema import MetadataError

__all__ = [
    "EXIT_BAD_INPUT",
    "bad_input",
    "command_class",
    "die",
    "key_values",
    "metadata_options",
    "one_line",
    "progress_bar",
    "rendering_option",
    "scheduler_option",
    "using_scheduler",
]

EXIT_BAD_INPUT = 2
#: Longest error message printed whole.
_LONGEST = 2000

_F = TypeVar("_F", bound=Callable[..., Any])


def one_line(message: str) -> str:
    """``message`` on one line, cut after 2000 characters (with the length given)."""
    text = " ".join(str(message).split())
    if len(text) > _LONGEST:  # a safety net: messages quote inputs, cut at the source
        text = f"{text[:_LONGEST]}... ({len(text)} characters)"
    return text


def _debugging() -> bool:
    ctx = click.get_current_context(silent=True)
    return bool(ctx is not None and ctx.find_root().params.get("debug"))


def die(command: str, message: str) -> NoReturn:
    """Print ``massarc COMMAND: error: MESSAGE`` (one line) to stderr and exit with status 2.

    Under ``massarc --debug`` the traceback of the exception being handled, if any, comes
    first."""
    if _debugging() and sys.exc_info()[0] is not None:
        traceback.print_exc()
    click.echo(f"massarc {command}: error: {one_line(message)}", err=True)
    sys.exit(EXIT_BAD_INPUT)


def command_class(command: str) -> type[click.Command]:
    """A click command class whose usage errors are one line on stderr with status 2, like
    every other bad input (``@click.command(name, cls=command_class(name))``)."""

    class OneLineErrors(click.Command):
        def make_context(self, info_name: Any, args: Any, parent: Any = None, **extra: Any) -> Any:
            try:
                return super().make_context(info_name, args, parent=parent, **extra)
            except click.UsageError as exc:
                die(command, exc.format_message())

    return OneLineErrors


@contextmanager
def bad_input(command: str) -> Iterator[None]:
    """Turn the errors of bad input (metadata, archive, data, missing files) into exit 2."""
    try:
        yield
    except (MetadataError, ArchiveError, FileNotFoundError, PermissionError) as exc:
        die(command, str(exc))


@contextmanager
def progress_bar(label: str, *, quiet: bool = False) -> Iterator[Progress]:
    """The one progress bar of the CLI: rich, on stderr, only on a terminal and not quiet.

    Yields a :data:`~massarc.archive.progress.Progress` callback. The bar is created on
    the first report, so that the total and the unit (chunks, snapshots or bytes) may
    come late; bytes are shown as sizes, other units as counts.
    """
    if quiet or not sys.stderr.isatty():
        yield lambda done, total, unit: None
        return
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        DownloadColumn,
        MofNCompleteColumn,
        TextColumn,
        TimeRemainingColumn,
    )
    from rich.progress import Progress as RichProgress

    state: dict[str, Any] = {}

    def report(done: int, total: int | None, unit: str) -> None:
        if "bar" not in state:
            amount = DownloadColumn() if unit == "bytes" else MofNCompleteColumn()
            bar = RichProgress(
                TextColumn("{task.description}"),
                BarColumn(),
                amount,
                TextColumn("" if unit == "bytes" else unit),
                TimeRemainingColumn(),
                console=Console(stderr=True),
                transient=True,
            )
            bar.start()
            state["bar"], state["task"] = bar, bar.add_task(label, total=total)
        state["bar"].update(state["task"], completed=done, total=total)

    try:
        yield report
    finally:
        if "bar" in state:
            state["bar"].stop()


def key_values(items: tuple[str, ...], command: str) -> dict[str, str]:
    """``--option key=value`` strings as a dict; a malformed one exits with status 2."""
    out = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            die(command, f"--option {item!r}: expected KEY=VALUE")
        out[key.strip()] = value.strip()
    return out


def metadata_options(func: _F) -> _F:
    """The ``--meta FILE`` and ``--set KEY.PATH=VALUE`` options of convert and ingest."""
    func = click.option(
        "--set",
        "overrides",
        multiple=True,
        metavar="KEY.PATH=VALUE",
        help="Override one metadata entry (repeatable).",
    )(func)
    return click.option("--meta", "meta", metavar="FILE", help="Metadata file (TOML or JSON).")(
        func
    )


def settings_options(func: _F) -> _F:
    """The audit settings ``check`` and ``report`` share: ``--strict/--no-strict``,
    ``--skip``, ``--only``, ``--set ID.OPTION=VALUE`` and ``--config``."""
    options = [
        click.option("--strict/--no-strict", default=None, help="Warnings count as failures."),
        click.option(
            "--skip", multiple=True, metavar="ID", help="Do not run this check (repeatable)."
        ),
        click.option(
            "--only", multiple=True, metavar="ID", help="Run only this check (repeatable)."
        ),
        click.option(
            "--set",
            "sets",
            multiple=True,
            metavar="ID.OPTION=VALUE",
            help="Set a check option, e.g. conservation.tolerance=0 (repeatable).",
        ),
        click.option(
            "--config",
            type=click.Path(dir_okay=False),
            help="Settings file (default: the nearest massarc.toml, or pyproject.toml with "
            "[tool.massarc], from the current directory up; never a file that travels with "
            "the runs).",
        ),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def audit_with_settings(
    command: str,
    runs: list[Any],
    settings: Any,
    *,
    progress: Progress,
    workers: int | None,
    scheduler: Any = None,
) -> Any:
    """The audit of ``runs`` under ``settings`` (an ``AuditSettings``), recording where each
    option came from and the configuration files ignored; a settings error ends
    ``command`` with one line."""
    from massarc.validators import ConfigError, audit  # only the auditing commands need it

    try:
        return audit(
            runs,
            checks=settings.only,
            skip=settings.skip,
            options=settings.options,
            strict=settings.strict,
            progress=progress,
            workers=workers,
            config=settings.source,
            scheduler=scheduler,
            origins=settings.origins,
            ignored=settings.ignored,
        )
    except ConfigError as exc:
        die(command, str(exc))


def rendering_option(renderings: tuple[str, ...], help_text: str) -> Callable[[_F], _F]:
    """The ``--as NAME`` option: how a command prints its result (the first is the
    default); the command receives it as ``rendering``."""
    return click.option(
        "--as",
        "rendering",
        type=click.Choice(renderings),
        default=renderings[0],
        show_default=True,
        help=help_text,
    )


def scheduler_option(func: _F) -> _F:
    """The ``--scheduler`` option of the commands that make a single pass (``check``,
    ``summarize``); the command receives it as ``scheduler``."""
    return click.option(
        "--scheduler",
        "scheduler",
        metavar="ADDRESS",
        help="Run the single pass as a Dask graph: on a running dask.distributed scheduler "
        "(tcp://host:8786), or threads, processes, synchronous (Dask's local schedulers). "
        "Default: $MASSARC_SCHEDULER, else massarc's own threads, the fastest on one machine.",
    )(func)


@contextmanager
def using_scheduler(command: str, option: str | None, *, quiet: bool = False) -> Iterator[Any]:
    """The Dask scheduler ``--scheduler`` (or ``MASSARC_SCHEDULER``) asks for, connected
    (:class:`massarc.archive.distributed.Scheduler`), or None for the local pass. Says on
    stderr where the pass runs, with the dashboard link, unless ``quiet``; the scheduler
    address is shown as scheme and host only. Exits with status 2 when it cannot be used."""
    from massarc.archive.distributed import SchedulerError, connect, scheduler_choice

    name = scheduler_choice(option)
    if name is None:
        yield None
        return
    try:
        scheduler = connect(name)
    except SchedulerError as exc:
        die(command, str(exc))
    if not quiet:
        board = scheduler.dashboard
        where = f"; dashboard {board}" if board else ""
        click.echo(f"massarc {command}: single pass on Dask ({scheduler.shown}){where}", err=True)
    try:
        yield scheduler
    finally:
        scheduler.close()
