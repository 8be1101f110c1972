"""The built-in formats, listed in one place (the registry's only source of them).

The order is the listing order of ``massarc convert --list-formats`` and breaks ties in
detection (among formats whose content signatures match equally, after the suffix).
"""

from __future__ import annotations

from .registry import Format

__all__ = ["builtin_formats"]


def builtin_formats() -> tuple[type[Format], ...]:
    """The built-in format classes, in listing order; an import error propagates."""
    from .csv_long import CsvLongFormat
    from .csv_wide import CsvWideFormat
    from .events import EventsFormat
    from .hdf5 import HDF5Format
    from .netcdf import NetCDFFormat
    from .npy import NpyFormat
    from .npz import NpzFormat
    from .positions import PositionsFormat
    from .text import TextFormat
    from .zarr_run import ZarrFormat

    return (
        ZarrFormat,
        TextFormat,
        CsvWideFormat,
        CsvLongFormat,
        EventsFormat,
        NpyFormat,
        HDF5Format,
        NetCDFFormat,
        NpzFormat,
        PositionsFormat,
    )
