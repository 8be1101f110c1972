"""Open runs lazily: metadata, shapes, and chunk-by-chunk access to the masses.

>>> run = open_run("samples/depot-ring.zarr")
>>> run.meta.model.family, run.n_replicas, run.n_snapshots
('zrp', 4, 12288)
>>> for chunk in run.chunks():
...     chunk.replica, chunk.start, chunk.stop, chunk.mass.shape
(0, 0, 12288, (12288, 64))
(1, 0, 12288, (12288, 64))
(2, 0, 12288, (12288, 64))
(3, 0, 12288, (12288, 64))

Only the committed extent (the commit marker in the header) is visible: a run whose writer
was killed reads as the consistent prefix it had committed.
"""

from __future__ import annotations

import json
import math
import os
import zipfile
import zlib
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import zarr
from zarr.abc.store import Store
from zarr.storage import FsspecStore, LocalStore

from massarc.schema import ArchiveHeader, MetadataError, RunMeta, WriteState, parse_header
from massarc.schema.spec import (
    ATTRIBUTE_KEY,
    COLLECTION_KIND,
    EVENTS,
    MASS,
    RUN_KIND,
    TIME,
)

from .allow import run_problem
from .errors import ArchiveError, NotARunError
from .limits import extent_problem, local_problem, max_ratio, needs_listing, stored_size
from .remote import CappedStore, remote_run_keys
from .store import Location, local_path, location_name, open_store

__all__ = ["Chunk", "ChunkRef", "Run", "open_run", "open_runs"]

#: What decoding a damaged chunk raises: zarr's codecs (checksum, decoding), and a zip
#: store's members (a bad local header, a truncated or corrupt deflate stream; found by
#: fuzzing, docs/fuzzing.md).
DECODE_ERRORS = (ValueError, RuntimeError, zipfile.BadZipFile, zlib.error, EOFError)


@dataclass(frozen=True)
class ChunkRef:
    """One chunk of ``mass``: replica, snapshot range [start, stop) and its store key."""

    replica: int
    start: int
    stop: int
    key: str


@dataclass(frozen=True)
class Chunk:
    """The decoded masses of one chunk: ``mass`` is ``(stop - start, *lattice)``.

    ``missing``: None for data; else why the chunk could not be read (missing or corrupt),
    and ``mass`` holds zeros that are not data (only from ``Run.chunks(allow_missing=True)``).
    """

    replica: int
    start: int
    stop: int
    mass: np.ndarray
    key: str = ""
    missing: str | None = None


@dataclass
class Run:
    """A run archive opened for reading. Build it with :func:`open_run`.

    ``meta`` is None only when opened leniently and the header is invalid; then
    ``problems`` says why.
    """

    group: zarr.Group
    name: str
    header: ArchiveHeader | None
    problems: list[str] = field(default_factory=list)
    #: Members whose Zarr metadata cannot be read, with the reason: ``{"mass": "..."}``.
    unreadable: dict[str, str] = field(default_factory=dict)
    _members: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    def _member(self, key: str) -> Any:
        """``group.get(key)``, looked up once: a Zarr group lookup costs a store read.
        A member whose metadata zarr cannot parse reads as absent, and the reason goes
        to :attr:`unreadable` (the ``schema`` check reports it)."""
        if key not in self._members:
            try:
                value = self.group.get(key)
            except Exception as exc:  # zarr raises many kinds for metadata it cannot parse
                self.unreadable[key] = f"{key}/zarr.json: {_first_line(exc)}"
                value = None
            if key == MASS and isinstance(value, zarr.Array):
                problem = self._extent_problem(value)
                if problem is not None:
                    self.unreadable[key] = f"{MASS}: {problem}"
                    value = None
            self._members[key] = value
        return self._members[key]

    def _extent_problem(self, arr: zarr.Array) -> str | None:
        """Why the committed extent of ``arr`` cannot be real (see
        :func:`~massarc.archive.limits.extent_problem`); checked before any chunk list is
        built, so that a few-KB archive cannot claim 10^15 snapshots."""
        shape = tuple(int(n) for n in arr.shape)
        if len(shape) < 3:
            return None  # the schema check reports the dimensions
        reps, snaps = shape[0], shape[1]
        if self.header is not None:
            st = self.header.state
            reps, snaps = min(reps, st.replicas), min(snaps, st.snapshots)
        lattice = shape[2:]
        itemsize = np.dtype(arr.dtype).itemsize
        declared = reps * snaps * math.prod(lattice) * itemsize
        if not needs_listing(declared):
            return None
        store = arr.store_path.store
        if isinstance(store, LocalStore):
            path = arr.store_path.path
            root = Path(store.root) / path if path else Path(store.root)
            stored = stored_size(root, declared // max_ratio() + 1)
        else:
            try:
                stored = int(arr.nbytes_stored())
            except Exception:  # a store that cannot tell: judged as empty
                stored = 0
        return extent_problem(reps, snaps, lattice, itemsize, stored)

    def array(self, key: str) -> zarr.Array | None:
        """The member array ``key`` (``"mass"``, ``"time"``...), or None when it is absent,
        not an array, or its metadata cannot be read (see :attr:`unreadable`)."""
        arr = self._member(key)
        return arr if isinstance(arr, zarr.Array) else None

    # -- what the run is ---------------------------------------------------------------

    @property
    def meta(self) -> RunMeta | None:
        return self.header.metadata if self.header else None

    @property
    def state(self) -> WriteState:
        if self.header is not None:
            return self.header.state
        m = self._member(MASS)
        shape = m.shape if isinstance(m, zarr.Array) else (0, 0)
        return WriteState(snapshots=int(shape[1]), replicas=int(shape[0]), complete=False)

    @property
    def complete(self) -> bool:
        return self.state.complete

    @property
    def mass(self) -> zarr.Array:
        """The raw Zarr array (its shape may exceed the committed extent after a crash)."""
        arr = self._member(MASS)
        if not isinstance(arr, zarr.Array):
            why = self.unreadable.get(MASS, f"no '{MASS}' array")
            raise ArchiveError(f"{self.name}: {why}")
        return arr

    @property
    def has_data(self) -> bool:
        return isinstance(self._member(MASS), zarr.Array) and self.n_snapshots > 0

    @property
    def n_replicas(self) -> int:
        return min(self.state.replicas, self._raw_shape()[0])

    @property
    def n_snapshots(self) -> int:
        return min(self.state.snapshots, self._raw_shape()[1])

    @property
    def sites(self) -> tuple[int, ...]:
        arr = self._member(MASS)
        if isinstance(arr, zarr.Array):
            return tuple(int(x) for x in arr.shape[2:])
        return tuple(self.meta.lattice.sites) if self.meta else ()

    @property
    def shape(self) -> tuple[int, ...]:
        """Committed shape ``(replicas, snapshots, *lattice)``."""
        return (self.n_replicas, self.n_snapshots, *self.sites)

    @property
    def dtype(self) -> np.dtype:
        return np.dtype(self.mass.dtype)

    @property
    def chunk_snapshots(self) -> int:
        return int(self.mass.chunks[1])

    @property
    def times(self) -> np.ndarray:
        """The committed snapshot times (float64, read-only; read once)."""
        if "times" not in self._members:
            arr = self._member(TIME)
            times = np.empty(0)
            if isinstance(arr, zarr.Array):
                times = self._read_times(arr)
            elif self.n_snapshots:
                why = self.unreadable.get(TIME, f"no '{TIME}' array")
                raise ArchiveError(f"{self.name}: {why}")
            times.setflags(write=False)
            self._members["times"] = times
        return self._members["times"]

    def _read_times(self, arr: zarr.Array) -> np.ndarray:
        """``time[:T]``, chunk by chunk: one that does not decode raises
        :class:`ArchiveError` naming it (a missing one reads as NaN, the fill value, which
        ``time-order`` reports as not finite)."""
        n = self.n_snapshots
        if arr.ndim != 1 or arr.shape[0] < n:
            raise ArchiveError(
                f"{self.name}: {TIME}: expected shape [{n}] or longer; got {list(arr.shape)}"
            )
        step = int(arr.chunks[0])
        out = np.empty(n, dtype=np.float64)
        for k, lo in enumerate(range(0, n, step)):
            hi = min(lo + step, n)
            key = f"{TIME}/{arr.metadata.encode_chunk_key((k,))}"
            try:
                out[lo:hi] = np.asarray(arr[lo:hi], dtype=np.float64)
            except DECODE_ERRORS as exc:
                raise ArchiveError(
                    f"{self.name}: {key} (snapshots {lo}..{hi - 1}) is corrupt: {_first_line(exc)}"
                ) from None
        return out

    @property
    def nbytes(self) -> int:
        """Uncompressed size of the committed masses."""
        return math.prod(self.shape) * self.dtype.itemsize if self.has_data else 0

    def stored_bytes(self) -> int:
        """Bytes the ``mass`` chunks occupy in the store (compressed)."""
        return int(self.mass.nbytes_stored()) if MASS in self.group else 0

    def series(self, name: str) -> np.ndarray | None:
        """An optional ``(replica, time)`` array such as ``inflow``, cut to the committed extent."""
        arr = self.group.get(name)
        if not isinstance(arr, zarr.Array):
            return None
        return np.asarray(arr[: self.n_replicas, : self.n_snapshots])

    @property
    def events(self) -> zarr.Group | None:
        """The optional event-log subgroup."""
        g = self.group.get(EVENTS)
        return g if isinstance(g, zarr.Group) else None

    @property
    def summaries(self) -> Any:
        """The stored observables (:class:`massarc.archive.summaries.Summaries`), or None
        when the run has not been summarised (``massarc summarize``). Read afresh on each
        access."""
        from .summaries import read_summaries

        return read_summaries(self)

    # -- reading -------------------------------------------------------------------------

    def chunk_refs(self) -> list[ChunkRef]:
        """Every chunk of the committed extent, replica-major then time, without reading."""
        if not self.has_data:
            return []
        tc = self.chunk_snapshots
        tail = "/".join("0" for _ in self.sites)
        refs = []
        for r in range(self.n_replicas):
            for k, start in enumerate(range(0, self.n_snapshots, tc)):
                stop = min(start + tc, self.n_snapshots)
                refs.append(ChunkRef(r, start, stop, f"{MASS}/c/{r}/{k}/{tail}"))
        return refs

    def read_chunk(self, ref: ChunkRef) -> Chunk:
        """Decode one chunk (raises if it is corrupt: the checksum does not match)."""
        data = np.asarray(self.mass[ref.replica, ref.start : ref.stop])
        return Chunk(ref.replica, ref.start, ref.stop, data, ref.key)

    def chunks(self, *, allow_missing: bool = False) -> Iterator[Chunk]:
        """Decoded chunks one at a time, replica-major then time (memory: one chunk).

        A missing or corrupt chunk raises :class:`~massarc.archive.errors.ChunkError`
        naming it: zarr alone would read a missing chunk as the fill value. With
        ``allow_missing`` it comes as a :class:`Chunk` whose ``missing`` says why, its
        masses zeros that are not data."""
        from ._chunk_read import checked_chunks  # it imports this module

        yield from checked_chunks(self, allow_missing=allow_missing)

    def read(self, replica: int, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Masses of one replica for snapshots [start, stop), as ``(time, *lattice)``."""
        stop = self.n_snapshots if stop is None else min(stop, self.n_snapshots)
        if not 0 <= replica < self.n_replicas:
            raise IndexError(f"expected a replica in 0..{self.n_replicas - 1}, got {replica}")
        return np.asarray(self.mass[replica, start:stop])

    def _raw_shape(self) -> tuple[int, ...]:
        arr = self._member(MASS)
        return tuple(arr.shape) if isinstance(arr, zarr.Array) else (0, 0)

    def to_xarray(self, *, summaries: bool = True) -> Any:
        """The run as a lazy, Dask-backed :class:`xarray.DataTree`: ``mass`` with
        coordinates replica, time, site (or y, x), the metadata as attributes, and the
        stored summaries as the child ``summaries`` (``summaries=False`` leaves them out).
        Needs the ``xarray`` extra; see :mod:`massarc.archive.labelled`."""
        from .labelled import run_tree

        return run_tree(self, summaries=summaries)

    def _repr_html_(self) -> str:
        from .notebook import run_html

        return run_html(self)

    def __repr__(self) -> str:
        fam = self.meta.model.family if self.meta else "?"
        return f"<Run {self.name!r} {fam} shape={self.shape}>"


def _is_run(group: zarr.Group) -> bool:
    raw = group.attrs.get(ATTRIBUTE_KEY)
    return isinstance(raw, dict) and raw.get("format") == RUN_KIND


def _first_line(exc: BaseException) -> str:
    lines = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {lines[0][:200]}" if lines else type(exc).__name__


def _run_dirs(root: Path) -> list[tuple[Path, str | None]]:
    """Directories below ``root`` whose ``zarr.json`` is a massarc run, in name order, each
    with None; or whose ``zarr.json`` cannot be read as JSON, each with the reason (a
    collection lists the runs it cannot read too). The walk does not descend into Zarr
    nodes (a run's arrays, or runs inside runs)."""
    found: list[tuple[Path, str | None]] = []
    for here, dirs, _files in os.walk(root):
        dirs.sort()
        node = Path(here) / "zarr.json"
        if node.is_file() and Path(here) != root:
            dirs.clear()
            try:
                doc = json.loads(node.read_text(encoding="utf-8"))
            except (OSError, ValueError) as exc:
                found.append((Path(here), f"{node}: cannot be read as JSON ({_first_line(exc)})"))
                continue
            if not isinstance(doc, dict):
                found.append(
                    (Path(here), f"{node}: expected a JSON object; got {type(doc).__name__}")
                )
                continue
            attrs = doc.get("attributes") or {}
            raw = attrs.get(ATTRIBUTE_KEY) if isinstance(attrs, dict) else None
            is_group = doc.get("node_type") == "group"
            if is_group and isinstance(raw, dict) and raw.get("format") == RUN_KIND:
                found.append((Path(here), None))
    return found


def _broken(name: str, problem: str) -> Run:
    """A run that cannot be opened, as a run without header or arrays: ``problems`` says
    why, so that a collection still lists it and ``schema`` reports it."""
    empty = zarr.open_group(zarr.storage.MemoryStore(), mode="w", zarr_format=3)
    return Run(empty, name, None, problems=[problem])


def _from_dir(path: Path, problem: str | None, lenient: bool) -> Run:
    """The run at ``path`` found by :func:`_run_dirs`; a broken one raises unless lenient."""
    if problem is None:
        try:
            return _from_group(_open_group(path), str(path), lenient)
        except MetadataError:
            raise
        except Exception as exc:  # zarr refuses the group's metadata
            problem = f"{path}/zarr.json: {_first_line(exc)}"
    if not lenient:
        raise ArchiveError(problem)
    return _broken(str(path), problem)


def _from_group(group: zarr.Group, name: str, lenient: bool) -> Run:
    raw = group.attrs.get(ATTRIBUTE_KEY)
    if raw is None:
        raise NotARunError(f"{name}: not a massarc run (no '{ATTRIBUTE_KEY}' group attribute)")
    if isinstance(raw, dict) and raw.get("format") == COLLECTION_KIND:
        raise NotARunError(f"{name}: a collection of runs, not a single run")
    try:
        header = parse_header(raw, name)
    except MetadataError as exc:
        if not lenient:
            raise
        return Run(group, name, None, problems=list(exc.problems))
    run = Run(group, name, header)
    path = group.store_path.path
    store = group.store_path.store
    refused = None
    if isinstance(store, LocalStore):  # before anything below the run is opened
        refused = local_problem(Path(store.root) / path if path else Path(store.root))
    refused = refused or run_problem(store, f"{path}/" if path else "")
    if refused is not None:  # nothing of the run is decoded: its arrays read as absent
        run.unreadable[MASS] = refused
        run._members.update({MASS: None, TIME: None})
    if not lenient and run.array(MASS) is None and MASS in run.unreadable:
        raise ArchiveError(f"{name}: {run.unreadable[MASS]}")
    return run


def _open_group(location: Location) -> zarr.Group:
    name = location_name(location)
    path = local_path(location)
    node = path / "zarr.json" if path is not None and path.is_dir() else None
    if node is not None and (node.is_symlink() or (node.exists() and not node.is_file())):
        raise ArchiveError(f"{node}: expected a regular file; got a link or a special file")
    store = open_store(location, "r")
    try:
        return zarr.open_group(store, mode="r", zarr_format=3, use_consolidated=False)
    except (FileNotFoundError, zarr.errors.GroupNotFoundError, KeyError):
        raise NotARunError(f"{name}: not a Zarr v3 group") from None
    except Exception as exc:  # e.g. a zarr.json that is not JSON, a file that is not a zip
        raise ArchiveError(f"{name}: cannot open as a Zarr v3 group ({_first_line(exc)})") from None


def open_run(location: Location, *, lenient: bool = False) -> Run:
    """Open one run for reading.

    Raises :class:`NotARunError` when the location is not a run and
    :class:`~massarc.schema.MetadataError` when its header is invalid, unless ``lenient``
    (then ``run.problems`` lists what is wrong and ``run.meta`` is None).
    """
    return _from_group(_open_group(location), location_name(location), lenient)


def open_runs(location: Location, *, lenient: bool = False) -> list[Run]:
    """Open a run, or every run of a collection (a Zarr group of runs, or a directory of
    run archives), in name order."""
    name = location_name(location)
    path = local_path(location)
    if path is not None and path.is_dir() and not (path / "zarr.json").exists():
        runs = [_from_dir(d, problem, lenient) for d, problem in _run_dirs(path)]
        if not runs:
            raise NotARunError(f"{name}: directory holds no massarc run")
        return runs
    try:
        group = _open_group(location)
    except NotARunError:
        if path is not None or isinstance(location, Store):
            raise
        runs = _remote_runs(os.fspath(location), name, lenient)
        if not runs:
            raise NotARunError(f"{name}: holds no massarc run") from None
        return runs
    if _is_run(group):
        return [_from_group(group, name, lenient)]
    raw = group.attrs.get(ATTRIBUTE_KEY)
    is_collection = isinstance(raw, dict) and raw.get("format") == COLLECTION_KIND
    if path is not None and path.is_dir():  # a local group: children zarr cannot read count
        found = _run_dirs(path)
        if found:
            return [_from_dir(d, problem, lenient) for d, problem in found]
    runs = []
    for key, child in sorted(group.groups()):
        if _is_run(child):
            runs.append(_from_group(child, f"{name}/{key}", lenient))
    if not runs:
        kind = "collection" if is_collection else "group"
        raise NotARunError(f"{name}: this {kind} holds no massarc run")
    return runs


def _remote_runs(url: str, name: str, lenient: bool) -> list[Run]:
    """The runs below a URL prefix that is not itself a Zarr group (a "directory" of runs
    in an object store), found by listing its ``zarr.json`` objects; a run inside a run is
    not descended into, and one that cannot be opened is listed as broken."""
    store = open_store(url, "r")
    inner = store._store if isinstance(store, CappedStore) else store
    keys = remote_run_keys(inner) if isinstance(inner, FsspecStore) else None
    runs: list[Run] = []
    taken: list[str] = []
    for key in keys or []:
        if any(key.startswith(f"{t}/") for t in taken):
            continue
        child = f"{url.rstrip('/')}/{key}"
        try:
            group = _open_group(child)
        except Exception as exc:  # reported as this run's failure
            if not lenient:
                raise
            taken.append(key)
            runs.append(_broken(f"{name.rstrip('/')}/{key}", f"{key}/zarr.json: {exc}"))
            continue
        if _is_run(group):
            taken.append(key)
            runs.append(_from_group(group, f"{name.rstrip('/')}/{key}", lenient))
    return sorted(runs, key=lambda r: r.name)
