"""The capped source: a format's reader run in a child process under an address-space cap
and time limits, for formats read by native libraries (HDF5 and NetCDF through h5py and
netCDF4).

A damaged HDF5 or NetCDF file can make the native library crash (a segmentation fault),
hang or allocate without bound anywhere: opening the file, reading an attribute, reading a
dimension label, decoding a chunk. No exception handler in this process could stop that
(found by fuzzing, docs/fuzzing.md). So :class:`CappedSource` opens the file in a child
process (``RLIMIT_AS`` :data:`CHILD_MEMORY`; every step gets :data:`STEP_SECONDS` of wall
time and of CPU time) and runs the format's ordinary :class:`Source` there: ``hints``,
``mapped``, ``n_snapshots_for`` and ``batches`` are forwarded, and the batches come back
one at a time over a socket (the child reads the next batch while this process writes the
last one; memory: about two batches). A crash, a hang or memory exhaustion in the child is
a one-line :class:`DataError` naming the file; massarc's own errors raised in the child
(:class:`DataError`, :class:`MetadataError`) are raised again here, with their message.
One process start per file read.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import traceback
from collections.abc import Iterator
from multiprocessing.connection import Connection
from pathlib import Path
from typing import Any

from massarc.schema import MetadataError, RunMeta

from ..errors import ArchiveError, DataError
from .registry import Batch, Events, Source

__all__ = ["CHILD_MEMORY", "STEP_SECONDS", "CappedSource"]

#: Address space of the child: room for Python, NumPy, xarray, the HDF5 library and two
#: batches of data (``BATCH_BYTES``), not for what a damaged file could make them allocate.
CHILD_MEMORY = 1 << 30
#: Wall-clock seconds this process waits for each step of the child (opening the file,
#: its metadata, one batch), and the CPU seconds the child may spend on one step (a child
#: whose parent was killed cannot spin on a damaged file for ever).
STEP_SECONDS = 60.0
#: Exit status of a child that ran out of address space in Python (``MemoryError``).
_OUT_OF_MEMORY = 3
#: What the child tells this process about its source after every step.
_STATE = ("name", "unit", "total", "dtype", "n_snapshots", "notes")

#: Sets the cap (or keeps a lower one massarc runs under) before anything is imported,
#: then serves the requests on the socket.
_LAUNCH = (
    "import resource, sys; "
    "cap, hard = int(sys.argv[2]), resource.getrlimit(resource.RLIMIT_AS)[1]; "
    "cap = cap if hard == resource.RLIM_INFINITY else min(cap, hard); "
    "resource.setrlimit(resource.RLIMIT_AS, (cap, cap)); "
    "from massarc.archive.formats._capped import serve; serve(int(sys.argv[1]))"
)


class _Child:
    """The child process of a file ``name`` read by ``library``, and the conversation."""

    def __init__(self, name: str, library: str) -> None:
        self.name = name
        self.library = library
        self.state: dict[str, Any] = {}
        ours, theirs = socket.socketpair()
        env = {**os.environ, "MALLOC_ARENA_MAX": "2", "OMP_NUM_THREADS": "1"}
        fd = theirs.fileno()
        args = [sys.executable, "-c", _LAUNCH, str(fd), str(CHILD_MEMORY)]
        try:
            self.proc = subprocess.Popen(
                args,
                pass_fds=(fd,),
                stdin=subprocess.DEVNULL,
                stdout=subprocess.DEVNULL,
                stderr=subprocess.DEVNULL,
                env=env,
            )
        finally:
            theirs.close()
        self.conn = Connection(ours.detach())

    def close(self) -> None:
        # nothing the child holds is worth its orderly exit (it reads, and half a second
        # tearing down xarray and the HDF5 library is half the cost of a small file)
        self.conn.close()
        self.proc.kill()
        self.proc.wait()

    def send(self, *request: Any) -> None:
        try:
            self.conn.send(request)
        except OSError:  # the child is gone already
            raise self._death() from None

    def ask(self, *request: Any) -> Any:
        self.send(*request)
        return self.answer()[1]

    def answer(self) -> tuple[str, Any]:
        """The child's next message; its errors raised here, its death a DataError."""
        try:
            ready = self.conn.poll(STEP_SECONDS)
            message = self.conn.recv() if ready else None
        except (EOFError, OSError):
            raise self._death() from None
        if message is None:
            self.proc.kill()
            self.proc.wait()
            raise DataError(
                f"{self.name}: damaged file: the {self.library} library did not finish "
                f"reading it in {STEP_SECONDS:.0f} s"
            )
        kind, value, self.state = message
        if kind == "error":
            raise _rebuilt(value)
        if kind == "internal":
            raise RuntimeError(f"{self.name}: the reading process failed: {value}")
        return kind, value

    def _death(self) -> DataError:
        """The error for a child that ended without answering."""
        try:
            code = self.proc.wait(timeout=STEP_SECONDS)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            code = self.proc.wait()
        if code == _OUT_OF_MEMORY:
            return DataError(
                f"{self.name}: reading it needs more than {CHILD_MEMORY >> 20} MiB, the cap "
                f"on the {self.library} library (a damaged file, or snapshots too large)"
            )
        if code == -signal.SIGXCPU:
            why = f"the {self.library} library spent over {STEP_SECONDS:.0f} s reading it"
        elif code < 0:
            sig = signal.Signals(-code).name if -code in signal.valid_signals() else -code
            why = f"the {self.library} library crashed reading it (signal {sig})"
        else:
            why = f"the reading process ended with status {code}"
        return DataError(f"{self.name}: damaged file: {why}")


class CappedSource(Source):
    """``reader(path, options)`` (a :class:`Source` class importable by its module and
    name) run in a capped child process; ``library`` names the native library in
    messages."""

    def __init__(
        self, reader: type[Source], path: Path, options: dict[str, str], library: str
    ) -> None:
        self.name = str(path)
        self.child = _Child(self.name, library)
        try:
            self._ask("open", f"{reader.__module__}:{reader.__qualname__}", (path, options))
        except BaseException:
            self.close()
            raise

    def hints(self) -> dict[str, Any]:
        return self._ask("hints")

    def mapped(self) -> dict[str, Any]:
        return self._ask("mapped")

    def n_snapshots_for(self, meta: RunMeta) -> int | None:
        return self._ask("n_snapshots_for", meta)

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        self.child.send("batches", meta, chunk)
        while True:
            kind, value = self._answer()
            if kind == "end":
                return
            yield value

    def close(self) -> None:
        self.child.close()

    def _ask(self, *request: Any) -> Any:
        self.child.send(*request)
        return self._answer()[1]

    def _answer(self) -> tuple[str, Any]:
        try:
            return self.child.answer()
        finally:
            self.__dict__.update(self.child.state)  # total, dtype, ... as the child has them


def _rebuilt(value: tuple[str, Any]) -> Exception:
    kind, args = value
    if kind == "metadata":
        return MetadataError(*args)
    return (DataError if kind == "data" else ArchiveError)(args)


# -- the child ------------------------------------------------------------------------------


def _budget() -> None:
    """Allow the child :data:`STEP_SECONDS` (and a margin) more CPU seconds from now."""
    import resource

    usage = resource.getrusage(resource.RUSAGE_SELF)
    soft = int(usage.ru_utime + usage.ru_stime + STEP_SECONDS + 10)
    resource.setrlimit(resource.RLIMIT_CPU, (soft, resource.RLIM_INFINITY))


def _state(source: Source | None) -> dict[str, Any]:
    return {} if source is None else {k: getattr(source, k) for k in _STATE}


def _resolve(reference: str) -> Any:
    import importlib

    module, name = reference.split(":")
    return getattr(importlib.import_module(module), name)


def _step(conn: Connection, source: Source | None, request: tuple[Any, ...]) -> Source | None:
    """Answer one request; return the source (opened by the request ``open``)."""
    what, *args = request
    if what == "open":  # the reader class, and its arguments
        source = _resolve(args[0])(*args[1])
        conn.send(("value", None, _state(source)))
        return source
    assert source is not None
    if what == "batches":
        for batch in source.batches(*args):
            conn.send(("batch", batch, _state(source)))
            _budget()
        conn.send(("end", None, _state(source)))
    else:  # hints, mapped, n_snapshots_for
        conn.send(("value", getattr(source, what)(*args), _state(source)))
    return source


def serve(fd: int) -> None:
    """The child: answer the requests that come on the socket ``fd`` until it closes."""
    conn = Connection(fd)
    source: Source | None = None
    while True:
        try:
            request = conn.recv()
        except (EOFError, OSError):
            break
        _budget()
        try:
            source = _step(conn, source, request)
        except MemoryError:
            os._exit(_OUT_OF_MEMORY)
        except MetadataError as exc:
            conn.send(("error", ("metadata", (exc.problems, exc.source)), _state(source)))
        except ArchiveError as exc:
            kind = "data" if isinstance(exc, DataError) else "archive"
            conn.send(("error", (kind, str(exc)), _state(source)))
        except Exception as exc:  # a defect of massarc: the parent reports an internal error
            last = traceback.format_exception_only(exc)[-1].strip()
            conn.send(("internal", last, _state(source)))
