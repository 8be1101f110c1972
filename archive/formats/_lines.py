"""Line-oriented inputs: complete lines in batches, and the replica/comment structure the
text formats share.

:class:`LineReader` reads a file or a pipe in large batches of *complete* lines; on a
pipe (``live``) it reports whether more input is immediately available, so a live
importer can commit whenever the producer is idle. A final line without a newline is
handed over as a line for files, and kept back (``partial``) for live input: a producer
killed mid-line must not leave half a snapshot in the archive. Input counts as idle when
nothing more arrives within ``grace`` seconds (50 ms), so that a producer printing
steadily is not interrupted by a commit after every pipe buffer.

:class:`LineParser` turns batches into :class:`Rows` of one replica each. Its grammar:
``#`` starts a comment; ``# massarc-meta: {json}`` (before the first data line) carries
the metadata; ``# replica N`` starts replica N, and so does the first data line after one
or more blank lines. Replicas come in order.
"""

from __future__ import annotations

import os
import re
import select
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any, BinaryIO

import numpy as np

from massarc.schema import MetadataError, load_json

from ..errors import DataError
from ._scan import DATA, ERR_EMPTY, ERR_LEAD, ERR_LONG, scan_lines

__all__ = [
    "META_PREFIX",
    "MISSING_PREFIX",
    "LineParser",
    "LineReader",
    "Rows",
    "magic_of",
    "meta_line",
    "read_preamble",
    "shown",
]

META_PREFIX = "# massarc-meta:"
#: Starts the line an export with ``--allow-missing`` writes in place of snapshots it could
#: not read (see ``_export``); a file holding one is refused on import.
MISSING_PREFIX = "# massarc-missing:"
_REPLICA = re.compile(rb"^\s*#\s*replica\s+(\S+)\s*$")
_MAGIC = re.compile(rb"^#\s*(massarc-[a-z]+)(?:\s+(\S+))?\s*$")
BATCH_BYTES = 1 << 20


#: Longest token quoted whole in a message; a longer one is cut and its length given.
SHOWN_CHARS = 40
#: The UTF-8 encoding of U+FEFF, the byte-order mark some editors put first.
BOM = b"\xef\xbb\xbf"


def shown(token: str) -> str:
    """``token`` quoted for a message, cut to :data:`SHOWN_CHARS` characters.

    >>> shown("12x")
    "'12x'"
    >>> shown("9" * 100)
    "'9999999999...' (100 characters)"
    """
    if len(token) <= SHOWN_CHARS:
        return repr(token)
    return f"{token[:10]!r}"[:-1] + f"...' ({len(token)} characters)"


def magic_of(head: bytes) -> str | None:
    """``massarc-text`` etc. when the first line is a massarc format line, else None."""
    first = head.split(b"\n", 1)[0].strip()
    m = _MAGIC.match(first)
    return m.group(1).decode() if m and m.group(1) != b"massarc-meta" else None


class LineReader:
    """Batches ``(buffer of complete lines, number of its first line, idle)``."""

    def __init__(
        self,
        stream: BinaryIO | int,
        name: str,
        *,
        live: bool = False,
        batch: int = BATCH_BYTES,
        grace: float = 0.05,
    ) -> None:
        self.stream = stream
        self.name = name
        self.live = live
        self.batch = batch
        self.fd = stream if isinstance(stream, int) else None
        if live and self.fd is None:
            self.fd = stream.fileno()  # type: ignore[union-attr]
        self.bytes_done = 0
        self.partial: bytes = b""
        self.line = 1  # number of the next line (set it when the stream starts mid-file)
        self.grace = grace
        self._eof = False

    def _ready(self, timeout: float) -> bool:
        ready, _, _ = select.select([self.fd], [], [], timeout)
        return bool(ready)

    def _read(self) -> bytes:
        if self.fd is None or not self.live:
            return self.stream.read(self.batch)  # type: ignore[union-attr]
        if self._eof:
            return b""
        parts = [os.read(self.fd, self.batch)]
        size = len(parts[0])
        # a pipe hands over at most its buffer per read: gather what is already there
        while size and size < self.batch and self._ready(0):
            more = os.read(self.fd, self.batch - size)
            if not more:
                self._eof = True
                break
            parts.append(more)
            size += len(more)
        return b"".join(parts)

    def _idle(self) -> bool:
        """No further input within ``grace`` seconds (live input only)."""
        if not self.live or self.fd is None or self._eof:
            return False
        return not self._ready(self.grace)

    def __iter__(self) -> Iterator[tuple[bytes, int, bool]]:
        carry = b""
        while True:
            data = self._read()
            if not data:
                break
            self.bytes_done += len(data)
            data = carry + data if carry else data
            cut = data.rfind(b"\n") + 1
            carry = data[cut:]
            idle = self._idle()
            if cut or idle:
                buf = data[:cut]
                first = self.line
                self.line += buf.count(b"\n")
                yield buf, first, idle
        if carry:
            if self.live:
                self.partial = carry
            else:
                first = self.line
                self.line += 1
                yield carry + b"\n", first, False


def read_preamble(path: str | os.PathLike[str], name: str) -> dict[str, Any]:
    """The ``# massarc-meta:`` metadata of a text file (read up to its first data line)."""
    with open(path, "rb") as f:
        for number, raw in enumerate(f, start=1):
            text = raw.strip()
            if not text:
                continue
            if not text.startswith(b"#"):
                break
            meta = meta_line(text, name, number)
            if meta is not None:
                return meta
    return {}


def meta_line(text: bytes, name: str, line: int) -> dict[str, Any] | None:
    """The metadata of a ``# massarc-meta: {json}`` line (stripped), else None."""
    decoded = text.decode("utf-8", errors="replace")
    if not decoded.startswith(META_PREFIX):
        return None
    try:
        data = load_json(decoded[len(META_PREFIX) :])
    except ValueError as exc:
        raise MetadataError(
            [f"expected JSON after '{META_PREFIX}'; got invalid JSON ({exc})"],
            f"{name}: line {line}",
        ) from None
    if not isinstance(data, dict):
        raise MetadataError(["expected a JSON object"], f"{name}: line {line}")
    return data


@dataclass(frozen=True)
class Rows:
    """Consecutive data lines of one replica: the lead tokens (as floats), the integers
    (``values[offsets[i] : offsets[i] + counts[i]]`` for row i), line numbers, and the index
    of the first row within its replica."""

    replica: int
    lead: np.ndarray
    values: np.ndarray
    counts: np.ndarray
    offsets: np.ndarray
    lines: np.ndarray
    first: int


class LineParser:
    """Stateful parser of the shared line grammar (see the module docstring).

    ``lead`` tokens start every data line (parsed as floats, named ``lead_names`` in
    messages); the rest are integers called ``value_name``; ``site_of`` tells whether
    integer ``k`` of a line is site ``k`` (True for masses) for messages.
    """

    def __init__(
        self,
        name: str,
        magic: str,
        *,
        lead: int = 1,
        comma: bool = False,
        lead_names: tuple[str, ...] = ("time",),
        value_name: str = "mass",
        site_of: bool = True,
        replicas: bool = True,
        columns: tuple[str, ...] = (),
    ) -> None:
        self.name = name
        self.magic = magic
        self.lead = lead
        self.comma = comma
        self.lead_names = lead_names
        self.value_name = value_name
        self.site_of = site_of
        self.replicas = replicas
        self.columns = columns
        self.meta: dict[str, Any] | None = None
        self.replica = 0
        self.rows_in_replica = 0
        self.pending: int | str | None = None
        self.seen_data = False
        self.comments: list[tuple[int, bytes]] = []

    def _where(self, line: int) -> str:
        return f"{self.name}: line {line}: "

    def _comment(self, text: bytes, line: int) -> None:
        text = text.strip()
        m = _REPLICA.match(text) if self.replicas else None
        if m:
            try:
                self.pending = int(m.group(1))
            except ValueError:
                raise DataError(
                    f"{self._where(line)}expected '# replica N' with an integer N; "
                    f"got {shown(text.decode(errors='replace'))}"
                ) from None
            return
        if text.startswith(MISSING_PREFIX.encode()):
            marked = text[len(MISSING_PREFIX) :].decode(errors="replace").split(":")[0]
            raise DataError(
                f"{self._where(line)}this file marks snapshots as missing "
                f"({marked.strip()[:80]}); "
                "an archive holds only whole runs, so it cannot be imported"
            )
        meta = meta_line(text, self.name, line)
        if meta is not None:
            if self.seen_data:
                raise DataError(
                    f"{self._where(line)}expected the massarc-meta line before the "
                    "first snapshot; got it after"
                )
            self.meta = meta
            return
        self.comments.append((line, text))

    def _start_run(self, line: int) -> None:
        pending, self.pending = self.pending, None
        if pending is not None and self.rows_in_replica:
            self.replica += 1
            self.rows_in_replica = 0
        if isinstance(pending, int):
            if not self.seen_data:
                self.replica = pending
            elif pending != self.replica:
                raise DataError(
                    f"{self._where(line)}expected '# replica {self.replica}' (replicas in "
                    f"order); got '# replica {pending}'"
                )
        self.seen_data = True

    def parse(self, buf: bytes, first_line: int) -> list[Rows]:
        """Rows of the complete lines in ``buf`` (which starts at line ``first_line``)."""
        if first_line == 1 and buf.startswith(BOM):
            raise DataError(
                f"{self._where(1)}starts with a byte-order mark (U+FEFF); expected text "
                "without one (save the file as UTF-8 without BOM)"
            )
        sc = scan_lines(buf, comma=self.comma, lead=self.lead)
        out: list[Rows] = []
        kinds = sc.kind[: sc.n]
        special = [*np.flatnonzero(kinds != DATA).tolist(), sc.n]
        pos = 0
        for i in special:
            if i > pos:
                self._start_run(first_line + pos)
                out.append(self._rows(buf, sc, pos, i, first_line))
            if i < sc.n:
                if kinds[i] == 1:
                    if self.seen_data and self.pending is None and self.replicas:
                        self.pending = "blank"
                else:
                    self._comment(buf[sc.start[i] : sc.start[i + 1]], first_line + i)
            pos = i + 1
        if sc.err_code:
            self._error(buf, sc, first_line)
        return out

    def _rows(self, buf: bytes, sc: Any, a: int, b: int, first_line: int) -> Rows:
        lead = np.empty((b - a, self.lead), np.float64)
        spans = sc.lead[a:b]
        for k in range(self.lead):
            try:
                lead[:, k] = [float(buf[s:e]) for s, e in spans[:, k].tolist()]
            except ValueError:
                for row, (s, e) in enumerate(spans[:, k].tolist()):
                    try:
                        float(buf[s:e])
                    except ValueError:
                        tok = buf[s:e].decode(errors="replace")
                        raise DataError(
                            f"{self._where(first_line + a + row)}expected a number for the "
                            f"{self.lead_names[k]}; got {shown(tok)}"
                        ) from None
        counts = sc.count[a:b].copy()
        offsets = sc.vstart[a:b].copy()
        lo = int(offsets[0])
        hi = int(offsets[-1] + counts[-1])
        rows = Rows(
            self.replica,
            lead,
            sc.values[lo:hi],
            counts,
            offsets - lo,
            np.arange(first_line + a, first_line + b),
            self.rows_in_replica,
        )
        self.rows_in_replica += b - a
        return rows

    def _error(self, buf: bytes, sc: Any, first_line: int) -> None:
        line = first_line + sc.n
        start, pos = int(sc.start[sc.n]), sc.err_pos
        head = buf[start:pos]
        k = head.count(b",") if self.comma else len(head.split())
        seps = b",\n" if self.comma else b" \t\r\n"
        stop = pos
        while stop < len(buf) and buf[stop] not in seps:
            stop += 1
        tok = buf[pos:stop].strip().decode(errors="replace")
        if sc.err_code == ERR_LEAD or k < self.lead:
            want = " then ".join(self.lead_names)
            raise DataError(f"{self._where(line)}expected the {want} first; got too few fields")
        if sc.err_code == ERR_EMPTY:
            raise DataError(f"{self._where(line)}field {k + 1} is empty; expected a value")
        too_long = " (too many digits)" if sc.err_code == ERR_LONG else ""
        if k - self.lead < len(self.columns):  # a named column (CSV): name it
            raise DataError(
                f"{self._where(line)}column {self.columns[k - self.lead]}: expected a "
                f"non-negative integer{too_long}; got {shown(tok)}"
            )
        self._start_run(line)
        site = f", site {k - self.lead}" if self.site_of else ""
        what = f"replica {self.replica}, snapshot {self.rows_in_replica}{site}: "
        raise DataError(
            f"{self._where(line)}{what}expected a non-negative integer {self.value_name}"
            f"{too_long}; got {shown(tok)}"
        )
