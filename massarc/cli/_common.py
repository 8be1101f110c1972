"""Shared plumbing of the CLI commands: one-line errors with exit status 2, progress bars."""

from __future__ import annotations

import sys
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any, NoReturn

import click

from massarc.archive import ArchiveError
from massarc.archive.progress import Progress
from massarc.schema import MetadataError

__all__ = ["EXIT_BAD_INPUT", "bad_input", "die", "progress_bar"]

EXIT_BAD_INPUT = 2


def die(command: str, message: str) -> NoReturn:
    """Print ``massarc COMMAND: error: MESSAGE`` (one line) to stderr and exit with status 2."""
    one_line = " ".join(str(message).split())
    click.echo(f"massarc {command}: error: {one_line}", err=True)
    sys.exit(EXIT_BAD_INPUT)


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
