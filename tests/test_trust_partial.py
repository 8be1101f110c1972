"""Issue 11, defect 12: a partial archive (its writer stopped) declares the seeds of every
replica it was going to write; ``schema`` gives the incomplete-run warning, not a seeds
mismatch. A complete run, or a partial one with more replicas than seeds, still fails."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from conftest import make_meta, multinomial_run

from massarc.archive import create_run
from massarc.validators import audit


def _partial(path: Path, seeds: list[int], finished: int) -> Path:
    """Replicas written one after another; the writer stops inside replica ``finished``."""
    meta = make_meta(sites=(16,))
    meta = meta.model_copy(update={"run": meta.run.model_copy(update={"seeds": seeds})})
    data = multinomial_run(3, 30, (16,), 40)
    times = np.arange(30, dtype=np.float64)
    w = create_run(path, meta, snapshots_hint=10)
    for r in range(finished):
        w.append(times, data[r], replica=r)
        w.flush()
    w.append(times[:12], data[finished, :12], replica=finished)
    w.flush()  # no close: the writer "died" here
    return path


def _schema(path: Path):
    return audit([path], checks=["schema"]).runs[0].checks[0]


def test_partial_archive_warns_instead_of_failing_on_seeds(tmp_path: Path) -> None:
    res = _schema(_partial(tmp_path / "run.zarr", [11, 12, 13], finished=1))
    assert res.status == "warn", res.message
    assert "archive incomplete" in res.message and "replica 1 partly written" in res.message


def test_partial_archive_with_too_few_seeds_still_fails(tmp_path: Path) -> None:
    res = _schema(_partial(tmp_path / "run.zarr", [11], finished=2))
    assert res.status == "fail"
    assert "run.seeds: expected at least 2 seeds (one per committed replica); got 1" in res.message
