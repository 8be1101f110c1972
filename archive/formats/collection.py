"""Converting a whole collection (a sweep): every run of it, one output file each.

``convert_collection("sweep/", "sweep-text/", dst_format="text")`` writes
``sweep-text/<run>.txt`` for every run archive of ``sweep/`` (a directory of runs or a Zarr
group of runs on a local disk), each through :func:`~.convert.convert`, so each output is
written under a temporary name and renamed when whole.
"""

from __future__ import annotations

import os
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

from ..errors import ArchiveError, NotARunError
from ..reader import open_run, open_runs
from ..store import local_path
from .convert import ConvertReport, convert
from .registry import get_format

__all__ = ["collection_members", "convert_collection"]


def collection_members(src: str | os.PathLike[str]) -> list[str] | None:
    """Local paths of the runs of ``src`` when it is a collection, else None (a single run,
    or a file of another format)."""
    path = local_path(os.fspath(src))
    if path is None or not path.is_dir():
        return None
    try:
        open_run(path)
        return None  # a single run
    except NotARunError:
        pass
    except Exception:  # not a Zarr node at all: a directory of something else
        return None
    try:
        runs = open_runs(path)
    except ArchiveError:
        return None
    return [r.name for r in runs]


def convert_collection(
    src: str | os.PathLike[str],
    dst: str | os.PathLike[str],
    *,
    dst_format: str,
    overwrite: bool = False,
    **kwargs: Any,
) -> Iterator[ConvertReport]:
    """Convert every run of the collection ``src`` into the directory ``dst`` (created),
    naming each output after its run with the suffix of ``dst_format``; yields a report per
    run. Other keyword arguments go to :func:`~.convert.convert`."""
    members = collection_members(src)
    if members is None:
        raise ArchiveError(f"{os.fspath(src)}: not a collection of runs on a local disk")
    out_format = get_format(dst_format)
    suffix = out_format.suffixes[0] if out_format.suffixes else f".{out_format.name}"
    out = Path(dst)
    if out.exists() and not out.is_dir():
        raise ArchiveError(f"{out}: expected a directory for the runs of a collection")
    out.mkdir(parents=True, exist_ok=True)
    names: Mapping[str, str] = {m: Path(m).name.removesuffix(".zarr") + suffix for m in members}
    if len(set(names.values())) != len(names):
        raise ArchiveError(f"{os.fspath(src)}: two runs would get the same output name")
    for member, name in names.items():
        yield convert(member, out / name, dst_format=out_format.name, overwrite=overwrite, **kwargs)
