"""``convert``: any readable format to any writable one, through the archive.

The destination is written under a temporary sibling name (``DST.partial-<random>``) and
renamed into place only when complete; on any error the temporary is removed, so no
half-written file is ever left under the destination's name. Inputs are opened read-only.

* ``X -> zarr``: the source streams into the new archive (:func:`.stream.write_source`).
* ``zarr -> X``: the format's ``write`` exports the archive.
* ``X -> Y``: through a temporary archive next to the destination, removed afterwards.
"""

from __future__ import annotations

import errno
import os
import secrets
import shutil
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path

from ..errors import ArchiveError, WriteError
from ..reader import open_run
from ..store import local_path
from ._options import archive_options, understands
from .registry import Format, Progress, available_formats, detect_format, get_format
from .stream import resolve_metadata, write_source

__all__ = ["ConvertReport", "convert", "split_options"]

#: Error numbers of a storage that has no room left for the output.
_STORAGE_FULL = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG}


@dataclass(frozen=True)
class ConvertReport:
    """What a conversion did."""

    source: str
    destination: str
    source_format: str
    destination_format: str
    n_replicas: int
    n_snapshots: int
    sites: tuple[int, ...]
    notes: list[str] = field(default_factory=list)


def split_options(
    options: Mapping[str, str], reader: Format, writer: Format
) -> tuple[dict[str, str], dict[str, str]]:
    """Route each ``--option``: ``from.KEY``/``to.KEY`` explicitly, else to the side that
    knows the key (the reader first)."""
    read_options: dict[str, str] = {}
    write_options: dict[str, str] = {}
    for key, value in options.items():
        if key.startswith("from."):
            read_options[key[5:]] = value
        elif key.startswith("to."):
            write_options[key[3:]] = value
        elif understands(reader.read_options, key):
            read_options[key] = value
        elif understands(writer.write_options, key):
            write_options[key] = value
        else:
            known = sorted({*reader.read_options, *writer.write_options})
            raise ArchiveError(
                f"unknown option {key!r} for reading {reader.name} or writing {writer.name}; "
                f"expected one of: {', '.join(known) or 'none'}"
            )
    return read_options, write_options


def _guard_apart(src: Path, dst: Path, src_text: str, dst_text: str) -> None:
    """Refuse a destination that is, contains or lies inside the source: replacing it would
    delete the source, and writing inside it would modify an input."""
    s, d = src.resolve(), dst.resolve()
    if s == d:
        raise ArchiveError(f"{dst_text}: expected a destination other than the source")
    if d in s.parents:
        raise ArchiveError(
            f"{dst_text}: expected a destination that does not contain the source {src_text}; "
            "replacing it would delete the source"
        )
    if s in d.parents:
        raise ArchiveError(
            f"{dst_text}: expected a destination outside the source {src_text}; inputs are "
            "never modified"
        )


def _remove(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    elif path.exists() or path.is_symlink():
        path.unlink(missing_ok=True)


def _place(tmp: Path, dst: Path) -> None:
    """Rename ``tmp`` to ``dst``, replacing an existing ``dst`` only once ``tmp`` is whole."""
    if dst.exists():
        old = dst.with_name(f"{dst.name}.old-{secrets.token_hex(4)}")
        os.replace(dst, old)
        os.replace(tmp, dst)
        _remove(old)
    else:
        os.replace(tmp, dst)


def convert(
    src: str | os.PathLike[str],
    dst: str | os.PathLike[str],
    *,
    meta: str | os.PathLike[str] | None = None,
    overrides: Iterable[str] = (),
    src_format: str | None = None,
    dst_format: str | None = None,
    options: Mapping[str, str] | None = None,
    overwrite: bool = False,
    progress: Progress | None = None,
    allow_missing: bool = False,
) -> ConvertReport:
    """Convert ``src`` to ``dst``.

    ``allow_missing``: exporting an archive, write the snapshots of missing or corrupt
    chunks as an explicit mask (formats whose ``masks`` is true) instead of failing.

    >>> convert("run.npz", "run.zarr", meta="meta.toml")    # doctest: +SKIP
    ConvertReport(source='run.npz', destination='run.zarr', source_format='npz', ...)
    """
    overrides = list(overrides)
    reader = get_format(src_format) if src_format else detect_format(src, role="source")
    writer = get_format(dst_format) if dst_format else detect_format(dst, role="destination")
    if not reader.readable:
        raise ArchiveError(f"format {reader.name} cannot be read")
    if not writer.writable:
        raise ArchiveError(f"format {writer.name} cannot be written; it is read-only")
    read_options, write_options = split_options(options or {}, reader, writer)
    if allow_missing and (reader.name != "zarr" or not writer.masks):
        maskers = ", ".join(sorted(f.name for f in _maskers()))
        what = (
            f"format {writer.name} cannot carry a mask of missing snapshots"
            if reader.name == "zarr"
            else f"it applies to an export from an archive, not to reading {reader.name}"
        )
        raise ArchiveError(
            f"{os.fspath(dst)}: --allow-missing: {what}; expected an export to one of {maskers}"
        )
    dst_text = os.fspath(dst)
    dst_path = local_path(dst_text)
    src_path = local_path(os.fspath(src))
    if dst_path is not None and src_path is not None:
        _guard_apart(src_path, dst_path, os.fspath(src), dst_text)
    into_archive = partial(
        _to_archive,
        reader,
        src,
        shown=dst_text,
        meta=meta,
        overrides=overrides,
        read_options=read_options,
        progress=progress,
    )
    if dst_path is None:
        if writer.name != "zarr":
            raise ArchiveError(f"{dst_text}: expected a local path for format {writer.name}")
        return into_archive(dst_text, write_options=write_options, overwrite=overwrite)
    if (dst_path.exists() or dst_path.is_symlink()) and not overwrite:
        raise ArchiveError(f"{dst_text}: already exists (pass --overwrite to replace it)")
    token = secrets.token_hex(4)
    tmp = dst_path.with_name(f"{dst_path.name}.partial-{token}")
    staging = dst_path.with_name(f"{dst_path.name}.partial-{token}.zarr")
    try:
        if writer.name == "zarr":
            report = into_archive(tmp, write_options=write_options, overwrite=False)
        else:
            if reader.name == "zarr" and meta is None and not overrides and not read_options:
                run = open_run(src)
            else:
                into_archive(staging, write_options={}, overwrite=False)
                run = open_run(staging)
            if allow_missing:  # only formats that declare masks get the keyword
                write_options = {**write_options, "allow_missing": True}  # type: ignore[dict-item]
            notes = writer.write(run, tmp, progress=progress, **write_options)
            report = ConvertReport(
                os.fspath(src),
                dst_text,
                reader.name,
                writer.name,
                run.n_replicas,
                run.n_snapshots,
                tuple(run.sites),
                list(notes),
            )
        _place(tmp, dst_path)
    except WriteError as exc:
        _remove(tmp)
        raise WriteError(
            f"{dst_text}: {exc.reason}; nothing was written (the partial output was removed)",
            exc.reason,
            exc.errno,
        ) from exc
    except OSError as exc:  # an export's own file writes (text, HDF5, ...)
        _remove(tmp)
        if exc.errno not in _STORAGE_FULL:
            raise
        reason = exc.strerror or str(exc)
        reason = reason[:1].lower() + reason[1:]
        raise WriteError(
            f"{dst_text}: {reason}; nothing was written (the partial output was removed)",
            reason,
            exc.errno,
        ) from exc
    except BaseException:
        _remove(tmp)
        raise
    finally:
        _remove(staging)
    return report


def _maskers() -> list[type[Format]]:
    return [f for f in available_formats().values() if f.writable and f.masks]


def _to_archive(
    reader: Format,
    src: str | os.PathLike[str],
    location: str | Path,
    *,
    shown: str,
    meta: str | os.PathLike[str] | None,
    overrides: list[str],
    read_options: dict[str, str],
    write_options: dict[str, str],
    overwrite: bool,
    progress: Progress | None,
) -> ConvertReport:
    path = local_path(os.fspath(src))
    with reader.read(path if path is not None else Path(os.fspath(src)), **read_options) as source:
        run_meta = resolve_metadata(source.hints(), meta, overrides, source.name, source.mapped())
        written = write_source(
            source,
            location,
            run_meta,
            overwrite=overwrite,
            name=shown,
            progress=progress,
            **archive_options(write_options),
        )
        state = written.state
        return ConvertReport(
            os.fspath(src),
            shown,
            reader.name,
            "zarr",
            state.replicas,
            state.snapshots,
            tuple(run_meta.lattice.sites),
            list(source.notes),
        )
