"""The massarc archive itself as a format, so that ``convert run.zarr out.txt`` exports and
``convert a.zarr b.zarr --set ...`` re-encodes (with new metadata, codecs or dtype).

Reading streams the committed chunks replica after replica (one chunk in memory), with the
archive's metadata as hints, its dtype, ``inflow``/``outflow`` and its event log.
"""

from __future__ import annotations

import json
import zipfile
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from massarc.schema import RunMeta
from massarc.schema.spec import ATTRIBUTE_KEY, INFLOW, OUTFLOW

from ..reader import Run, open_run
from ._metadata import meta_dict
from ._options import ARCHIVE_WRITE_OPTIONS, archive_options, guard_options
from ._signatures import ZIP_MAGIC
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["RunSource", "ZarrFormat"]

#: Events per stretch of the event log handed to the writer.
_EVENT_STEP = 1 << 20


class RunSource(Source):
    """An opened archive as a source."""

    unit = "snapshots"

    def __init__(self, run: Run) -> None:
        self.run = run
        self.name = run.name
        self.dtype = run.dtype if run.has_data else None
        self.n_snapshots = run.n_snapshots
        self.total = run.n_replicas * run.n_snapshots
        if not run.complete:
            self.notes = (
                f"{run.name} is incomplete (its writer did not finish); converting its "
                f"committed {run.n_replicas} replicas x {run.n_snapshots} snapshots",
            )

    def hints(self) -> dict[str, Any]:
        return meta_dict(self.run.meta) if self.run.meta is not None else {}

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        run = self.run
        times = run.times
        series = {k: run.series(k) for k in (INFLOW, OUTFLOW)}
        series = {k: v for k, v in series.items() if v is not None}
        done = 0
        for chunk in run.chunks():
            span = slice(chunk.start, chunk.stop)
            done += chunk.stop - chunk.start
            yield Batch(
                times[span],
                chunk.mass,
                replica=chunk.replica,
                series={k: v[chunk.replica, span] for k, v in series.items()} or None,
                done=done,
            )
        events = run.events
        if events is not None:
            total = int(events["time"].shape[0])
            for lo in range(0, total, _EVENT_STEP):
                hi = min(lo + _EVENT_STEP, total)
                part = {k: np.asarray(events[k][lo:hi]) for k in events.array_keys()}
                yield Events(
                    part["time"], part["replica"], part["source"], part["target"], part["amount"]
                )


def _is_run_dir(path: Path) -> bool:
    meta = path / "zarr.json"
    if not meta.is_file():
        return False
    try:
        attrs = json.loads(meta.read_text(encoding="utf-8")).get("attributes", {})
    except (OSError, ValueError, AttributeError, RecursionError):  # not a Zarr node we read
        return False
    return isinstance(attrs, dict) and ATTRIBUTE_KEY in attrs


class ZarrFormat(Format):
    name = "zarr"
    suffixes = (".zarr", ".zarr.zip")
    description = "massarc run archive (Zarr v3 directory, or a read-only .zip of one)"
    read_options: ClassVar[dict[str, str]] = {}
    write_options: ClassVar[Mapping[str, str]] = ARCHIVE_WRITE_OPTIONS
    writable = True

    def sniff(self, head: bytes, path: Path) -> bool:
        if path.is_dir():
            return _is_run_dir(path)
        if head.startswith(ZIP_MAGIC):
            with zipfile.ZipFile(path) as zf:
                return "zarr.json" in zf.namelist()
        return False

    def read(self, path: Path, **options: str) -> Source:
        guard_options(options, self.read_options, "reading zarr")
        return RunSource(open_run(path))

    def write(
        self, run: Run, path: Path, *, progress: Progress | None = None, **options: str
    ) -> list[str]:
        from .stream import write_source

        guard_options(options, self.write_options, "writing zarr")
        source = RunSource(run)
        write_source(source, path, run.meta, progress=progress, **archive_options(options))
        return list(source.notes)
