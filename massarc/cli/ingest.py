"""``massarc ingest``: archive a run live from a pipe (``./sim | massarc ingest - run.zarr``).

The command parses options and reports; the work is :func:`massarc.archive.formats.ingest`.
"""

from __future__ import annotations

import click

from massarc.archive.formats.ingest import ingest, open_input

from ._common import bad_input, die, metadata_options, progress_bar

__all__ = ["command"]


@click.command("ingest")
@click.argument("src")
@click.argument("dst")
@metadata_options
@click.option(
    "--resume",
    is_flag=True,
    help="Continue an archive after a crash; snapshots it holds are skipped.",
)
@click.option("--overwrite", is_flag=True, help="Replace an existing DST.")
@click.option("--quiet", "-q", is_flag=True, help="No progress display, no summary.")
def command(
    src: str,
    dst: str,
    meta: str | None,
    overrides: tuple[str, ...],
    resume: bool,
    overwrite: bool,
    quiet: bool,
) -> None:
    """Append the text snapshots read from SRC ('-' for standard input, or a path or FIFO)
    to the archive DST as they arrive, committing whenever the input pauses.

    \b
    ./simulate | massarc ingest - run.zarr --meta meta.toml
    ./simulate | massarc ingest - run.zarr --meta meta.toml --resume   # after a crash
    """
    if resume and overwrite:
        die("ingest", "expected --resume or --overwrite; got both")
    with bad_input("ingest"), progress_bar(f"ingest -> {dst}", quiet=quiet) as progress:
        stream, label = open_input(src)
        try:
            report = ingest(
                stream,
                dst,
                meta=meta,
                overrides=overrides,
                resume=resume,
                overwrite=overwrite,
                progress=progress,
                name=label,
            )
        except OSError as exc:
            die("ingest", f"{exc.filename or label}: {exc.strerror or exc}")
        finally:
            if src != "-":
                stream.close()
    if not quiet:
        skipped = f", {report.skipped} already archived" if report.skipped else ""
        click.echo(
            f"{report.destination}: {report.appended} snapshots appended{skipped}; "
            f"{report.n_replicas} replicas x {report.n_snapshots} snapshots, complete"
        )
