"""Live ingestion: archive a run while a simulator prints it (``./sim | massarc ingest -``).

The input is the plain-text layout of the ``text`` format (:mod:`._text_rows`).
Snapshots are appended as they arrive and committed whenever the input has no further
complete line immediately available (and at least every ``commit_seconds``, at every
replica boundary and at the end), so after a kill of either side nothing before the last
complete snapshot that reached massarc is lost. A line without its newline at the end of
the input (a producer killed mid-line) is never archived.

``resume=True`` reopens the archive after a crash and skips every input snapshot it
already holds, matched by replica index and time: feeding the whole stream again neither
loses nor duplicates a snapshot. An archive that was never begun is simply started, so the
same command can be run again after any crash. At the end of the input the archive is
marked complete, unless its last replica is shorter than replica 0 or the input ended
mid-line; then it stays incomplete and :class:`~massarc.archive.DataError` says why.
"""

from __future__ import annotations

import contextlib
import os
import time
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

from massarc.schema import MetadataError, apply_overrides, parse_metadata, read_metadata_file

from ..errors import ArchiveError, DataError
from ..store import local_path
from ..writer import RunWriter, create_run, resume_run
from ._lines import LineParser, LineReader
from ._metadata import meta_dict
from ._text_rows import TEXT_MAGIC, rows_to_batch
from .registry import Progress
from .stream import BatchFeeder, archive_dtype, merge_dicts, resolve_metadata

__all__ = ["IngestReport", "ingest"]


@dataclass(frozen=True)
class IngestReport:
    """What an ingestion did: snapshots appended and skipped (already archived), the
    archive's extent, and whether it is complete."""

    destination: str
    appended: int
    skipped: int
    n_replicas: int
    n_snapshots: int
    complete: bool


def _guard_resume_meta(
    writer: RunWriter, meta: str | os.PathLike[str] | None, overrides: list[str]
) -> None:
    """``--meta``/``--set`` given again on resume must agree with the archive's physics."""
    if meta is None and not overrides:
        return
    given = apply_overrides(read_metadata_file(meta) if meta is not None else {}, overrides)
    merged = parse_metadata(merge_dicts(meta_dict(writer.meta), given), source=str(meta or "--set"))
    for key in ("model", "lattice"):
        if getattr(merged, key) != getattr(writer.meta, key):
            raise MetadataError(
                [f"{key}: expected the {key} of the archive being resumed; got a different one"],
                str(meta or "--set"),
            )


def ingest(
    src: BinaryIO | int | str | os.PathLike[str],
    dst: str | os.PathLike[str],
    *,
    meta: str | os.PathLike[str] | None = None,
    overrides: Iterable[str] = (),
    resume: bool = False,
    overwrite: bool = False,
    commit_seconds: float | None = 1.0,
    progress: Progress | None = None,
    name: str | None = None,
) -> IngestReport:
    """Append the text snapshots read from ``src`` (a path, FIFO, file object or file
    descriptor) to the archive ``dst`` as they arrive.

    >>> ingest(sys.stdin.buffer, "run.zarr", meta="meta.toml")     # doctest: +SKIP
    IngestReport(destination='run.zarr', appended=4000, skipped=0, ...)
    """
    overrides = list(overrides)
    dst_text = os.fspath(dst)
    own = isinstance(src, str | os.PathLike)
    stream: BinaryIO | int = open(src, "rb", buffering=0) if own else src  # noqa: SIM115
    label = name or (os.fspath(src) if own else "<stdin>")  # type: ignore[arg-type]
    writer: RunWriter | None = None
    feeder: BatchFeeder | None = None
    try:
        path = local_path(dst_text)
        if resume and path is not None and not (path / "zarr.json").exists():
            resume = False  # killed before the archive began: start it (same command again)
        if resume:
            # strict=False: the BatchFeeder's BatchGuard checks every batch (file and line)
            writer = resume_run(dst, commit_seconds=commit_seconds, strict=False)
            _guard_resume_meta(writer, meta, overrides)
            writer.name = dst_text
            feeder = BatchFeeder(
                writer,
                label,
                writer.chunk_snapshots or 1,
                skip_committed=True,
                progress=progress,
                unit="bytes",
            )
        else:
            if path is not None and path.exists() and not overwrite:
                raise ArchiveError(
                    f"{dst_text}: already exists (pass --resume to continue it, or --overwrite)"
                )
        reader = LineReader(stream, label, live=True)
        parser = LineParser(label, TEXT_MAGIC)
        width: dict[str, int] = {}
        last_replica: int | None = None
        committed = time.monotonic()
        try:
            for buf, first, idle in reader:
                for rows in parser.parse(buf, first):
                    if feeder is None:
                        run_meta = resolve_metadata(parser.meta or {}, meta, overrides, label)
                        first_batch = rows_to_batch(rows, run_meta, label, state=width)
                        dtype = archive_dtype(run_meta, None, None, first_batch)
                        writer = create_run(
                            dst,
                            run_meta,
                            overwrite=overwrite,
                            dtype=dtype,
                            commit_seconds=commit_seconds,
                            strict=False,  # the BatchFeeder's BatchGuard checks every batch
                        )
                        writer.name = dst_text
                        chunk = writer.chunk_snapshots or 1
                        feeder = BatchFeeder(writer, label, chunk, progress=progress, unit="bytes")
                    assert writer is not None
                    batch = rows_to_batch(rows, writer.meta, label, reader.bytes_done, state=width)
                    if last_replica is not None and rows.replica != last_replica:
                        feeder.commit()
                    last_replica = rows.replica
                    feeder.feed(batch)
                due = commit_seconds is not None and time.monotonic() - committed >= commit_seconds
                if feeder is not None and (idle or due):
                    # idle input, or steady input for commit_seconds: commit what arrived
                    feeder.commit()
                    committed = time.monotonic()
        except BaseException:
            if feeder is not None:
                # keep every valid snapshot read before the fault (which may itself be in
                # what is pending)
                with contextlib.suppress(Exception):
                    feeder.commit()
            raise
        if feeder is None or writer is None:
            raise DataError(f"{label}: expected at least one snapshot; found none")
        feeder.finish(whole=False)
        state = writer.state
        if reader.partial:
            raise DataError(
                f"{label}: line {reader.line}: the input ended inside this line (no newline); "
                f"it was not archived and {dst_text} stays incomplete (continue it with "
                "massarc ingest --resume)"
            )
        if state.open_replica:
            raise DataError(
                f"{dst_text}: replica {state.replicas} has {state.open_replica} of "
                f"{state.snapshots} snapshots; the archive stays incomplete (feed the rest "
                "with massarc ingest --resume)"
            )
        writer.close()
        state = writer.state
        return IngestReport(
            dst_text,
            feeder.appended,
            feeder.skipped,
            state.replicas,
            state.snapshots,
            state.complete,
        )
    except BaseException:
        if resume and writer is not None:
            with contextlib.suppress(Exception):
                writer.undo_resume()  # a refused resume changes nothing
        raise
    finally:
        if own:
            os.close(stream) if isinstance(stream, int) else stream.close()  # type: ignore[union-attr]


def open_input(src: str) -> tuple[BinaryIO, str]:
    """``-`` is standard input; anything else a path (a FIFO blocks until a writer opens)."""
    if src == "-":
        import sys

        return sys.stdin.buffer, "<stdin>"
    p = Path(src)
    if not p.exists():
        raise ArchiveError(f"{src}: no such file or FIFO")
    return open(p, "rb", buffering=0), src
