"""Errors of the archive layer. Each subclasses the matching built-in."""

from __future__ import annotations

__all__ = ["ArchiveError", "ChunkError", "DataError", "NotARunError", "WriteError"]


class ArchiveError(ValueError):
    """An archive that cannot be opened or written as asked."""


class NotARunError(ArchiveError, FileNotFoundError):
    """The location holds no massarc run (nor a collection of runs)."""


class DataError(ArchiveError):
    """Data that cannot go into an archive: the message names (replica, snapshot, site)."""


class ChunkError(ArchiveError):
    """A chunk of ``mass`` that is missing or corrupt where its data are needed (an
    export): the message names the run, the chunk key, the replica and the snapshots."""


class WriteError(ArchiveError):
    """The storage refused a write (a full disk, a lost mount, no permission): the message
    names the run, says what happened (``reason``, e.g. "no space left on device") and what
    stays committed. ``errno`` is the operating system's error number, if any."""

    def __init__(self, message: str, reason: str, errno: int | None = None) -> None:
        super().__init__(message)
        self.reason = reason
        self.errno = errno
