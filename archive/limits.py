"""Caps that keep a hostile or broken archive from exhausting memory before anything is
decoded. Each has a default and an environment variable that overrides it (documented in
the README, section "Limits"):

* ``MASSARC_MAX_RATIO`` (default 65536): the largest ratio of decoded to stored bytes a
  run may declare. zstd stores a block of 128 KiB of one repeated byte in 4 bytes (32768:1,
  its best case: RLE blocks, from the zstd format specification, RFC 8878, from memory);
  deflate cannot beat about 1032:1 and Blosc adds a header per block, so no honest chunk
  of the allowed codecs comes near 65536:1.
* ``MASSARC_MAX_CHUNK_BYTES`` (default 256 MiB): the largest decoded size of one chunk.
  FORMAT.md asks writers for 1 to 8 MiB, or one snapshot when a lattice is larger: 256 MiB
  is a 2D lattice of 8192 x 8192 sites of uint32.
"""

from __future__ import annotations

import math
import os
import stat
from pathlib import Path

__all__ = [
    "extent_problem",
    "local_problem",
    "max_chunk_bytes",
    "max_ratio",
    "needs_listing",
    "stored_size",
]

_RATIO_DEFAULT = 1 << 16
_CHUNK_DEFAULT = 256 << 20
#: Below this many declared bytes no store listing is needed to accept a run.
_SMALL = 64 << 20


def _env_int(name: str, default: int) -> int:
    raw = os.environ.get(name)
    if raw is None:
        return default
    try:
        value = int(raw)
    except ValueError:
        value = 0
    if value < 1:
        from .errors import ArchiveError

        raise ArchiveError(f"environment variable {name}: expected a positive integer; got {raw!r}")
    return value


def max_ratio() -> int:
    """Largest decoded/stored ratio a run may declare (``MASSARC_MAX_RATIO``)."""
    return _env_int("MASSARC_MAX_RATIO", _RATIO_DEFAULT)


def max_chunk_bytes() -> int:
    """Largest decoded size of one chunk, in bytes (``MASSARC_MAX_CHUNK_BYTES``)."""
    return _env_int("MASSARC_MAX_CHUNK_BYTES", _CHUNK_DEFAULT)


def stored_size(root: Path, enough: int) -> int:
    """Bytes of the regular files below ``root`` (links are neither followed nor counted),
    summed until ``enough`` is reached."""
    total = 0
    todo = [root]
    while todo:
        try:
            entries = list(os.scandir(todo.pop()))
        except OSError:
            continue
        for entry in entries:
            if entry.is_dir(follow_symlinks=False):
                todo.append(Path(entry.path))
            elif entry.is_file(follow_symlinks=False):
                total += entry.stat(follow_symlinks=False).st_size
                if total >= enough:
                    return total
    return total


def extent_problem(
    replicas: int, snapshots: int, lattice: tuple[int, ...], itemsize: int, stored: int
) -> str | None:
    """Why a committed extent cannot be real: more decoded bytes than ``stored`` bytes
    could hold at :func:`max_ratio`; None when it can.

    >>> extent_problem(4, 1000, (64,), 2, 40_000) is None
    True
    >>> extent_problem(3, 10**15, (16,), 2, 3000)[:60]
    'a run cannot declare more snapshots than its chunks could co'
    """
    declared = replicas * snapshots * math.prod(lattice) * itemsize
    ratio = max_ratio()
    if declared <= stored * ratio:
        return None
    per_snapshot = max(1, replicas * math.prod(lattice) * itemsize)
    most = stored * ratio // per_snapshot
    return (
        "a run cannot declare more snapshots than its chunks could contain at the maximum "
        f"compression ratio ({ratio}:1): expected at most {most} snapshots of every "
        f"replica in {stored} stored bytes; got {declared:.3g} decoded bytes declared"
    )


def needs_listing(declared: int) -> bool:
    """True when a declared size is large enough to be checked against the store."""
    return declared > _SMALL


def _kind(mode: int) -> str:
    if stat.S_ISFIFO(mode):
        return "a FIFO"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def local_problem(root: Path) -> str | None:
    """The first file below the run directory ``root`` that massarc will not read, with
    why: a symbolic link leading out of the run, anything but a regular file or a
    directory (a FIFO would hang a reader, a device never ends), or a file larger than any
    chunk can be (a sparse file of 5 GB, say). None when every file is plain."""
    top = Path(os.path.realpath(root))
    cap = max_chunk_bytes() + (1 << 20)
    todo = [Path(root)]
    while todo:
        here = todo.pop()
        try:
            entries = sorted(os.scandir(here), key=lambda e: e.name)
        except OSError:
            continue
        for entry in entries:
            rel = Path(entry.path).relative_to(root).as_posix()
            try:
                if entry.is_symlink():
                    target = Path(os.path.realpath(entry.path))
                    if top != target and top not in target.parents:
                        return (
                            f"{rel}: a symbolic link to {str(target)[:200]}, outside the run; "
                            "expected a file of the run"
                        )
                    st = os.stat(entry.path)
                else:
                    st = entry.stat(follow_symlinks=False)
            except FileNotFoundError as exc:
                if not entry.is_symlink():
                    continue  # gone since listed: a writer's temporary file, renamed or removed
                return f"{rel}: cannot be examined ({exc.strerror})"
            except OSError as exc:
                return f"{rel}: cannot be examined ({exc.strerror})"
            if stat.S_ISDIR(st.st_mode):
                if not entry.is_symlink():
                    todo.append(Path(entry.path))
                continue
            if not stat.S_ISREG(st.st_mode):
                return f"{rel}: {_kind(st.st_mode)}, not a regular file"
            if st.st_size > cap:
                return (
                    f"{rel}: {st.st_size} bytes; expected at most {cap} for a file of a run "
                    "(MASSARC_MAX_CHUNK_BYTES)"
                )
    return None
