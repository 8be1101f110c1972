"""Run builders for the audit tests (scan, checks, reports, configuration, CLI).

Runs are written with the archive writer from small multinomial data (exactly ``mass``
per snapshot); ``edit`` plants a fault in the array before it is written.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any, ClassVar

import numpy as np
from conftest import make_meta, multinomial_run

from massarc.archive import create_run
from massarc.schema import RunMeta
from massarc.validators import Check, CheckContext

__all__ = ["RaisingCheck", "chunk_file", "write_run", "write_text_stream"]


class RaisingCheck(Check):
    """A third-party check with a bug: it raises on every run (register it in a fresh
    registry: ``monkeypatch.setattr(registry, "CHECKS", registry.CHECKS.fresh())``)."""

    id = "test-raises"
    description = "a third-party check with a bug"
    needs: ClassVar = {"snapshots": {}}

    def run(self, ctx: CheckContext):
        raise ZeroDivisionError("division by zero in the plugin")


def write_run(
    path: Path | str,
    *,
    replicas: int = 3,
    snapshots: int = 60,
    sites: tuple[int, ...] = (16,),
    mass: int = 40,
    seed: int = 0,
    chunk: int = 10,
    dtype: Any = None,
    strict: bool = True,
    edit: Callable[[np.ndarray, np.ndarray], None] | None = None,
    meta: RunMeta | None = None,
    close: bool = True,
    **series: np.ndarray,
) -> Path:
    """Write a run of ``replicas`` x ``snapshots`` with chunks of ``chunk`` snapshots.

    ``edit(mass, times)`` may change the arrays in place first (a planted fault).
    """
    data = multinomial_run(replicas, snapshots, sites, mass, seed)
    times = np.arange(snapshots, dtype=np.float64) * 0.5
    if dtype is not None:
        data = data.astype(dtype)
    if edit is not None:
        edit(data, times)
    meta = meta or make_meta(sites=sites)
    w = create_run(path, meta, dtype=dtype, snapshots_hint=chunk, strict=strict)
    w.append(times, data, **series)
    if close:
        w.close()
    else:
        w.flush()
    return Path(path)


def chunk_file(run: Path, replica: int, k: int) -> Path:
    """The file of chunk ``k`` (along time) of ``replica`` in a 1D or 2D run."""
    files = sorted((run / "mass" / "c" / str(replica) / str(k)).rglob("*"))
    return next(f for f in files if f.is_file())


def write_text_stream(path: Path, mass: np.ndarray, times: np.ndarray) -> None:
    """The plain-text format (docs/formats.md) of ``mass`` ``(replica, time, site)``: a
    ``# replica N`` line, then one line per snapshot: the time, then the masses."""
    lines = ["# massarc-text 1\n"]
    for r in range(len(mass)):
        lines.append(f"# replica {r}\n")
        lines += [
            f"{t!r} " + " ".join(map(str, row)) + "\n"
            for t, row in zip(times.tolist(), mass[r].tolist(), strict=True)
        ]
    path.write_text("".join(lines))
