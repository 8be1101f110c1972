"""Turn a location (path, ``file://``, ``memory://``, zip) into a Zarr store.

* local paths and ``file://`` URLs: :class:`zarr.storage.LocalStore`, whose writes go to a
  ``*.partial`` file that is then renamed, so a chunk or a metadata file is never seen
  half-written;
* ``memory://name``: fsspec's process-wide memory file system (handy in tests);
* ``*.zip``: :class:`zarr.storage.ZipStore`, read-only (a zip cannot be appended to safely);
* any other fsspec URL (``s3://``, ``gs://``, ``https://``, ...): :class:`FsspecStore`, read
  through :class:`~.remote.CappedStore` (see :mod:`.remote`: credentials, size caps).
"""

from __future__ import annotations

import os
import zipfile
from pathlib import Path
from urllib.parse import unquote, urlparse

import zarr
from zarr.abc.store import Store
from zarr.storage import FsspecStore, LocalStore, ZipStore

from .errors import ArchiveError
from .remote import CappedStore, redact, redact_text

__all__ = ["Location", "local_path", "location_name", "open_store"]

Location = str | os.PathLike[str] | Store


def local_path(location: Location) -> Path | None:
    """The local directory or file behind a location, or None for memory and other URLs."""
    if isinstance(location, LocalStore):
        return Path(location.root)
    if isinstance(location, Store):
        return None
    text = os.fspath(location)
    if text.startswith("file://"):
        return Path(unquote(urlparse(text).path))
    if "://" in text:
        return None
    return Path(text)


def location_name(location: Location) -> str:
    """A short human name for a location, used in messages."""
    if isinstance(location, Store):
        return str(location)
    text = os.fspath(location)
    return redact(text) if "://" in text else text


def open_store(location: Location, mode: str = "r") -> Store:
    """Open ``location`` as a Zarr store; ``mode`` is ``"r"`` (read) or ``"w"``/``"a"``.

    >>> store = open_store("memory://doc-example", mode="w")
    >>> store.read_only
    False
    """
    if isinstance(location, Store):
        return location
    read_only = mode == "r"
    text = os.fspath(location)
    path = local_path(text)
    if path is not None and path.suffix.lower() == ".zip":
        if not read_only:
            raise ArchiveError(
                f"{text}: zip archives are read-only (a zip cannot be appended to safely); "
                "write a directory archive and zip it when done"
            )
        if not path.is_file():
            raise ArchiveError(f"{text}: no such zip file")
        if not zipfile.is_zipfile(path):
            raise ArchiveError(f"{text}: expected a zip file; got other content")
        _guard_zip(path, text)
        return ZipStore(path, mode="r")
    if path is not None:
        if read_only and not path.exists():
            raise ArchiveError(f"{text}: no such file or directory")
        return LocalStore(path, read_only=read_only)
    try:
        store = FsspecStore.from_url(text, read_only=read_only)
    except Exception as exc:  # fsspec raises many kinds for unknown protocols
        raise ArchiveError(f"{redact(text)}: cannot open this URL ({_one_line(exc)})") from None
    return CappedStore(store) if read_only else store


def _one_line(exc: BaseException) -> str:
    lines = str(exc).strip().splitlines()
    return redact_text(lines[0][:200]) if lines else type(exc).__name__


def _guard_zip(path: Path, name: str) -> None:
    """Refuse a zip whose members could expand beyond the caps when read (the central
    directory states every member's sizes; zipfile reads a member up to its stated size)."""
    from .limits import max_chunk_bytes, max_ratio

    cap, ratio = max_chunk_bytes() + (1 << 20), max_ratio()
    try:
        with zipfile.ZipFile(path) as z:
            members = z.infolist()
    except (zipfile.BadZipFile, OSError, NotImplementedError, UnicodeDecodeError) as exc:
        # a damaged central directory can claim an unsupported zip version or undecodable
        # member names (found by fuzzing, docs/fuzzing.md)
        why = " ".join(str(exc).split())[:200]
        raise ArchiveError(f"{name}: expected a readable zip file ({why})") from None
    for m in members:
        if m.file_size > cap:
            raise ArchiveError(
                f"{name}: member {m.filename[:200]}: {m.file_size} bytes uncompressed; "
                f"expected at most {cap} (MASSARC_MAX_CHUNK_BYTES)"
            )
        if m.file_size > max(m.compress_size, 1) * ratio:
            raise ArchiveError(
                f"{name}: member {m.filename[:200]}: expands {m.file_size} times from "
                f"{m.compress_size} bytes; expected at most {ratio}:1 (MASSARC_MAX_RATIO)"
            )


def open_group(location: Location, mode: str = "r") -> zarr.Group:
    """Open the Zarr group at ``location`` (no consolidated metadata: it is not in Zarr v3)."""
    store = open_store(location, mode)
    return zarr.open_group(store, mode=mode, zarr_format=3)
