"""massarc: archive, audit and convert trajectories of lattice mass-transport models.

The public API is small:

* :func:`open_run`, :func:`open_runs` read a run (or a collection) lazily;
* :func:`create_run`, :func:`resume_run` write one, snapshot by snapshot;
* :func:`load_metadata`, :func:`parse_metadata` and :class:`RunMeta` describe it;
* :func:`audit` runs the checks (``massarc check``) and returns an :class:`AuditReport`.

The layers underneath are importable too: ``massarc.schema``, ``massarc.archive``
(including ``massarc.archive.formats``), ``massarc.validators``, ``massarc.simulate``.
"""

from typing import Any

from massarc._version import __version__
from massarc.archive import (
    ArchiveError,
    DataError,
    NotARunError,
    Run,
    RunWriter,
    create_run,
    open_run,
    open_runs,
    resume_run,
)
from massarc.schema import MetadataError, RunMeta, load_metadata, parse_metadata


def audit(*args: Any, **kwargs: Any) -> Any:
    """Run the checks on runs or collections: see :func:`massarc.validators.audit`.

    Imported lazily: the statistical checks pull in scipy, which costs start-up time.
    """
    from massarc.validators import audit as _audit

    return _audit(*args, **kwargs)


__all__ = [
    "ArchiveError",
    "DataError",
    "MetadataError",
    "NotARunError",
    "Run",
    "RunMeta",
    "RunWriter",
    "__version__",
    "audit",
    "create_run",
    "load_metadata",
    "open_run",
    "open_runs",
    "parse_metadata",
    "resume_run",
]
