"""massarc.archive: the run archive on Zarr v3 (storage, reading, writing), the single
pass over chunks, and the converters from and to other formats."""

from .bounded import install as _install_bounded_codecs
from .errors import ArchiveError, DataError, NotARunError, WriteError
from .labelled import Collection, open_collection
from .layout import chunk_snapshots, codecs, mass_dtype
from .reader import Chunk, ChunkRef, Run, open_run, open_runs
from .store import open_store
from .writer import RunWriter, create_run, resume_run

_install_bounded_codecs()  # every zarr read of a chunk is bounded (see .bounded)

__all__ = [
    "ArchiveError",
    "Chunk",
    "ChunkRef",
    "Collection",
    "DataError",
    "NotARunError",
    "Run",
    "RunWriter",
    "WriteError",
    "chunk_snapshots",
    "codecs",
    "create_run",
    "mass_dtype",
    "open_collection",
    "open_run",
    "open_runs",
    "open_store",
    "resume_run",
]
