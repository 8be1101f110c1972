"""Constants of archive format v1: names every reader and writer must agree on.

These strings are part of the on-disk specification (schema/FORMAT.md); changing one
is a format change and needs a new format version.
"""

from __future__ import annotations

__all__ = [
    "ARCHIVE_MAJOR",
    "ARCHIVE_MINOR",
    "ARCHIVE_VERSION",
    "ATTRIBUTE_KEY",
    "COLLECTION_KIND",
    "EVENTS",
    "INFLOW",
    "MASS",
    "OUTFLOW",
    "RUN_KIND",
    "TIME",
    "mass_dimensions",
    "parse_version",
]

#: Group attribute under which a run's header (format, version, state, metadata) lives.
ATTRIBUTE_KEY = "massarc"
#: ``format`` value of a single run.
RUN_KIND = "massarc-run"
#: ``format`` value of a group that holds several runs (a sweep).
COLLECTION_KIND = "massarc-collection"

ARCHIVE_MAJOR = 1
ARCHIVE_MINOR = 0
ARCHIVE_VERSION = f"{ARCHIVE_MAJOR}.{ARCHIVE_MINOR}"

#: Array names inside a run group.
MASS = "mass"
TIME = "time"
#: Optional arrays: cumulative mass injected / extracted per (replica, time) for open systems.
INFLOW = "inflow"
OUTFLOW = "outflow"
#: Optional subgroup holding an event log.
EVENTS = "events"


def mass_dimensions(ndim_lattice: int) -> tuple[str, ...]:
    """Zarr ``dimension_names`` of the ``mass`` array for a lattice of this many axes.

    >>> mass_dimensions(2)
    ('replica', 'time', 'y', 'x')
    """
    if ndim_lattice == 1:
        return ("replica", "time", "site")
    if ndim_lattice == 2:
        return ("replica", "time", "y", "x")
    raise ValueError(f"expected a lattice of 1 or 2 axes, got {ndim_lattice}")


def parse_version(text: object) -> tuple[int, int]:
    """Split ``"MAJOR.MINOR"`` into integers; raise ``ValueError`` naming the input otherwise."""
    if not isinstance(text, str):
        raise ValueError(f'format_version: expected a string "MAJOR.MINOR", got {text!r}')
    parts = text.split(".")
    if len(parts) != 2 or not all(p.isdigit() for p in parts):
        raise ValueError(f'format_version: expected "MAJOR.MINOR", got {text!r}')
    return int(parts[0]), int(parts[1])
