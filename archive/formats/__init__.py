"""massarc.archive.formats: converters between run archives and other formats.

* :mod:`.registry`: the :class:`Format` contract, registration (built-ins and the
  ``massarc.formats`` entry-point group) and detection;
* one module per format; :mod:`.stream` is the shared path into an archive;
* :func:`convert` (any format to any format) and :func:`ingest` (live text on a pipe).
"""

from .convert import ConvertReport, convert
from .registry import (
    ENTRY_POINT_GROUP,
    Block,
    Events,
    Format,
    Source,
    UnknownFormatError,
    available_formats,
    describe_formats,
    detect_format,
    get_format,
    register_format,
)
from .stream import resolve_metadata, write_source

__all__ = [
    "ENTRY_POINT_GROUP",
    "Block",
    "ConvertReport",
    "Events",
    "Format",
    "Source",
    "UnknownFormatError",
    "available_formats",
    "convert",
    "describe_formats",
    "detect_format",
    "get_format",
    "register_format",
    "resolve_metadata",
    "write_source",
]
