"""Shared plumbing of the CLI commands: one-line errors with exit status 2, progress bars."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import NoReturn

import click

from massarc.archive import ArchiveError
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
def progress_bar(
    description: str, total: float | None, *, quiet: bool = False, unit: str = ""
) -> Iterator[Callable[[float], None]]:
    """A rich progress bar on stderr, shown only when stderr is a terminal and not quiet.

    Yields ``advance(done)`` that sets the completed amount.
    """
    if quiet or not sys.stderr.isatty():
        yield lambda done: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

    columns = [
        TextColumn("{task.description}"),
        BarColumn(),
        TextColumn("{task.completed:.0f}/{task.total:.0f} " + unit),
        TimeRemainingColumn(),
    ]
    with Progress(*columns, console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task(description, total=total)
        yield lambda done: bar.update(task, completed=done)
