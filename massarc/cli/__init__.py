"""The ``massarc`` command line. Each command lives in its own module (exposing ``command``)
and is listed in :data:`COMMANDS`; a module is imported only when its command runs, so
``massarc --help`` and ``massarc --version`` start instantly. What commands share (errors,
the progress bar, common options) lives in :mod:`._common`; no command imports another.

An unexpected exception (a bug, or a fault of the machine no command foresaw) reaches the
user as one line ``massarc COMMAND: internal error: ...`` with exit status
:data:`EXIT_INTERNAL` (3), never as a traceback, unless ``massarc --debug`` (or the
environment variable ``MASSARC_DEBUG=1``) asks for the traceback."""

from __future__ import annotations

import importlib
from typing import Any

import click

from massarc.schema.version import __version__

__all__ = ["COMMANDS", "EXIT_INTERNAL", "cli", "main"]

#: Exit status of an unexpected internal error (0: done, 1: a check failed, 2: bad input).
EXIT_INTERNAL = 3

#: command name -> (module of massarc.cli, one-line help shown by ``massarc --help``)
COMMANDS: dict[str, tuple[str, str]] = {
    "info": ("info", "Describe runs: model, lattice, boundaries, data, storage."),
    "check": ("check", "Audit runs before publication; exit 1 when a check fails."),
    "verify": ("verify", "Tell whether stamped runs still match their audit stamp."),
    "summarize": ("summarize", "Compute and store the observables groups publish."),
    "plot": ("plot", "Draw a figure of a run from its stored summaries (PNG, SVG, PDF)."),
    "compare": ("compare", "Test whether two runs of one model agree; exit 1 when not."),
    "report": ("report", "Write one HTML page of runs: metadata, checks, summaries, figures."),
    "convert": ("convert", "Convert runs between formats, into or out of an archive."),
    "ingest": ("ingest", "Archive a run live from a simulator's text output."),
    "sample": ("sample", "Simulate a reference ZRP or CMAM run into an archive."),
    "schema": ("schema", "Print the JSON Schema of run metadata."),
}


class _LazyGroup(click.Group):
    def list_commands(self, ctx: click.Context) -> list[str]:
        return list(COMMANDS)

    def get_command(self, ctx: click.Context, name: str) -> click.Command | None:
        if name not in COMMANDS:
            return None
        module = importlib.import_module(f"{__name__}.{COMMANDS[name][0]}")
        command: click.Command = module.command
        return command

    def invoke(self, ctx: click.Context) -> Any:
        try:
            return super().invoke(ctx)
        except (click.ClickException, click.exceptions.Exit, click.exceptions.Abort):
            raise  # click's own ends: usage errors, --help, Ctrl-C
        except Exception as exc:
            if ctx.params.get("debug"):
                raise
            from ._common import one_line  # the error path only: keep start-up light

            text = one_line(f"{type(exc).__name__}: {exc}".strip())
            name = f"massarc {ctx.invoked_subcommand}" if ctx.invoked_subcommand else "massarc"
            click.echo(
                f"{name}: internal error: {text} (a bug in massarc, or a fault of the machine; "
                "run again with --debug for the traceback)",
                err=True,
            )
            ctx.exit(EXIT_INTERNAL)

    def format_commands(self, ctx: click.Context, formatter: Any) -> None:
        with formatter.section("Commands"):
            formatter.write_dl([(name, text) for name, (_, text) in COMMANDS.items()])


@click.group(cls=_LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="massarc")
@click.option(
    "--debug",
    is_flag=True,
    envvar="MASSARC_DEBUG",
    help="Show the traceback of an error (also MASSARC_DEBUG=1).",
)
def cli(debug: bool) -> None:
    """Archive, audit and convert lattice mass-transport runs (ZRP, CMAM and kin)."""


def main() -> None:
    """Console-script entry point."""
    cli(prog_name="massarc")
