"""The audit stamp: a small JSON document inside a run recording who checked it, how, with
what verdict, and the content digest of what was checked (FORMAT.md, section 10).

The stamp is the file :data:`~massarc.schema.spec.STAMP` at the root of the run's
directory: not a Zarr node, so Zarr libraries ignore it, and writing it touches neither the
run's header nor its arrays. It is written atomically (a temporary file in the run, fsync,
rename over the old stamp, fsync of the directory), so a reader finds the old stamp, the
new one, or none, never a part. Only a complete run in a local directory can be stamped:
an incomplete run may still grow, and a zip store or a remote store cannot be replaced
atomically.

>>> from massarc.archive import open_run
>>> run = open_run("tests/fixtures/stamp/ring-stamped.zarr")
>>> verdict = verify_stamp(run)
>>> verdict.matches, verdict.differing
(True, [])
"""

from __future__ import annotations

import json
import math
import os
import secrets
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from zarr.storage import LocalStore

from massarc.schema.spec import (
    DIGEST_ALGORITHM,
    DIGEST_VERSION,
    STAMP,
    STAMP_KIND,
    STAMP_VERSION,
    parse_version,
)
from massarc.schema.version import __version__

from .digest import Digest, content_digest
from .errors import ArchiveError, ChunkError
from .reader import Run

__all__ = [
    "Verdict",
    "read_stamp",
    "stamp_document",
    "stamp_problem",
    "verify_stamp",
    "write_stamp",
]

#: Largest stamp file read (a stamp of every check of a run is a few KB).
_MAX_STAMP_BYTES = 1 << 20


def _root(run: Run) -> Path | None:
    store = run.group.store_path.store
    if not isinstance(store, LocalStore):
        return None
    path = run.group.store_path.path
    return Path(store.root) / path if path else Path(store.root)


def stamp_problem(run: Run) -> str | None:
    """Why ``run`` cannot be stamped, or None: it must be a readable, complete run in a
    local directory."""
    if _root(run) is None:
        return "a stamp is written only into a run in a local directory (not a zip or URL)"
    if run.meta is None or run.problems:
        return f"the header is not valid ({'; '.join(run.problems)[:200]})"
    if run.unreadable:
        return "; ".join(run.unreadable.values())[:300]
    if not run.complete:
        return "the run is incomplete (state.complete is false): a writer may still append"
    return None


def _finite(value: Any) -> Any:
    """``value`` with non-finite floats as None (JSON has no NaN)."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def stamp_document(digest: Digest, audit: dict[str, Any]) -> dict[str, Any]:
    """The stamp of one run: ``audit`` (status, strict, config, checks with their options
    and where each came from) with the massarc version, the time and the digest."""
    return _finite(
        {
            "format": STAMP_KIND,
            "format_version": STAMP_VERSION,
            "massarc_version": __version__,
            "created": datetime.now(UTC).isoformat(timespec="seconds"),
            "digest": {
                "algorithm": digest.algorithm,
                "version": digest.version,
                "value": digest.value,
                "parts": dict(digest.parts),
            },
            "audit": audit,
        }
    )


def _fsync_dir(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def write_stamp(run: Run, document: dict[str, Any]) -> Path:
    """Write ``document`` as the stamp of ``run``, atomically; return its path.

    Raises :class:`ArchiveError` when the run cannot be stamped (see :func:`stamp_problem`)
    or the file system refuses (a read-only run): the old stamp, if any, is left as it was.
    """
    problem = stamp_problem(run)
    if problem is not None:
        raise ArchiveError(f"{run.name}: cannot stamp: {problem}")
    root = _root(run)
    assert root is not None  # stamp_problem refuses other stores
    data = (json.dumps(document, indent=1, sort_keys=True, allow_nan=False) + "\n").encode()
    final, tmp = root / STAMP, root / f".{STAMP}.tmp-{secrets.token_hex(6)}"
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
    except OSError as exc:
        raise ArchiveError(
            f"{run.name}: cannot write the stamp ({exc.strerror}): stamping needs a writable "
            "run directory; the run is unchanged"
        ) from None
    try:
        try:
            f = os.fdopen(fd, "wb")
        except BaseException:
            os.close(fd)
            raise
        with f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, final)
        _fsync_dir(root)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise ArchiveError(
            f"{run.name}: cannot write the stamp ({exc.strerror}); the previous stamp, if "
            "any, is unchanged"
        ) from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return final


def read_stamp(run: Run) -> dict[str, Any]:
    """The stamp of ``run``; :class:`ArchiveError` when there is none or it is not a stamp
    this massarc reads (naming the file and the field)."""
    root = _root(run)
    if root is None:
        raise ArchiveError(f"{run.name}: no stamp (stamps live in local run directories)")
    path = root / STAMP
    if path.is_symlink() or (path.exists() and not path.is_file()):
        raise ArchiveError(f"{path}: expected a regular file; got a link or a special file")
    try:
        with path.open("rb") as f:
            raw = f.read(_MAX_STAMP_BYTES + 1)
    except FileNotFoundError:
        raise ArchiveError(
            f"{run.name}: no stamp ({STAMP}); stamp it with massarc check --stamp"
        ) from None
    except OSError as exc:
        raise ArchiveError(f"{path}: cannot read ({exc.strerror})") from None
    if len(raw) > _MAX_STAMP_BYTES:
        raise ArchiveError(f"{path}: larger than {_MAX_STAMP_BYTES} bytes; not a stamp")
    try:
        doc = json.loads(raw)
    except (ValueError, RecursionError) as exc:
        raise ArchiveError(f"{path}: not JSON ({' '.join(str(exc).split())[:200]})") from None
    _check_stamp(doc, path)
    return doc


def _check_stamp(doc: Any, path: Path) -> None:
    if not isinstance(doc, dict) or doc.get("format") != STAMP_KIND:
        got = doc.get("format") if isinstance(doc, dict) else type(doc).__name__
        raise ArchiveError(f'{path}: format: expected "{STAMP_KIND}"; got {got!r}'[:300])
    try:
        major, _ = parse_version(doc.get("format_version"))
    except ValueError as exc:
        raise ArchiveError(f"{path}: {exc}"[:300]) from None
    if major != parse_version(STAMP_VERSION)[0]:
        raise ArchiveError(f"{path}: format_version: expected {STAMP_VERSION}; got {major}.x")
    d = doc.get("digest")
    if not isinstance(d, dict) or not isinstance(d.get("value"), str):
        raise ArchiveError(f"{path}: digest.value: expected a hex string")
    if d.get("algorithm") != DIGEST_ALGORITHM or d.get("version") != DIGEST_VERSION:
        raise ArchiveError(
            f"{path}: digest: expected algorithm {DIGEST_ALGORITHM!r} version {DIGEST_VERSION}; "
            f"got {d.get('algorithm')!r} version {d.get('version')!r}"[:300]
        )
    if not isinstance(d.get("parts", {}), dict):
        raise ArchiveError(f"{path}: digest.parts: expected a table")


@dataclass(frozen=True)
class Verdict:
    """Whether a run still matches its stamp. ``differing`` names the parts that changed
    (``metadata``, an array name) or, when the data can no longer be read, the reason."""

    run: str
    matches: bool
    stamped: str
    now: str | None
    differing: list[str]
    stamp: dict[str, Any]


def verify_stamp(run: Run) -> Verdict:
    """Recompute the digest of ``run`` and compare it with its stamp.

    Raises :class:`ArchiveError` when there is no readable stamp. A chunk that is missing
    or corrupt now is a mismatch (the run is no longer what was stamped), named in
    ``differing``.
    """
    stamp = read_stamp(run)
    stamped = stamp["digest"]
    try:
        now = content_digest(run)
    except ChunkError as exc:
        return Verdict(run.name, False, stamped["value"], None, [str(exc)], stamp)
    except ArchiveError as exc:
        if run.meta is None:
            raise
        return Verdict(run.name, False, stamped["value"], None, [str(exc)], stamp)
    if now.value == stamped["value"]:
        return Verdict(run.name, True, stamped["value"], now.value, [], stamp)
    differing = now.differing(stamped.get("parts") or {}) or ["(the stream as a whole)"]
    return Verdict(run.name, False, stamped["value"], now.value, differing, stamp)
