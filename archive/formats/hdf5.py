"""HDF5 through h5py.

Layout (read): a mass dataset (default ``/mass``; ``--option mass=/traj/mass``) shaped as
for ``.npy`` (``(replica, time, site)``, ``(time, site)``, ``y, x`` for 2-D lattices; the
axis order is taken from HDF5 dimension labels when every axis has one, or from ``--option
order=``), an optional time dataset (default ``/time``; ``--option time=/traj/t``),
optional ``inflow``/``outflow`` next to it, and metadata from the JSON attribute
``massarc_metadata`` (root or mass dataset) and from attributes mapped with ``--option
attrs.NAME=key.path`` (looked up on the mass dataset, then its parent groups). The
dataset is read chunk by chunk, so it may be larger than memory.

Layout (write): ``/mass`` ``(replica, time, *lattice)`` chunked like the archive, with
dimension labels; ``/time``; ``/inflow``, ``/outflow`` when the run has them; the root
attribute ``massarc_metadata`` holds the metadata as JSON.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any, ClassVar

from massarc.schema import RunMeta
from massarc.schema.spec import INFLOW, OUTFLOW

from ..errors import DataError
from ..reader import Run
from ._arrays import array_batches
from ._axes import axes_for, lattice_axes, parse_axes, times_for
from ._capped import CappedSource
from ._export import MASK, MissingMask, guard_mask
from ._metadata import META_ATTR, mapped_attrs, meta_json, metadata_from_json
from ._native import attribute_shape, bounded_attribute, guard_source
from ._options import guard_options
from ._signatures import HDF5_MAGIC
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["HDF5Format"]


def _attribute(node: Any, key: str, label: str) -> Any:
    """``node.attrs[key]``, refused before it is read when it claims too many values."""
    bounded_attribute(attribute_shape(node.attrs.get_id(key)), label)
    return node.attrs[key]


@guard_source
class HDF5Source(Source):
    unit = "snapshots"

    def __init__(self, path: Path, options: dict[str, str]) -> None:
        import h5py

        self.name = str(path)
        self.options = options
        try:
            self.file = h5py.File(path, "r")
        except OSError as exc:
            raise DataError(f"{self.name}: cannot open as HDF5 ({exc})") from None
        key = options.get("mass", "mass")
        self.mass = self._dataset(key, "mass")
        self.label = f"{self.name}: dataset {self.mass.name}"
        if key == "mass" and MASK in self.file:
            guard_mask(self._dataset(MASK, MASK)[()], self.name)
        self.dtype = self.mass.dtype if self.mass.dtype.kind == "u" else None

    def _dataset(self, key: str, what: str) -> Any:
        import h5py

        obj = self.file.get(key)
        if isinstance(obj, h5py.Dataset):
            return obj
        found: list[str] = []
        self.file.visititems(
            lambda n, o: found.append("/" + n) if isinstance(o, h5py.Dataset) else None
        )
        have = ", ".join(found[:20]) or "none"
        raise DataError(
            f"{self.name}: no dataset {key!r} (datasets: {have}); choose the {what} "
            f"dataset with --option {what}=/path"
        )

    def _lookup(self, attr: str) -> Any:
        node = self.mass
        while True:
            if attr in node.attrs:
                return _attribute(node, attr, self.label)
            if node.name == "/":
                raise KeyError(attr)
            node = node.parent

    def hints(self) -> dict[str, Any]:
        key = self.options.get("meta-attr", META_ATTR)
        data: dict[str, Any] = {}
        for node in (self.file, self.mass):
            if key in node.attrs:
                label = f"{self.name}: attribute {key}"
                data = metadata_from_json(_attribute(node, key, label), label)
        return data

    def mapped(self) -> dict[str, Any]:
        return mapped_attrs(self.options, self._lookup, self.label)

    def _axes(self, meta: RunMeta) -> tuple[str, ...]:
        labels = [d.label for d in self.mass.dims]
        if "order" not in self.options and all(labels):
            try:
                return parse_axes(",".join(labels), self.mass.ndim, meta.lattice.ndim)
            except Exception:  # foreign labels: fall back to the default order
                pass
        return axes_for(self.mass.shape, meta, self.options.get("order"), self.label)

    def n_snapshots_for(self, meta: RunMeta) -> int | None:
        return int(self.mass.shape[self._axes(meta).index("time")])

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        axes = self._axes(meta)
        n = int(self.mass.shape[axes.index("time")])
        key = self.options.get("time", "time")
        stored = None
        if "time" in self.options or key in self.file:
            stored = self._dataset(key, "time")[()]
        times = times_for(n, self.options.get("times"), stored, self.name, f"dataset {key!r}")
        self.total = n * (int(self.mass.shape[axes.index("replica")]) if "replica" in axes else 1)
        parent = self.mass.parent
        series = {k: parent[k][()] for k in (INFLOW, OUTFLOW) if k in parent}
        try:
            yield from array_batches(self.mass, axes, times, chunk, series=series)
        except OSError as exc:
            raise DataError(f"{self.label}: cannot read ({exc})") from None

    def close(self) -> None:
        self.file.close()


class HDF5Format(Format):
    name = "hdf5"
    suffixes = (".h5", ".hdf5", ".hdf")
    description = "HDF5 (h5py): datasets mass, time; metadata in attributes"
    read_options: ClassVar[dict[str, str]] = {
        "mass": "path of the mass dataset (default /mass)",
        "time": "path of the time dataset (default /time, if present)",
        "times": "snapshot times instead of a dataset: start:step, a list or a file",
        "order": "axis order of the mass dataset, e.g. time,replica,site",
        "meta-attr": f"attribute holding the metadata as JSON (default {META_ATTR})",
        "attrs.NAME": "map attribute NAME onto a metadata key, e.g. attrs.b=model.b",
    }
    write_options: ClassVar[dict[str, str]] = {"compression": "gzip (default), lzf or none"}
    writable = True
    masks = True

    def sniff(self, head: bytes, path: Path) -> bool:
        return head.startswith(HDF5_MAGIC)

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading hdf5")
        return CappedSource(HDF5Source, Path(path), dict(options), "HDF5")

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        import h5py

        guard_options(options, self.write_options, "writing hdf5")
        comp = options.get("compression", "gzip")
        if comp not in ("gzip", "lzf", "none"):
            raise DataError(f"option compression: expected gzip, lzf or none; got {comp!r}")
        lattice = run.sites
        chunks = (1, max(1, min(run.chunk_snapshots, run.n_snapshots)), *lattice)
        names = ("replica", "time", *lattice_axes(len(lattice)))
        total, done = run.n_replicas * run.n_snapshots, 0
        with h5py.File(path, "w") as f:
            ds = f.create_dataset(
                "mass",
                shape=run.shape,
                dtype=run.dtype,
                chunks=chunks,
                compression=None if comp == "none" else comp,
            )
            for i, label in enumerate(names):
                ds.dims[i].label = label
            f.create_dataset("time", data=run.times)
            for key in (INFLOW, OUTFLOW):
                val = run.series(key)
                if val is not None:
                    f.create_dataset(key, data=val)
            if run.meta is not None:
                f.attrs[META_ATTR] = meta_json(run.meta)
            lost = MissingMask(run)
            for chunk in run.chunks(allow_missing=allow_missing):
                lost.note(chunk)
                ds[chunk.replica, chunk.start : chunk.stop] = chunk.mass
                done += chunk.stop - chunk.start
                if progress is not None:
                    progress(done, total, "snapshots")
            if allow_missing:
                f.create_dataset(MASK, data=lost.mask)
        return lost.notes(f"the dataset {MASK!r}")
