"""Tokenise a buffer of complete text lines in one pass: the hot loop of the text formats.

:func:`scan_lines` classifies every line (data, blank, ``#`` comment), records the byte
range of the first ``lead`` tokens of a data line (the time, say; parsed by Python's
``float``, which rounds correctly) and parses every further token as a signed decimal
integer. Tokens are separated by blanks, or by commas when ``comma`` is set (CSV: an empty
field is an error). It stops at the first malformed token and says where.

One Python function, :func:`_scan_loop`, is the algorithm; with numba installed it is
compiled as it stands (``njit(cache=True)``), which makes ingestion run at hundreds of
MB/s. Without numba :func:`_scan_python` gives the same answer with Python's own string
methods (slower, but not a byte loop in Python).
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass
from functools import cache

import numpy as np

__all__ = [
    "BLANK",
    "COMMENT",
    "DATA",
    "ERR_EMPTY",
    "ERR_LEAD",
    "ERR_LONG",
    "ERR_NOT_INT",
    "HAVE_NUMBA",
    "Scanned",
    "scan_lines",
]

DATA, BLANK, COMMENT = 0, 1, 2
ERR_NOT_INT, ERR_LONG, ERR_EMPTY, ERR_LEAD = 1, 2, 3, 4
HAVE_NUMBA = importlib.util.find_spec("numba") is not None
#: Longest integer token parsed exactly in int64.
MAX_DIGITS = 18


@dataclass
class Scanned:
    """Per line of the buffer: ``kind``, byte ``start`` (``start[n]`` is the end),
    ``lead`` byte ranges ``(n, lead, 2)``, integer ``count`` and first index ``vstart``
    into ``values``. ``n`` lines were scanned; when ``err_code`` is set, line ``n`` is bad
    at byte ``err_pos``."""

    n: int
    kind: np.ndarray
    start: np.ndarray
    lead: np.ndarray
    count: np.ndarray
    vstart: np.ndarray
    values: np.ndarray
    err_code: int = 0
    err_pos: int = -1


def _scan_loop(buf, comma, lead, kind, start, lead_pos, count, vstart, values):  # type: ignore[no-untyped-def]
    n = len(buf)
    i = 0
    line = 0
    nv = 0
    while i < n:
        start[line] = i
        j = i
        while j < n and (buf[j] == 32 or buf[j] == 9 or buf[j] == 13):
            j += 1
        if j >= n or buf[j] == 10:
            kind[line] = 1
            i = j + 1
            line += 1
            continue
        if buf[j] == 35:
            kind[line] = 2
            while j < n and buf[j] != 10:
                j += 1
            i = j + 1
            line += 1
            continue
        kind[line] = 0
        vstart[line] = nv
        k = 0
        c = 0
        while True:
            s = j
            if comma:
                while j < n and buf[j] != 44 and buf[j] != 10:
                    j += 1
                e = j
                while e > s and (buf[e - 1] == 32 or buf[e - 1] == 9 or buf[e - 1] == 13):
                    e -= 1
            else:
                while j < n and buf[j] != 32 and buf[j] != 9 and buf[j] != 13 and buf[j] != 10:
                    j += 1
                e = j
            if e == s:
                return line, vstart[line], 3, s
            if k < lead:
                lead_pos[line, k, 0] = s
                lead_pos[line, k, 1] = e
            else:
                p = s
                neg = buf[p] == 45
                if neg:
                    p += 1
                if p == e:
                    return line, vstart[line], 1, s
                if e - p > 18:
                    return line, vstart[line], 2, s
                v = 0
                for q in range(p, e):
                    d = buf[q] - 48
                    if d < 0 or d > 9:
                        return line, vstart[line], 1, s
                    v = v * 10 + d
                values[nv] = -v if neg else v
                nv += 1
                c += 1
            k += 1
            if comma:
                if j < n and buf[j] == 44:
                    j += 1
                    while j < n and (buf[j] == 32 or buf[j] == 9 or buf[j] == 13):
                        j += 1
                    continue
                break
            while j < n and (buf[j] == 32 or buf[j] == 9 or buf[j] == 13):
                j += 1
            if j >= n or buf[j] == 10:
                break
        if k < lead:
            return line, vstart[line], 4, s
        count[line] = c
        i = j + 1
        line += 1
    start[line] = n
    return line, nv, 0, -1


@cache
def _compiled():  # type: ignore[no-untyped-def]
    import numba

    return numba.njit(cache=True, nogil=True)(_scan_loop)


def _alloc(buf: bytes, lead: int) -> tuple[np.ndarray, ...]:
    lines = buf.count(b"\n") + 1
    return (
        np.zeros(lines, np.int8),
        np.zeros(lines + 1, np.int64),
        np.zeros((lines, max(lead, 1), 2), np.int64),
        np.zeros(lines, np.int64),
        np.zeros(lines, np.int64),
        np.zeros(len(buf) // 2 + 2, np.int64),
    )


def _is_int(tok: bytes) -> bool:
    body = tok[1:] if tok[:1] == b"-" else tok
    return body.isdigit()


def _short(ints: list[bytes]) -> bool:
    """Every integer token has at most MAX_DIGITS digits."""
    return max(map(len, ints)) <= MAX_DIGITS or all(len(t.lstrip(b"-")) <= MAX_DIGITS for t in ints)


def _fields(text: bytes, base: int, comma: bool) -> list[tuple[int, bytes]]:
    """(byte offset, token) of every token of a data line (the slow, exact path)."""
    out = []
    if comma:
        cursor = base
        for raw in text.split(b","):
            lo = len(raw) - len(raw.lstrip(b" \t\r"))
            out.append((cursor + lo, raw.strip(b" \t\r")))
            cursor += len(raw) + 1
        return out
    i, n = 0, len(text)
    while i < n:
        while i < n and text[i] in b" \t\r":
            i += 1
        j = i
        while j < n and text[j] not in b" \t\r":
            j += 1
        if j > i:
            out.append((base + i, text[i:j]))
        i = j
    return out


def _bad_field(fields: list[tuple[int, bytes]], lead: int) -> tuple[int, int]:
    for k, (at, tok) in enumerate(fields):
        if not tok:
            return ERR_EMPTY, at
        if k >= lead and not _is_int(tok):
            return ERR_NOT_INT, at
        if k >= lead and len(tok.lstrip(b"-")) > MAX_DIGITS:
            return ERR_LONG, at
    return ERR_LEAD, fields[-1][0] if fields else 0


def _scan_python(buf: bytes, comma: bool, lead: int) -> Scanned:
    kind, start, lead_pos, count, vstart, values = _alloc(buf, lead)
    pos = 0
    vals: list[int] = []
    lines = buf.split(b"\n")
    if lines and lines[-1] == b"":
        lines.pop()
    for line, text in enumerate(lines):
        start[line] = pos
        first = text.lstrip(b" \t\r")[:1]
        if not first:
            kind[line] = BLANK
        elif first == b"#":
            kind[line] = COMMENT
        else:
            kind[line] = DATA
            vstart[line] = len(vals)
            toks = [t.strip(b" \t\r") for t in text.split(b",")] if comma else text.split()
            ints = toks[lead:]
            joined = b"".join(ints)
            ok = (
                len(toks) >= lead
                and all(toks[:lead])
                and (
                    not joined or joined.isdigit()
                    if b"-" not in joined
                    else all(map(_is_int, ints))
                )
                and (not ints or (min(map(len, ints)) > 0 and _short(ints)))
            )
            if not ok:
                code, at = _bad_field(_fields(text, pos, comma), lead)
                return _done(kind, start, lead_pos, count, vstart, values, vals, line, code, at)
            cursor = 0
            for k in range(lead):
                at = text.index(toks[k], cursor)
                lead_pos[line, k] = (pos + at, pos + at + len(toks[k]))
                cursor = at + len(toks[k])
            vals.extend(map(int, ints))
            count[line] = len(ints)
        pos += len(text) + 1
    n = len(lines)
    start[n] = len(buf)
    return _done(kind, start, lead_pos, count, vstart, values, vals, n, 0, -1)


def _done(kind, start, lead_pos, count, vstart, values, vals, n, code, pos) -> Scanned:  # type: ignore[no-untyped-def]
    nv = int(vstart[n]) if code else len(vals)
    values[:nv] = vals[:nv]
    return Scanned(n, kind, start, lead_pos, count, vstart, values[:nv], code, pos)


def scan_lines(
    buf: bytes, *, comma: bool = False, lead: int = 1, compiled: bool | None = None
) -> Scanned:
    """Scan ``buf``, which must end with a newline (or be empty).

    ``compiled``: force the numba loop (True) or the Python one (False); default numba
    when installed.

    >>> s = scan_lines(b"0.5 3 0 1\\n# note\\n")
    >>> s.n, s.kind.tolist(), s.values.tolist()
    (2, [0, 2], [3, 0, 1])
    """
    use = HAVE_NUMBA if compiled is None else compiled
    if not use:
        return _scan_python(buf, comma, lead)
    kind, start, lead_pos, count, vstart, values = _alloc(buf, lead)
    arr = np.frombuffer(buf, np.uint8)
    n, nv, code, pos = _compiled()(arr, comma, lead, kind, start, lead_pos, count, vstart, values)
    return Scanned(
        int(n), kind, start, lead_pos, count, vstart, values[: int(nv)], int(code), int(pos)
    )
