"""The ``massarc`` command line. Each command lives in its own module and registers here."""

from __future__ import annotations

import click

from massarc._version import __version__

__all__ = ["cli", "main"]


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="massarc")
def cli() -> None:
    """Archive, audit and convert lattice mass-transport runs."""


def _register() -> None:
    from . import check, convert, info, ingest, sample, schema_cmd

    for module in (info, schema_cmd, sample, check, convert, ingest):
        cli.add_command(module.command)


_register()


def main() -> None:
    """Console-script entry point."""
    cli(prog_name="massarc")
