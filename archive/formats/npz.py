"""NumPy ``.npz``: a zip of ``.npy`` arrays.

Layout: ``mass`` (as for ``.npy``: ``(replica, time, site)``, ``(time, site)``, or with
``y, x`` for 2-D lattices), ``time`` (float, one per snapshot), and, when written by
massarc, ``metadata`` (a 0-d string array holding the metadata as JSON) and the optional
``inflow``/``outflow`` ``(replica, time)``. Other array names are chosen with ``--option
mass=NAME``, ``--option time=NAME``.

Streaming: a member stored uncompressed (``np.savez``, and massarc's default) is
memory-mapped in place; a compressed one (``np.savez_compressed``) is decompressed forward,
its header read with :func:`numpy.lib.format.read_magic` / ``read_array_header_*`` from
the member stream, so it must keep the lattice axes last. Writing streams the mass
member chunk by chunk.
"""

from __future__ import annotations

import math
import struct
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from massarc.schema import RunMeta
from massarc.schema.spec import INFLOW, OUTFLOW

from ..errors import DataError
from ..reader import Run
from ._arrays import SequentialArray, array_batches
from ._axes import axes_for, times_for
from ._export import MASK, MissingMask, guard_mask
from ._metadata import meta_json, metadata_from_json
from ._native import guard_source
from ._npy_stream import read_npy_header, write_npy_stream
from ._options import as_bool, guard_options
from ._signatures import ZIP_MAGIC
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["NpzFormat"]

_LOCAL_HEADER = struct.Struct("<4s5H3L2H")


@guard_source
class NpzSource(Source):
    unit = "snapshots"

    def __init__(self, path: Path, options: dict[str, str]) -> None:
        self.path = path
        self.name = str(path)
        self.options = options
        try:
            self.zf = zipfile.ZipFile(path)
        except (zipfile.BadZipFile, OSError) as exc:
            raise DataError(f"{self.name}: not a readable .npz (zip) file ({exc})") from None
        self.members = {n[:-4]: n for n in self.zf.namelist() if n.endswith(".npy")}
        if MASK in self.members:
            guard_mask(self._small(MASK), self.name)
        self.mass_name = options.get("mass", "mass")
        if self.mass_name not in self.members:
            have = ", ".join(self.members) or "none"
            raise DataError(
                f"{self.name}: no array {self.mass_name!r} (arrays: {have}); choose one with "
                "--option mass=NAME"
            )
        with self.zf.open(self.members[self.mass_name]) as fp:
            self.shape, self.fortran, dt = read_npy_header(fp, self._label(self.mass_name))
        self.dtype = dt if dt.kind == "u" else None
        self.mass_dtype = dt

    def _label(self, key: str) -> str:
        return f"{self.name}: array {key!r}"

    def _small(self, key: str) -> np.ndarray:
        """A small member read whole (times, series, metadata), bounded by the member's
        stated size before anything is allocated."""
        label = self._label(key)
        info = self.zf.getinfo(self.members[key])
        with self.zf.open(info) as fp:
            shape, fortran, dt = read_npy_header(fp, label)
            need = math.prod(shape) * dt.itemsize
            if need > info.file_size:
                raise DataError(
                    f"{label}: truncated: the header promises {need} bytes; the member holds "
                    f"{info.file_size}"
                )
            data = fp.read(need)
        if len(data) < need:
            raise DataError(f"{label}: truncated: {len(data)} of {need} bytes")
        flat = np.frombuffer(data, dtype=dt).copy()
        return flat.reshape(shape[::-1]).T if fortran else flat.reshape(shape)

    def hints(self) -> dict[str, Any]:
        key = self.options.get("metadata", "metadata")
        if key not in self.members:
            return {}
        return metadata_from_json(str(self._small(key).item()), self._label(key))

    def n_snapshots_for(self, meta: RunMeta) -> int | None:
        axes = self._axes(meta)
        return int(self._shape()[axes.index("time")])

    def _shape(self) -> tuple[int, ...]:
        return self.shape[::-1] if self.fortran else self.shape

    def _axes(self, meta: RunMeta) -> tuple[str, ...]:
        axes = axes_for(self.shape, meta, self.options.get("order"), self._label(self.mass_name))
        return axes[::-1] if self.fortran else axes

    def _mass(self) -> Any:
        """A memory map of a stored member, else a forward stream (C order of _shape)."""
        info = self.zf.getinfo(self.members[self.mass_name])
        label = self._label(self.mass_name)
        if info.compress_type == zipfile.ZIP_STORED:
            with open(self.path, "rb") as f:
                f.seek(info.header_offset)
                fields = _LOCAL_HEADER.unpack(f.read(_LOCAL_HEADER.size))
                start = info.header_offset + _LOCAL_HEADER.size + fields[-2] + fields[-1]
            with self.zf.open(info) as fp:
                read_npy_header(fp, label)
                offset = start + fp.tell()
            need = offset + int(np.prod(self.shape)) * self.mass_dtype.itemsize
            if self.path.stat().st_size < need:
                raise DataError(f"{label}: truncated: the file ends before the array does")
            return np.memmap(
                self.path, dtype=self.mass_dtype, mode="r", offset=offset, shape=self._shape()
            )
        fp = self.zf.open(info)
        read_npy_header(fp, label)
        seq = SequentialArray(fp, self._shape(), self.mass_dtype, label)
        return seq

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        axes = self._axes(meta)
        shape = self._shape()
        n = int(shape[axes.index("time")])
        key = self.options.get("time", "time")
        if "time" in self.options and key not in self.members:
            raise DataError(f"{self.name}: no array {key!r} for the times")
        stored = self._small(key) if key in self.members else None
        if stored is None and "times" not in self.options:
            self.notes = (f"{self.name}: no array 'time'; the times are 0..{n - 1}",)
        times = times_for(n, self.options.get("times"), stored, self.name, f"array {key!r}")
        n_rep = int(shape[axes.index("replica")]) if "replica" in axes else 1
        self.total = n * n_rep
        series = {k: self._small(k) for k in (INFLOW, OUTFLOW) if k in self.members}
        arr = self._mass()
        if isinstance(arr, SequentialArray):
            arr.axes = axes
        try:
            yield from array_batches(arr, axes, times, chunk, series=series)
        except (EOFError, zipfile.BadZipFile, OSError) as exc:
            raise DataError(
                f"{self._label(self.mass_name)}: truncated or corrupt ({exc})"
            ) from None

    def close(self) -> None:
        self.zf.close()


class NpzFormat(Format):
    name = "npz"
    suffixes = (".npz",)
    description = "NumPy .npz: arrays mass, time (+ metadata as JSON, inflow, outflow)"
    read_options: ClassVar[dict[str, str]] = {
        "mass": "name of the mass array (default mass)",
        "time": "name of the time array (default time)",
        "metadata": "name of the JSON metadata array (default metadata)",
        "times": "snapshot times instead of an array: start:step, a list or a file",
        "order": "axis order of the mass array, e.g. time,replica,site",
    }
    write_options: ClassVar[dict[str, str]] = {
        "compress": "deflate the arrays (default false: memory-mappable)"
    }
    writable = True
    masks = True

    def sniff(self, head: bytes, path: Path) -> bool:
        if not head.startswith(ZIP_MAGIC) or len(head) < _LOCAL_HEADER.size:
            return False
        fields = _LOCAL_HEADER.unpack(head[: _LOCAL_HEADER.size])
        name = head[_LOCAL_HEADER.size : _LOCAL_HEADER.size + fields[-2]]
        return name.endswith(b".npy")

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading npz")
        return NpzSource(Path(path), dict(options))

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        guard_options(options, self.write_options, "writing npz")
        deflate = as_bool(options.get("compress", "false"), "compress")
        method = zipfile.ZIP_DEFLATED if deflate else zipfile.ZIP_STORED
        small = {"time": run.times}
        for key in (INFLOW, OUTFLOW):
            val = run.series(key)
            if val is not None:
                small[key] = val
        if run.meta is not None:
            small["metadata"] = np.array(meta_json(run.meta))
        lost = MissingMask(run) if allow_missing else None
        with zipfile.ZipFile(path, "w", compression=method, allowZip64=True) as zf:
            with zf.open("mass.npy", "w", force_zip64=True) as fp:
                write_npy_stream(fp, run, progress, lost)
            if lost is not None:
                small[MASK] = lost.mask
            for key, val in small.items():
                with zf.open(f"{key}.npy", "w", force_zip64=True) as fp:
                    np.lib.format.write_array(fp, np.asarray(val), allow_pickle=False)
        return lost.notes(f"the array {MASK!r}") if lost is not None else []
