"""The archive header: what sits under the ``massarc`` group attribute of a run.

::

    {"format": "massarc-run", "format_version": "1.0",
     "state": {"snapshots": 500, "replicas": 4, "complete": true},
     "metadata": {...RunMeta...}}

Versioning policy: a reader refuses an unknown major version with a clear message, and
ignores (with a warning) unknown fields written by a newer minor version of a known major.
"""

from __future__ import annotations

import warnings
from typing import Any, Literal

from pydantic import Field, ValidationError

from .errors import MetadataError, key_path, validation_problems
from .models import RunMeta, StrictModel
from .spec import ARCHIVE_MAJOR, ARCHIVE_MINOR, RUN_KIND, parse_version

__all__ = ["ArchiveHeader", "NewerFormatWarning", "WriteState", "parse_header"]


class NewerFormatWarning(UserWarning):
    """An archive written by a newer minor format version; unknown fields were ignored."""


class WriteState(StrictModel):
    """The commit marker. Readers trust it and truncate the arrays to it.

    ``snapshots`` and ``replicas`` give the committed extent of ``mass[:replicas, :snapshots]``
    and ``time[:snapshots]``. When replicas are written one after another, ``open_replica``
    holds how many snapshots of the replica being written (index ``replicas``) are committed;
    they are not part of the visible run until that replica is complete.
    ``complete`` is set only by a writer that finished; converters leave it false until the
    whole run is in.
    """

    snapshots: int = Field(ge=0)
    replicas: int = Field(ge=0)
    open_replica: int | None = Field(None, ge=0)
    complete: bool = False


class ArchiveHeader(StrictModel):
    """Header of a run archive (format v1)."""

    format: Literal["massarc-run"] = RUN_KIND
    format_version: str
    state: WriteState
    metadata: RunMeta


def _strip_unknown(data: Any, exc: ValidationError) -> Any:
    """Remove every key pydantic reported as unknown (``extra_forbidden``) from ``data``."""
    for err in exc.errors():
        if err["type"] != "extra_forbidden":
            continue
        node = data
        loc = key_path(err["loc"])
        for part in loc[:-1]:
            node = node[part] if isinstance(node, dict | list) else None
            if node is None:
                break
        if isinstance(node, dict):
            node.pop(loc[-1], None)
    return data


def parse_header(raw: Any, source: str | None = None) -> ArchiveHeader:
    """Validate the ``massarc`` attribute of a run group.

    Raises :class:`MetadataError` for a foreign format, an unknown major version or invalid
    contents; warns :class:`NewerFormatWarning` and drops unknown fields for a newer minor.
    """
    if not isinstance(raw, dict):
        raise MetadataError(["massarc attribute: expected a table"], source)
    fmt = raw.get("format")
    if fmt != RUN_KIND:
        raise MetadataError([f'format: expected "{RUN_KIND}"; got {fmt!r}'], source)
    try:
        major, minor = parse_version(raw.get("format_version"))
    except ValueError as exc:
        raise MetadataError([str(exc)], source) from None
    if major != ARCHIVE_MAJOR:
        raise MetadataError(
            [
                f"format_version: this massarc reads format {ARCHIVE_MAJOR}.x; the archive is "
                f"format {major}.{minor} (upgrade massarc to read it)"
            ],
            source,
        )
    import copy

    data = copy.deepcopy(raw)
    try:
        return ArchiveHeader.model_validate(data)
    except ValidationError as exc:
        only_unknown = all(e["type"] == "extra_forbidden" for e in exc.errors())
        if minor > ARCHIVE_MINOR and only_unknown:
            warnings.warn(
                f"{source or 'archive'}: written by format {major}.{minor}; ignoring fields "
                "this massarc does not know",
                NewerFormatWarning,
                stacklevel=2,
            )
            try:
                return ArchiveHeader.model_validate(_strip_unknown(data, exc))
            except ValidationError as exc2:
                raise MetadataError(validation_problems(exc2), source) from None
        raise MetadataError(validation_problems(exc), source) from None
