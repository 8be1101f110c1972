"""``massarc schema``: print the JSON Schema of the metadata file or the archive header."""

from __future__ import annotations

import json

import click

from massarc.schema import json_schema


@click.command("schema")
@click.option(
    "--of",
    "which",
    type=click.Choice(["metadata", "header"]),
    default="metadata",
    show_default=True,
    help="metadata: the hand-written metadata file; header: the archive's group attribute.",
)
def command(which: str) -> None:
    """Print the JSON Schema (draft 2020-12) of run metadata."""
    click.echo(json.dumps(json_schema(which), indent=2, sort_keys=True))
