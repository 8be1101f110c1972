"""massarc.archive.formats: converters between run archives and other formats.

* :mod:`.registry`: the :class:`Format` contract, registration (built-ins and the
  ``massarc.formats`` entry-point group) and detection;
* one module per format, which no other module imports (only :mod:`.builtin`, to register
  them): what several formats share lives in private modules (``_arrays``, ``_axes``,
  ``_csv``, ``_export``, ``_lines``, ``_metadata``, ...); :mod:`.stream` is the shared path
  into an archive;
* :func:`convert` (any format to any format), :func:`convert_collection` (every run of
  a sweep) and :func:`ingest` (live text on a pipe).
"""

from .collection import collection_members, convert_collection
from .convert import ConvertReport, convert
from .registry import (
    ENTRY_POINT_GROUP,
    Batch,
    Events,
    Format,
    Source,
    UnknownFormatError,
    available_formats,
    detect_format,
    format_listing,
    get_format,
    register_format,
)
from .stream import resolve_metadata, write_source

__all__ = [
    "ENTRY_POINT_GROUP",
    "Batch",
    "ConvertReport",
    "Events",
    "Format",
    "Source",
    "UnknownFormatError",
    "available_formats",
    "collection_members",
    "convert",
    "convert_collection",
    "detect_format",
    "format_listing",
    "get_format",
    "register_format",
    "resolve_metadata",
    "write_source",
]
