"""massarc: archive, audit and convert trajectories of lattice mass-transport models.

The public API is small:

* :func:`open_run`, :func:`open_runs` read a run (or a collection) lazily;
  ``open_run(p).to_xarray()`` gives it as a lazy, Dask-backed xarray tree and
  :func:`open_collection` a sweep as one :class:`Collection` (the ``xarray`` extra);
* :func:`create_run`, :func:`resume_run` write one, snapshot by snapshot;
* :func:`load_metadata`, :func:`parse_metadata` and :class:`RunMeta` describe it;
* :func:`audit` runs the checks (``massarc check``) and returns an ``AuditReport``;
* :func:`summarize` computes and stores the observables (``massarc summarize``); read them
  back with ``open_run(p).summaries``;
* :func:`compare_runs` tests whether two runs of one model agree (``massarc compare``) and
  returns a :class:`Comparison`.

The layers underneath are importable too: ``massarc.schema``, ``massarc.archive``
(including ``massarc.archive.formats``), ``massarc.validators``, ``massarc.summaries``,
``massarc.simulate``.
Names are resolved on first use, so ``import massarc`` (and the command line) start fast.

>>> import massarc
>>> run = massarc.open_run("samples/dune-strip.zarr")
>>> run.meta.model.family, run.sites, run.complete
('cmam', (64,), True)
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from massarc.schema.version import __version__

if TYPE_CHECKING:
    from massarc.archive import (
        ArchiveError,
        Collection,
        DataError,
        NotARunError,
        Run,
        RunWriter,
        create_run,
        open_collection,
        open_run,
        open_runs,
        resume_run,
    )
    from massarc.schema import MetadataError, RunMeta, load_metadata, parse_metadata
    from massarc.summaries import summarize
    from massarc.summaries.compare import Comparison, compare_runs
    from massarc.validators import audit

_LAZY = {
    "ArchiveError": "massarc.archive",
    "Collection": "massarc.archive",
    "DataError": "massarc.archive",
    "NotARunError": "massarc.archive",
    "Run": "massarc.archive",
    "RunWriter": "massarc.archive",
    "create_run": "massarc.archive",
    "open_collection": "massarc.archive",
    "open_run": "massarc.archive",
    "open_runs": "massarc.archive",
    "resume_run": "massarc.archive",
    "MetadataError": "massarc.schema",
    "RunMeta": "massarc.schema",
    "load_metadata": "massarc.schema",
    "parse_metadata": "massarc.schema",
    "audit": "massarc.validators",
    "summarize": "massarc.summaries",
    "Comparison": "massarc.summaries.compare",
    "compare_runs": "massarc.summaries.compare",
}

__all__ = [
    "ArchiveError",
    "Collection",
    "Comparison",
    "DataError",
    "MetadataError",
    "NotARunError",
    "Run",
    "RunMeta",
    "RunWriter",
    "__version__",
    "audit",
    "compare_runs",
    "create_run",
    "load_metadata",
    "open_collection",
    "open_run",
    "open_runs",
    "parse_metadata",
    "resume_run",
    "summarize",
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'massarc' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
