"""``massarc schema``: print the JSON Schema of the metadata file, the archive header or the
JSON report of ``massarc check``."""

from __future__ import annotations

import json

import click

from massarc.schema import json_schema


@click.command("schema")
@click.option(
    "--of",
    "which",
    type=click.Choice(["metadata", "header", "report"]),
    default="metadata",
    show_default=True,
    help="metadata: the hand-written metadata file; header: the archive's group attribute; "
    "report: the JSON report of `massarc check --as json`.",
)
def command(which: str) -> None:
    """Print the JSON Schema (draft 2020-12) of run metadata."""
    if which == "report":
        from massarc.validators.report import report_schema

        schema = report_schema()
    else:
        schema = json_schema(which)
    click.echo(json.dumps(schema, indent=2, sort_keys=True))
