"""``massarc convert``: between run archives and other formats, either way.

The command parses options and reports; the work is :func:`massarc.archive.formats.convert`.
"""

from __future__ import annotations

import click

from massarc.archive.formats import (
    ConvertReport,
    collection_members,
    convert,
    convert_collection,
    format_listing,
)

from ._common import bad_input, die, key_values, metadata_options, progress_bar

__all__ = ["command"]


def _list_formats() -> None:
    rows = format_listing()
    width = max(len(r["name"]) for r in rows)
    for r in rows:
        suffixes = " ".join(r["suffixes"]) or "-"
        click.echo(f"{r['name']:<{width}}  {r['modes']:<10}  {suffixes:<22}  {r['description']}")
        for side in ("read_options", "write_options"):
            for key, text in r[side].items():
                click.echo(f"{'':<{width}}    --option {key}=...  ({side.split('_')[0]}) {text}")
    click.echo(
        "\nThe format is found from the content, then the name; choose it with "
        "--from NAME / --to NAME."
    )


@click.command("convert")
@click.argument("src", required=False)
@click.argument("dst", required=False)
@metadata_options
@click.option("--from", "src_format", metavar="NAME", help="Format of SRC (skip detection).")
@click.option("--to", "dst_format", metavar="NAME", help="Format of DST (skip detection).")
@click.option(
    "--option",
    "options",
    multiple=True,
    metavar="KEY=VALUE",
    help="A format option (repeatable; from.KEY / to.KEY pick the side).",
)
@click.option("--overwrite", is_flag=True, help="Replace an existing DST.")
@click.option(
    "--allow-missing",
    is_flag=True,
    help="Export an archive with missing or corrupt chunks: their snapshots are marked in "
    "an explicit mask (see docs/formats.md) instead of failing.",
)
@click.option("--quiet", "-q", is_flag=True, help="No progress bar, no notes.")
@click.option("--list-formats", is_flag=True, help="List the known formats and exit.")
def command(
    src: str | None,
    dst: str | None,
    meta: str | None,
    overrides: tuple[str, ...],
    src_format: str | None,
    dst_format: str | None,
    options: tuple[str, ...],
    overwrite: bool,
    allow_missing: bool,
    quiet: bool,
    list_formats: bool,
) -> None:
    """Convert SRC to DST: into a run archive (run.zarr), out of one, or between formats.

    \b
    massarc convert run.npz run.zarr --meta meta.toml
    massarc convert run.zarr run.txt
    massarc convert sweep/ sweep-text/ --to text       # every run of a collection
    massarc convert traj.h5 run.zarr --meta meta.toml --option mass=/traj/mass
    """
    if list_formats:
        with bad_input("convert"):
            _list_formats()
        return
    if src is None or dst is None:
        die("convert", "expected SRC and DST (or --list-formats)")
    shared = {
        "meta": meta,
        "overrides": overrides,
        "options": key_values(options, "convert"),
        "overwrite": overwrite,
        "allow_missing": allow_missing,
    }
    with bad_input("convert"):
        members = collection_members(src) if src_format in (None, "zarr") else None
    if members is not None:
        if dst_format is None:
            die(
                "convert",
                f"{src} is a collection of {len(members)} runs: choose the format "
                "of the outputs with --to NAME (they go into the directory DST)",
            )
        with bad_input("convert"), progress_bar(f"convert {src}", quiet=quiet) as progress:
            try:
                for report in convert_collection(
                    src, dst, dst_format=dst_format, progress=progress, **shared
                ):
                    _print_report(report, quiet)
            except (IsADirectoryError, NotADirectoryError, OSError) as exc:
                die("convert", f"{exc.filename or src}: {exc.strerror or exc}")
        return
    with bad_input("convert"), progress_bar(f"convert {src}", quiet=quiet) as progress:
        try:
            report = convert(
                src, dst, src_format=src_format, dst_format=dst_format, progress=progress,
                **shared,
            )  # fmt: skip
        except (IsADirectoryError, NotADirectoryError, OSError) as exc:
            die("convert", f"{exc.filename or src}: {exc.strerror or exc}")
    _print_report(report, quiet)


def _print_report(report: ConvertReport, quiet: bool) -> None:
    if quiet:
        return
    for note in report.notes:
        click.echo(f"massarc convert: note: {note}", err=True)
    sites = " x ".join(map(str, report.sites))
    click.echo(
        f"{report.destination}: {report.n_replicas} replicas x {report.n_snapshots} snapshots "
        f"x {sites} sites ({report.source_format} -> {report.destination_format})"
    )
