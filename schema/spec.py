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
    "DIGEST_ALGORITHM",
    "DIGEST_TAG",
    "DIGEST_VERSION",
    "EVENTS",
    "INFLOW",
    "MASS",
    "OUTFLOW",
    "RUN_KIND",
    "STAMP",
    "STAMP_KIND",
    "STAMP_VERSION",
    "SUMMARIES",
    "SUMMARIES_KIND",
    "SUMMARY_ARRAYS",
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
ARCHIVE_MINOR = 1  # 1.1 adds the optional `summaries` group
ARCHIVE_VERSION = f"{ARCHIVE_MAJOR}.{ARCHIVE_MINOR}"

#: Array names inside a run group.
MASS = "mass"
TIME = "time"
#: Optional arrays: cumulative mass injected / extracted per (replica, time) for open systems.
INFLOW = "inflow"
OUTFLOW = "outflow"
#: Optional subgroup holding an event log.
EVENTS = "events"

#: Optional subgroup holding the summaries (format 1.1; readers of 1.0 ignore it).
SUMMARIES = "summaries"
#: ``format`` value in the ``massarc`` attribute of the summaries group.
SUMMARIES_KIND = "massarc-summaries"

#: File at the root of a run holding its audit stamp (FORMAT.md, section 10); not a Zarr
#: node, so Zarr libraries ignore it, and it is never part of the run's data.
STAMP = "massarc-stamp.json"
#: ``format`` value of the stamp document, and its version.
STAMP_KIND = "massarc-stamp"
STAMP_VERSION = "1.0"
#: Domain tag and version of the content digest's byte stream (FORMAT.md, section 10.1).
DIGEST_TAG = "massarc-content-digest"
DIGEST_VERSION = 1
DIGEST_ALGORITHM = "sha256"

#: Arrays of the summaries group: name -> (dimension names, units). Units are words:
#: "mass" (the run's mass unit), "mass^2", "sites", "1" (a pure number), "time" (the run's
#: ``time_units``), "count". Dimension ``probe`` indexes the bounded set of snapshots
#: where G(r, t) and the confidence intervals are kept; ``bound`` is (low, high).
SUMMARY_ARRAYS: dict[str, tuple[tuple[str, ...], str]] = {
    # per replica and snapshot
    "largest_mass": (("replica", "time"), "mass"),
    "largest_site": (("replica", "time"), "1"),
    "second_moment": (("replica", "time"), "mass^2"),
    "occupied": (("replica", "time"), "sites"),
    "condensates": (("replica", "time"), "sites"),
    "condensate_mass": (("replica", "time"), "mass"),
    "typical_mass": (("replica", "time"), "mass"),
    # over replicas
    "largest_mass_mean": (("time",), "mass"),
    "largest_mass_var": (("time",), "mass^2"),
    "typical_mass_mean": (("time",), "mass"),
    "coarsening_length": (("time",), "sites"),
    # the probes
    "probe_snapshot": (("probe",), "1"),
    "probe_time": (("probe",), "time"),
    "largest_mass_mean_ci": (("probe", "bound"), "mass"),
    "largest_mass_var_ci": (("probe", "bound"), "mass^2"),
    "correlation": (("probe", "r"), "mass^2"),
    "correlation_y": (("probe", "ry"), "mass^2"),
    "correlation_x": (("probe", "rx"), "mass^2"),
    "correlation_zero": (("probe",), "sites"),
    # over the window
    "occupation": (("mass",), "count"),
    "extreme_sample": (("draw",), "mass"),
}


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
