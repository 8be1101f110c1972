"""Create a run and append snapshots along time, crash-consistently.

A simulator streams a run far larger than memory::

    with create_run("run.zarr", meta) as w:
        for times, block in simulator_output():      # block: (replica, time, *lattice)
            w.append(times, block)

or one replica after another (``w.append(times, block, replica=r)``, block
``(time, *lattice)``), as many simulators print.

Crash consistency. Data are written first; then the commit marker (``state`` in the group
attribute ``massarc``) is advanced in one atomic file replace. Readers trust the marker
and truncate the arrays to it, so a reader never sees a half-written snapshot, and after a
kill at any moment the archive reopens as a consistent prefix. :func:`resume_run` trims the
arrays back to the marker, removes stray ``*.partial`` files and continues.

A write the storage refuses (a full disk: ``OSError`` ENOSPC; any other ``OSError``) stops
the writer with a :class:`~massarc.archive.errors.WriteError` naming the run and the
reason; what was committed before stays committed and the run stays incomplete, so
:func:`resume_run` continues it once there is room.
"""

from __future__ import annotations

import time as _time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import numpy as np
import zarr
from zarr.errors import ContainsArrayError, ContainsGroupError

from massarc.schema import ArchiveHeader, RunMeta, WriteState, parse_header
from massarc.schema.spec import (
    ARCHIVE_VERSION,
    ATTRIBUTE_KEY,
    INFLOW,
    MASS,
    OUTFLOW,
    RUN_KIND,
    TIME,
)

from .errors import ArchiveError, DataError, WriteError
from .guards import guard_masses, guard_times
from .layout import (
    chunk_snapshots,
    create_run_arrays,
    create_series_array,
    mass_dtype,
    sentinel,
)
from .store import Location, local_path, location_name, open_store

__all__ = ["RunWriter", "create_run", "resume_run"]

_SERIES = (INFLOW, OUTFLOW)


def _reason(exc: OSError) -> str:
    """The operating system's words for ``exc``, lower case ("no space left on device")."""
    text = exc.strerror or str(exc) or type(exc).__name__
    return text[:1].lower() + text[1:]


def _header_dict(meta: RunMeta, state: WriteState) -> dict[str, Any]:
    header = ArchiveHeader(
        format=RUN_KIND, format_version=ARCHIVE_VERSION, state=state, metadata=meta
    )
    return header.model_dump(mode="json", exclude_none=True)


class RunWriter:
    """Appends snapshots to one run archive. Obtain one from :func:`create_run` or
    :func:`resume_run`; use it as a context manager or call :meth:`close`.

    Parameters
    ----------
    strict
        Check every appended block: times finite and strictly increasing, masses
        non-negative integers that fit the dtype, and the declared total mass at the first
        snapshot of each replica. Turn off only to write deliberately faulty runs (tests
        of the validators do).
    commit_seconds
        Commit buffered snapshots at least this often (None: only at chunk boundaries,
        :meth:`flush` and :meth:`close`).
    """

    def __init__(
        self,
        group: zarr.Group,
        meta: RunMeta,
        state: WriteState,
        *,
        name: str,
        dtype: np.dtype | None = None,
        max_mass: int | None = None,
        snapshots_hint: int | None = None,
        strict: bool = True,
        commit_seconds: float | None = None,
        clevel: int = 5,
    ) -> None:
        self._group = group
        self.meta = meta
        self.state = state
        #: the write state of the last commit marker written (what a reader sees)
        self.committed = state
        self.name = name
        self._dtype = np.dtype(dtype) if dtype is not None else None
        self._max_mass = max_mass
        self._hint = snapshots_hint
        self.strict = strict
        self._commit_seconds = commit_seconds
        self._clevel = clevel
        self._lattice = tuple(meta.lattice.sites)
        self._buf_mass: list[np.ndarray] = []
        self._buf_time: list[np.ndarray] = []
        self._buf_series: dict[str, list[np.ndarray]] = {k: [] for k in _SERIES}
        self._buf_replica: int | None = None  # replica index of buffered data, None: lockstep
        self._buf_len = 0
        self._last_commit = _time.monotonic()
        self._closed = False
        #: the write state before :func:`resume_run` reopened the run (None otherwise)
        self.resumed_from: WriteState | None = None
        self._first_totals: dict[int, int] = {}
        self._times: np.ndarray = (
            np.asarray(group[TIME][: state.snapshots]) if TIME in group else np.empty(0)
        )
        if MASS in group:
            self._dtype = np.dtype(group[MASS].dtype)

    # -- public -------------------------------------------------------------------------

    @property
    def snapshots(self) -> int:
        """Committed plus buffered snapshots of the time axis."""
        extra = self._buf_len if self._buf_replica in (None, 0) and self._grows_time() else 0
        return self.state.snapshots + extra

    @property
    def last_time(self) -> float | None:
        """Time of the last snapshot appended to the time axis (committed or buffered)."""
        if self._buf_time and self._grows_time():
            return float(self._buf_time[-1][-1])
        return float(self._times[-1]) if len(self._times) else None

    @property
    def times(self) -> np.ndarray:
        """The committed time axis."""
        return self._times.copy()

    @property
    def dtype(self) -> np.dtype | None:
        """The mass dtype (None until the first flush chooses it, unless given)."""
        return self._dtype

    @property
    def chunk_snapshots(self) -> int | None:
        """Snapshots per chunk of ``mass`` (None while the dtype is not chosen yet).
        Appends of whole chunks starting at a chunk boundary encode every chunk once."""
        return self._time_chunk()

    def append_events(
        self,
        time: np.ndarray,
        replica: np.ndarray,
        source: np.ndarray,
        target: np.ndarray,
        amount: np.ndarray,
    ) -> int:
        """Append moves to the run's event log (subgroup ``events``, sorted by (replica,
        time); see :mod:`massarc.archive.events`). Returns the number of logged events."""
        from .events import append_events

        if self._closed:
            raise ArchiveError(f"{self.name}: writer is closed")
        return append_events(
            self._group, self.name, time, replica, source, target, amount, clevel=self._clevel
        )

    def append(
        self,
        times: Sequence[float] | np.ndarray,
        mass: np.ndarray,
        *,
        replica: int | None = None,
        inflow: np.ndarray | None = None,
        outflow: np.ndarray | None = None,
    ) -> None:
        """Append snapshots.

        ``replica=None``: ``mass`` is ``(replicas, n, *lattice)``, all replicas in lockstep.
        ``replica=r``: ``mass`` is ``(n, *lattice)`` for replica ``r``; replica 0 defines the
        time axis, later replicas must repeat its times exactly. ``inflow``/``outflow``
        (open systems) hold the cumulative mass that entered/left since the first snapshot,
        shaped like ``mass`` without the lattice axes.
        """
        if self._closed:
            raise ArchiveError(f"{self.name}: writer is closed")
        t = np.asarray(times, dtype=np.float64).reshape(-1)
        m = np.asarray(mass)
        lockstep = replica is None
        want_nd = len(self._lattice) + (2 if lockstep else 1)
        if m.ndim != want_nd or m.shape[-len(self._lattice) :] != self._lattice:
            axes = "(replica, time, *lattice)" if lockstep else "(time, *lattice)"
            raise DataError(
                f"{self.name}: expected mass shaped {axes} with lattice {list(self._lattice)}; "
                f"got shape {list(m.shape)}"
            )
        m_r = m if lockstep else m[None]
        if m_r.shape[1] != len(t):
            raise DataError(
                f"{self.name}: expected one time per snapshot; got {len(t)} times for "
                f"{m_r.shape[1]} snapshots"
            )
        if len(t) == 0:
            return
        series = {INFLOW: inflow, OUTFLOW: outflow}
        for key, val in series.items():
            if val is not None:
                arr = np.asarray(val).reshape(m_r.shape[0], len(t))
                series[key] = arr
        self._route(t, m_r, replica, series)

    def flush(self) -> None:
        """Write buffered snapshots and advance the commit marker."""
        if not self._buf_len:
            return
        with self._writing():
            self._write_buffer()

    @contextmanager
    def _writing(self) -> Iterator[None]:
        """Turn a write the storage refuses into a :class:`WriteError` and stop the writer
        (the committed prefix stays as it is)."""
        try:
            yield
        except OSError as exc:
            self._closed = True
            st = self.committed
            reason = _reason(exc)
            raise WriteError(
                f"{self.name}: {reason}; the run keeps the {st.snapshots} snapshots of "
                f"{st.replicas} replicas committed before and stays incomplete (make room, "
                "then resume it)",
                reason,
                exc.errno,
            ) from exc

    def _write_buffer(self) -> None:
        rep = self._buf_replica
        # one buffered block (an importer appending whole chunks) is written without a copy
        bufs = self._buf_mass
        data = bufs[0] if len(bufs) == 1 else np.concatenate(bufs, axis=1)
        t = np.concatenate(self._buf_time)
        series = {k: np.concatenate(v, axis=1) for k, v in self._buf_series.items() if v}
        self._buf_mass, self._buf_time = [], []
        self._buf_series = {k: [] for k in _SERIES}
        self._buf_len = 0
        self._ensure_arrays(data, series)
        st = self.state
        if rep is None or (rep == 0 and self._grows_time()):
            start, stop = st.snapshots, st.snapshots + len(t)
            nrep = data.shape[0]
            self._resize((nrep, stop))
            self._stored(MASS)[:, start:stop] = data
            self._stored(TIME)[start:stop] = t
            for k, v in series.items():
                self._stored(k)[:, start:stop] = v
            self._times = np.concatenate([self._times, t])
            self.state = st.model_copy(update={"snapshots": stop, "replicas": nrep})
        else:
            start = st.open_replica or 0
            stop = start + len(t)
            self._stored(MASS)[rep, start:stop] = data[0]
            for k, v in series.items():
                self._stored(k)[rep, start:stop] = v[0]
            if stop == st.snapshots:
                self.state = st.model_copy(update={"replicas": rep + 1, "open_replica": None})
            else:
                self.state = st.model_copy(update={"open_replica": stop})
        self._commit()

    def close(self, complete: bool = True) -> None:
        """Flush, and mark the run complete (unless ``complete=False``).

        A replica that was begun but not finished keeps the run incomplete and raises
        :class:`DataError`; the committed replicas stay readable.
        """
        if self._closed:
            return
        self.flush()
        self._closed = True
        with self._writing():
            self._finish(complete)

    def _finish(self, complete: bool) -> None:
        st = self.state
        if st.open_replica:
            raise DataError(
                f"{self.name}: replica {st.replicas} has {st.open_replica} of {st.snapshots} "
                "snapshots; the archive stays incomplete"
            )
        if st.open_replica == 0:
            self._resize((st.replicas, st.snapshots))
            self.state = st.model_copy(update={"open_replica": None})
        if complete:
            self.meta = self._derived_meta()
            self.state = self.state.model_copy(update={"complete": True})
        self._commit()

    def __enter__(self) -> RunWriter:
        return self

    def __exit__(self, exc_type: object, exc: object, tb: object) -> None:
        if exc_type is None:
            self.close()
        elif not self._closed:
            self._closed = True  # keep what was committed; the run stays incomplete

    # -- internals ----------------------------------------------------------------------

    def _stored(self, key: str) -> zarr.Array:
        """Array ``key`` for writing. Reopened arrays forget the runtime setting
        ``write_empty_chunks``; without it zarr compares every chunk with the fill value
        before storing it (half as much CPU again as the encoding), and the layout stores
        every chunk anyway."""
        return self._group[key].with_config({"write_empty_chunks": True})

    def _grows_time(self) -> bool:
        """True while appends to replica 0 extend the time axis (no later replica yet)."""
        return self.state.replicas <= 1 and self.state.open_replica is None

    def _route(
        self, t: np.ndarray, m: np.ndarray, replica: int | None, series: dict[str, Any]
    ) -> None:
        st = self.state
        if replica is None:
            if st.open_replica is not None or (self._buf_len and self._buf_replica is not None):
                raise ArchiveError(
                    f"{self.name}: replicas are being written one by one; pass replica="
                )
            if st.replicas and m.shape[0] != st.replicas:
                raise DataError(
                    f"{self.name}: expected {st.replicas} replicas per block; got {m.shape[0]}"
                )
            first_index = self.snapshots
        elif replica == 0 and self._grows_time():
            if self._buf_len and self._buf_replica is None:
                raise ArchiveError(f"{self.name}: mixing lockstep and per-replica appends")
            first_index = self.snapshots
        else:
            if self._buf_len and self._buf_replica is None:
                raise ArchiveError(f"{self.name}: mixing lockstep and per-replica appends")
            if self._buf_len and self._buf_replica != replica:
                self.flush()
            st = self.state
            current = st.replicas
            if replica != current:
                raise ArchiveError(
                    f"{self.name}: expected replica {current} next; got replica {replica}"
                )
            if st.open_replica is None:
                # replica `current` begins: the time axis is now fixed
                self.flush()
                self.state = self.state.model_copy(update={"open_replica": 0})
                self._resize((current + 1, self.state.snapshots))
                self._commit()
                st = self.state
            done = (st.open_replica or 0) + self._buf_len
            want = self._times[done : done + len(t)]
            if len(want) < len(t) or not np.array_equal(want, t):
                bad = next((i for i in range(len(t)) if i >= len(want) or want[i] != t[i]), 0)
                if done + bad >= len(self._times):
                    raise DataError(
                        f"{self.name}: replica {replica} has more snapshots than replica 0 "
                        f"({len(self._times)})"
                    )
                raise DataError(
                    f"{self.name}: replica {replica}, snapshot {done + bad}: time {float(t[bad])} "
                    f"differs from replica 0's {float(self._times[done + bad])}"
                )
            first_index = done
        rep_offset = 0 if replica is None else replica
        if self.strict:
            extends_time = replica is None or (replica == 0 and self._grows_time())
            self._validate(t, m, first_index, rep_offset, extends_time)
        self._record_first_totals(m, first_index, rep_offset)
        if self._dtype is None:
            self._choose_dtype(m)
        self._buf_replica = replica
        self._buf_mass.append(m)
        self._buf_time.append(t)
        for k, v in series.items():
            if v is not None:
                self._buf_series[k].append(np.asarray(v, dtype=np.int64))
        self._buf_len += len(t)
        self._maybe_flush(first_index)

    def _maybe_flush(self, first_index: int) -> None:
        tc = self._time_chunk()
        end = first_index + len(self._buf_time[-1])
        begin = end - self._buf_len
        if (tc and (end // tc) > (begin // tc)) or (
            self._commit_seconds is not None
            and (_time.monotonic() - self._last_commit >= self._commit_seconds)
        ):
            self.flush()

    def _time_chunk(self) -> int | None:
        if MASS in self._group:
            return int(self._group[MASS].chunks[1])
        if self._dtype is not None:
            return chunk_snapshots(self._lattice, self._dtype, self._hint)
        return None

    def _validate(
        self, t: np.ndarray, m: np.ndarray, first: int, rep0: int, check_times: bool
    ) -> None:
        if check_times:
            guard_times(self.name, t, first, self.last_time)
        guard_masses(self.name, m, first, rep0, self._dtype)

    def _record_first_totals(self, m: np.ndarray, first: int, rep0: int) -> None:
        if first != 0:
            return
        lattice_axes = tuple(range(2, m.ndim))
        totals = m[:, 0].sum(axis=tuple(a - 1 for a in lattice_axes), dtype=np.int64)
        declared = self.meta.run.total_mass
        for r, tot in enumerate(totals.tolist()):
            self._first_totals[rep0 + r] = int(tot)
            if self.strict and declared is not None and int(tot) != declared:
                raise DataError(
                    f"{self.name}: metadata contradicts the data: run.total_mass is {declared} "
                    f"but replica {rep0 + r}, snapshot 0 holds {int(tot)}"
                )

    def _choose_dtype(self, data: np.ndarray) -> None:
        """Pick the smallest dtype for the run from the first data (see :func:`create_run`).

        Done at the first append, so that chunk boundaries (and the commits there) are
        known from the start."""
        if self._max_mass is not None:
            top = self._max_mass
        elif self.meta.run.total_mass is not None:
            top = self.meta.run.total_mass
        elif self.meta.lattice.closed and self._first_totals:
            top = max(self._first_totals.values())
        else:
            top = np.iinfo(np.uint32).max - 1
        dtype = mass_dtype(int(top))
        if self.strict and data.size and int(data.max()) >= sentinel(dtype):
            raise DataError(
                f"{self.name}: mass {int(data.max())} does not fit {dtype}; pass max_mass"
            )
        self._dtype = dtype

    def _ensure_arrays(self, data: np.ndarray, series: dict[str, np.ndarray]) -> None:
        g = self._group
        if MASS not in g:
            if self._dtype is None:
                self._choose_dtype(data)
            assert self._dtype is not None
            create_run_arrays(
                g, self._lattice, self._dtype, hint=self._hint, clevel=self._clevel,
                time_units=self.meta.run.time_units,
            )  # fmt: skip
        for k in series:
            if k not in g:
                create_series_array(g, k, tuple(g[MASS].shape[:2]), clevel=self._clevel)

    def _resize(self, extent: tuple[int, int]) -> None:
        g = self._group
        if MASS not in g:
            return
        arr = g[MASS]
        shape = (*extent, *self._lattice)
        if tuple(arr.shape) != shape:
            arr.resize(shape)
        if g[TIME].shape[0] != extent[1]:
            g[TIME].resize((extent[1],))
        for k in _SERIES:
            if k in g and tuple(g[k].shape) != extent:
                g[k].resize(extent)

    def _derived_meta(self) -> RunMeta:
        """Fill total mass and density from the data when the metadata left them out."""
        run = self.meta.run
        totals = set(self._first_totals.values())
        if run.total_mass is None and self.meta.lattice.closed and len(totals) == 1:
            m = totals.pop()
            run = run.model_copy(update={"total_mass": m, "density": m / self.meta.lattice.volume})
        elif run.total_mass is not None and run.density is None:
            run = run.model_copy(update={"density": run.total_mass / self.meta.lattice.volume})
        return self.meta.model_copy(update={"run": run})

    def _commit(self) -> None:
        self._group.update_attributes({ATTRIBUTE_KEY: _header_dict(self.meta, self.state)})
        self.committed = self.state
        self._last_commit = _time.monotonic()

    def undo_resume(self) -> bool:
        """Put back the write state a resumed run had before :func:`resume_run`, when
        nothing has been committed since (a refused resume changes nothing). True if done."""
        before = self.resumed_from
        if before is None:
            return False
        same = (before.replicas, before.snapshots, before.open_replica)
        if (self.state.replicas, self.state.snapshots, self.state.open_replica) != same:
            return False
        self.state = before
        self._commit()
        return True


def create_run(
    location: Location,
    meta: RunMeta,
    *,
    overwrite: bool = False,
    dtype: Any = None,
    max_mass: int | None = None,
    snapshots_hint: int | None = None,
    strict: bool = True,
    commit_seconds: float | None = None,
    clevel: int = 5,
) -> RunWriter:
    """Create an empty run archive at ``location`` and return its writer.

    ``dtype`` defaults to the smallest unsigned integer that holds the total mass (declared,
    or read from the first snapshot of a closed system; ``max_mass`` overrides it).
    ``snapshots_hint`` caps the chunk length for short runs.

    >>> from massarc.schema import parse_metadata
    >>> meta = parse_metadata({"model": {"family": "zrp", "b": 3.0},
    ...     "lattice": {"sites": [4], "boundary": "periodic"}, "run": {"regime": "transient"}})
    >>> with create_run("memory://doc-writer", meta, overwrite=True) as w:
    ...     w.append([0.0, 1.0], np.array([[[1, 0, 2, 1], [0, 1, 2, 1]]]))
    """
    name = location_name(location)
    if dtype is not None and np.dtype(dtype).kind not in "ui":
        raise ArchiveError(f"{name}: expected an integer dtype; got {np.dtype(dtype)}")
    store = open_store(location, "w")
    state = WriteState(snapshots=0, replicas=0, complete=False)
    try:
        # the header goes into the group's first zarr.json: a kill cannot leave a group
        # without one
        group = zarr.open_group(
            store,
            mode="w" if overwrite else "w-",
            zarr_format=3,
            attributes={ATTRIBUTE_KEY: _header_dict(meta, state)},
        )
    except (ContainsGroupError, ContainsArrayError, FileExistsError):
        raise ArchiveError(f"{name}: already exists (pass overwrite=True to replace it)") from None
    except OSError as exc:
        reason = _reason(exc)
        raise WriteError(f"{name}: {reason}; the run was not begun", reason, exc.errno) from exc
    return RunWriter(
        group,
        meta,
        state,
        name=name,
        dtype=dtype,
        max_mass=max_mass,
        snapshots_hint=snapshots_hint,
        strict=strict,
        commit_seconds=commit_seconds,
        clevel=clevel,
    )


def resume_run(
    location: Location, *, strict: bool = True, commit_seconds: float | None = None
) -> RunWriter:
    """Reopen a run for appending after a crash (or to extend a finished run).

    Arrays are trimmed to the commit marker, stray ``*.partial`` files are removed and the
    run is marked incomplete until the writer closes.
    """
    name = location_name(location)
    path = local_path(location)
    if path is not None:
        if not (path / "zarr.json").is_file():
            raise ArchiveError(f"{name}: no run archive to resume")
        for stray in path.rglob("*.partial"):
            stray.unlink(missing_ok=True)
    group = zarr.open_group(open_store(location, "a"), mode="r+", zarr_format=3)
    header = parse_header(group.attrs.get(ATTRIBUTE_KEY), name)
    state = header.state.model_copy(update={"complete": False})
    if header.state.snapshots == 0 and (MASS in group) != (TIME in group):
        # killed while the arrays were being created, before any commit: begin them again
        for key in (MASS, TIME, *_SERIES):
            if key in group:
                del group[key]
    writer = RunWriter(
        group, header.metadata, state, name=name, strict=strict, commit_seconds=commit_seconds
    )
    writer.resumed_from = header.state
    nrep = state.replicas + (1 if state.open_replica is not None else 0)
    writer._resize((nrep, state.snapshots))
    if state.snapshots and MASS in group:
        # first-snapshot totals of what is committed, so that close() derives total_mass
        # exactly as an uninterrupted writer would
        begun = state.replicas + (1 if state.open_replica else 0)
        for r in range(begun):
            writer._first_totals[r] = int(np.asarray(group[MASS][r, 0]).sum(dtype=np.int64))
    writer._commit()
    return writer
