"""The format registry: one class per interchange format, built-ins registered like plugins.

A format is a subclass of :class:`Format` with a ``name``, the file-name ``suffixes`` it
claims, a one-line ``description``, and the options it understands for reading and for
writing. ``sniff(head, path)`` recognises a file by its content (magic bytes, header
lines); ``read(path, **options)`` returns a :class:`Source` that streams the snapshots;
``write(run, path, **options)`` exports an archive, where the format can be written.

Built-in formats are listed by :func:`massarc.archive.formats.builtin.builtin_formats`;
third-party formats come through the entry-point group ``massarc.formats`` (each entry
point names a :class:`Format` subclass) or :func:`register_format`. They are loaded
lazily, the first time the registry is listed; a broken plugin gives a warning and is
skipped, and a plugin that reuses a name already taken gives a warning (the first
registered wins): see :mod:`massarc.archive.registry`.

Detection (:func:`detect_format`) goes by content first, then by suffix; an explicit
name (``--from``/``--to``) overrides both.
"""

from __future__ import annotations

import inspect
import os
from abc import ABC, abstractmethod
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from massarc.schema import RunMeta

from ..errors import ArchiveError
from ..progress import Progress
from ..reader import Run
from ..registry import Registry

__all__ = [
    "ENTRY_POINT_GROUP",
    "FORMATS",
    "Batch",
    "Events",
    "Format",
    "Progress",
    "Source",
    "UnknownFormatError",
    "available_formats",
    "detect_format",
    "format_listing",
    "get_format",
    "register_format",
]

ENTRY_POINT_GROUP = "massarc.formats"
#: Bytes of a file handed to :meth:`Format.sniff`.
HEAD_BYTES = 65536


class UnknownFormatError(ArchiveError):
    """No registered format matches a file, or a format name is not known."""


@dataclass(frozen=True)
class Batch:
    """Snapshots read from a source, in the order the archive stores them.

    ``replica=r``: ``mass`` is ``(n, *lattice)`` (a source may yield it flat, ``(n, sites)``,
    when the lattice shape comes from the metadata); ``replica=None``: ``mass`` is
    ``(replicas, n, *lattice)``, every replica in lockstep. ``lines`` gives the source line
    of each snapshot (text formats), for messages. ``series`` holds optional ``inflow`` /
    ``outflow`` arrays shaped like ``mass`` without the lattice axes. ``done`` is the
    progress so far in the source's unit; ``commit`` asks the writer to commit after this
    batch (live input that went idle).
    """

    times: np.ndarray
    mass: np.ndarray
    replica: int | None = 0
    lines: np.ndarray | None = None
    series: Mapping[str, np.ndarray] | None = None
    done: int | None = None
    commit: bool = False


@dataclass(frozen=True)
class Events:
    """A stretch of an event log, sorted by (replica, time): 1-D arrays of equal length."""

    time: np.ndarray
    replica: np.ndarray
    source: np.ndarray
    target: np.ndarray
    amount: np.ndarray


class Source(ABC):
    """An opened input: metadata hints now, snapshots streamed on demand.

    Attributes
    ----------
    name
        How messages name the input (a path, ``path:/dataset``...).
    unit, total
        Progress unit (``"bytes"`` or ``"snapshots"``) and its total, when known (a
        source may set ``total`` once :meth:`batches` has started).
    dtype
        An unsigned mass dtype worth keeping in the archive (None: choose from the data).
    n_snapshots
        Snapshots per replica when known up front (caps the chunk length).
    """

    name: str = ""
    unit: str = "snapshots"
    total: int | None = None
    dtype: np.dtype | None = None
    n_snapshots: int | None = None
    #: Things the user should know (what the format does not carry, ...).
    notes: tuple[str, ...] = ()

    def hints(self) -> dict[str, Any]:
        """Metadata the file itself carries, as a plain (possibly partial) dict."""
        return {}

    def mapped(self) -> dict[str, Any]:
        """Metadata the user mapped explicitly from the file (``--option attrs.NAME=key``):
        it wins over ``--meta``, and ``--set`` wins over it."""
        return {}

    def n_snapshots_for(self, meta: RunMeta) -> int | None:
        """Snapshots per replica under ``meta`` (which names the axes of an array) when known
        up front, else None."""
        return self.n_snapshots

    @abstractmethod
    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        """Snapshot batches (and event-log stretches), replica after replica or in
        lockstep; ``chunk`` is the archive's chunk length, a good batch length."""

    def close(self) -> None:  # noqa: B027  (optional hook: most sources hold nothing)
        """Release files; called once the conversion is over."""

    def __enter__(self) -> Source:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


class Format(ABC):
    """Base class of every interchange format.

    Class attributes
    ----------------
    name
        Stable name used by ``--from``/``--to`` and ``--list-formats``.
    suffixes
        File-name endings claimed (``".npy"``, ``".wide.csv"``); the longest match wins.
    description
        One line for ``massarc convert --list-formats``.
    read_options, write_options
        ``{option: help}`` understood by :meth:`read` and :meth:`write`.
    readable, writable
        What the format implements.
    masks
        :meth:`write` accepts ``allow_missing=True`` (``massarc convert --allow-missing``):
        it then writes snapshots it cannot read (missing or corrupt chunks) as an explicit
        mask, never as masses; ``convert`` refuses ``--allow-missing`` for other formats.
    """

    name: ClassVar[str]
    suffixes: ClassVar[tuple[str, ...]] = ()
    description: ClassVar[str]
    read_options: ClassVar[Mapping[str, str]] = {}
    write_options: ClassVar[Mapping[str, str]] = {}
    readable: ClassVar[bool] = True
    writable: ClassVar[bool] = False
    masks: ClassVar[bool] = False
    #: Among formats whose sniff matches the same file, the most specific wins.
    sniff_priority: ClassVar[int] = 0

    def sniff(self, head: bytes, path: Path) -> bool:
        """True when the content (``head``: the first bytes of a file, empty for a
        directory) shows the file is in this format."""
        return False

    @abstractmethod
    def read(self, path: Path | str, **options: str) -> Source:
        """Open ``path`` for streaming; options are strings as given on the command line."""

    def write(
        self, run: Run, path: Path, *, progress: Progress | None = None, **options: str
    ) -> list[str]:
        """Export ``run`` to ``path``; return notes for the user (what was not carried)."""
        raise ArchiveError(f"format {self.name} cannot be written; it is read-only")


def _validate(cls: Any, origin: str) -> None:
    """Refuse (``TypeError``) a class that breaks the format contract; ``origin`` names it."""
    if not (isinstance(cls, type) and issubclass(cls, Format)):
        raise TypeError(f"{origin}: expected a subclass of massarc.archive.formats.Format")
    for attr in ("name", "description"):
        if not isinstance(getattr(cls, attr, None), str) or not getattr(cls, attr):
            raise TypeError(f"{origin}: expected {cls.__name__}.{attr} to be a non-empty string")
    if not isinstance(cls.suffixes, tuple):
        raise TypeError(f"{origin}: expected {cls.__name__}.suffixes to be a tuple")
    if inspect.isabstract(cls):
        raise TypeError(f"{origin}: expected {cls.__name__} to define read()")


def _builtin_formats() -> tuple[type[Format], ...]:
    from .builtin import builtin_formats

    return builtin_formats()


#: The format registry: built-ins, then plugins of the entry-point group ``massarc.formats``.
FORMATS: Registry[Format] = Registry(
    "format", "name", ENTRY_POINT_GROUP, _validate, _builtin_formats
)


def register_format(cls: type[Format]) -> type[Format]:
    """Register a third-party format class (usable as a decorator); validates the contract.

    Listing the class in the entry-point group ``massarc.formats`` as well is fine.
    """
    return FORMATS.register(cls)


def available_formats() -> Mapping[str, type[Format]]:
    """Built-in then plugin formats by name (read-only; the same mapping on every call)."""
    return FORMATS.available()


def _known() -> str:
    return ", ".join(available_formats())


def get_format(name: str) -> Format:
    """An instance of the format registered as ``name``; the error lists the known ones."""
    try:
        cls = FORMATS.get(name)
    except KeyError as exc:
        raise UnknownFormatError(exc.args[0]) from None
    return cls()


def _head(path: Path) -> bytes:
    if path.is_dir():
        return b""
    try:
        with open(path, "rb") as f:
            return f.read(HEAD_BYTES)
    except OSError as exc:
        raise ArchiveError(f"{path}: cannot read ({exc.strerror})") from None


def _by_suffix(path: str, candidates: list[type[Format]]) -> list[type[Format]]:
    lower = path.lower().rstrip("/")
    scored = []
    for cls in candidates:
        best = max((len(s) for s in cls.suffixes if lower.endswith(s.lower())), default=0)
        if best:
            scored.append((best, cls))
    if not scored:
        return []
    top = max(score for score, _ in scored)
    return [cls for score, cls in scored if score == top]


def detect_format(path: str | os.PathLike[str], *, role: str = "source") -> Format:
    """The format of ``path``: by content for an existing source, else by suffix.

    ``role`` is ``"source"`` (the file must exist and be readable by the format) or
    ``"destination"`` (by suffix only; the format must be writable).
    """
    text = os.fspath(path)
    formats = list(available_formats().values())
    if role == "source":
        if "://" in text:
            found = _by_suffix(text, formats) or [available_formats()["zarr"]]
            return found[0]()
        p = Path(text)
        if not p.exists():
            raise ArchiveError(f"{text}: no such file or directory")
        head = _head(p)
        sniffed = [cls for cls in formats if cls.readable and _safe_sniff(cls, head, p)]
        if sniffed:
            top = max(cls.sniff_priority for cls in sniffed)
            sniffed = [cls for cls in sniffed if cls.sniff_priority == top]
        if len(sniffed) > 1:
            sniffed = _by_suffix(text, sniffed) or sniffed
        if sniffed:
            return sniffed[0]()
        found = [c for c in _by_suffix(text, formats) if c.readable]
        if found:
            return found[0]()
        raise UnknownFormatError(
            f"{text}: cannot tell its format from its content or name; choose one with "
            f"--from NAME (known formats: {_known()}; see massarc convert --list-formats)"
        )
    found = [c for c in _by_suffix(text, formats) if c.writable]
    if found:
        return found[0]()
    raise UnknownFormatError(
        f"{text}: cannot tell which format to write from its name; choose one with --to NAME "
        f"(writable formats: {', '.join(n for n, c in available_formats().items() if c.writable)})"
    )


def _safe_sniff(cls: type[Format], head: bytes, path: Path) -> bool:
    try:
        return bool(cls().sniff(head, path))
    except Exception:  # a sniffer that fails on foreign content simply does not match
        return False


def format_listing() -> list[dict[str, Any]]:
    """One row per format for ``--list-formats``: name, suffixes, modes, description,
    options."""
    rows = []
    for name, cls in available_formats().items():
        modes = ("read" if cls.readable else "") + (
            ("/write" if cls.readable else "write") if cls.writable else ""
        )
        rows.append(
            {
                "name": name,
                "suffixes": list(cls.suffixes),
                "modes": modes,
                "description": cls.description,
                "read_options": dict(cls.read_options),
                "write_options": dict(cls.write_options),
            }
        )
    return rows
