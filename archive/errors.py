"""Errors of the archive layer. Each subclasses the matching built-in."""

from __future__ import annotations

__all__ = ["ArchiveError", "ChunkError", "DataError", "NotARunError"]


class ArchiveError(ValueError):
    """An archive that cannot be opened or written as asked."""


class NotARunError(ArchiveError, FileNotFoundError):
    """The location holds no massarc run (nor a collection of runs)."""


class DataError(ArchiveError):
    """Data that cannot go into an archive: the message names (replica, snapshot, site)."""


class ChunkError(ArchiveError):
    """A chunk of ``mass`` that is missing or corrupt where its data are needed (an
    export): the message names the run, the chunk key, the replica and the snapshots."""
