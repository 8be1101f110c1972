"""NetCDF through xarray (written with the h5netcdf engine).

Layout (write): variable ``mass`` with dimensions ``(replica, time, site)`` or ``(replica,
time, y, x)``, chunked like the archive; coordinates ``time`` (float64, ``units`` from
``run.time_units``) and ``replica``; ``inflow``/``outflow`` ``(replica, time)`` when the
run has them; the global attribute ``massarc_metadata`` holds the metadata as JSON. The
data go through a dask array over the archive, so the file is written chunk by chunk.

Layout (read): a variable (``--option var=NAME``; default ``mass``, else the only integer
variable with a time dimension) whose dimensions are a time dimension (``time``, or
``--option time-dim=``), an optional replica dimension (``replica``, or
``--option replica-dim=``) and one or two lattice dimensions, in any order. Times come
from the time coordinate. Metadata: ``massarc_metadata`` and ``--option attrs.NAME=key``
(variable attributes, then global ones). Slices are read lazily, one batch at a time.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from massarc.schema import RunMeta
from massarc.schema.spec import INFLOW, OUTFLOW

from ..errors import DataError
from ..reader import Chunk, Run
from ._arrays import array_batches
from ._axes import lattice_axes, times_for
from ._capped import CappedSource
from ._export import MASK, MissingMask, guard_mask
from ._metadata import META_ATTR, mapped_attrs, meta_json, metadata_from_json
from ._native import guard_source
from ._options import guard_options
from ._signatures import HDF5_MAGIC, NETCDF4_MARKS, NETCDF_CLASSIC_MAGIC
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["NetCDFFormat"]


class _LazyVariable:
    """Positional slicing of an xarray variable, loading only the slice."""

    def __init__(self, var: Any) -> None:
        self.var = var
        self.shape = tuple(int(s) for s in var.shape)
        self.dtype = np.dtype(var.dtype)
        self.ndim = len(self.shape)

    def __getitem__(self, key: Any) -> np.ndarray:
        return np.asarray(self.var[key].values)


@guard_source
class NetCDFSource(Source):
    unit = "snapshots"

    def __init__(self, path: Path, options: dict[str, str]) -> None:
        import xarray as xr

        self.name = str(path)
        self.options = options
        try:
            self.ds = xr.open_dataset(
                path, decode_times=False, mask_and_scale=False, decode_cf=False
            )
        except (OSError, ValueError) as exc:
            raise DataError(f"{self.name}: cannot open as NetCDF ({exc})") from None
        self.time_dim = options.get("time-dim", "time")
        self.rep_dim = options.get("replica-dim", "replica")
        self.var_name = self._pick()
        self.var = self.ds[self.var_name]
        self.label = f"{self.name}: variable {self.var_name!r}"
        if self.var_name == "mass" and MASK in self.ds.variables:
            guard_mask(self.ds[MASK].values, self.name)
        self.dtype = self.var.dtype if self.var.dtype.kind == "u" else None

    def _pick(self) -> str:
        want = self.options.get("var")
        if want is not None or "mass" in self.ds.data_vars:
            name = want or "mass"
            if name not in self.ds.variables:
                have = ", ".join(map(str, self.ds.data_vars)) or "none"
                raise DataError(
                    f"{self.name}: no variable {name!r} (variables: {have}); choose "
                    "one with --option var=NAME"
                )
            return name
        cands = [
            str(k)
            for k, v in self.ds.data_vars.items()
            if self.time_dim in v.dims and v.ndim >= 2 and v.dtype.kind in "iu"
        ]
        if len(cands) != 1:
            have = ", ".join(map(str, self.ds.data_vars)) or "none"
            raise DataError(
                f"{self.name}: cannot tell which variable holds the masses "
                f"(variables: {have}); choose one with --option var=NAME"
            )
        return cands[0]

    def _axes(self, meta: RunMeta) -> tuple[str, ...]:
        dims = [str(d) for d in self.var.dims]
        if self.time_dim not in dims:
            raise DataError(
                f"{self.label}: expected a time dimension {self.time_dim!r}; got "
                f"dimensions {dims} (name it with --option time-dim=NAME)"
            )
        rest = [d for d in dims if d not in (self.time_dim, self.rep_dim)]
        lat = lattice_axes(meta.lattice.ndim)
        if len(rest) != len(lat):
            raise DataError(
                f"{self.label}: metadata contradicts the data: lattice.sites has "
                f"{len(lat)} axes but the variable has {len(rest)} lattice dimensions {rest}"
            )
        names = dict(zip(rest, lat, strict=True))
        names[self.time_dim], names[self.rep_dim] = "time", "replica"
        return tuple(names[d] for d in dims)

    def hints(self) -> dict[str, Any]:
        data: dict[str, Any] = {}
        for attrs in (self.ds.attrs, self.var.attrs):
            if META_ATTR in attrs:
                data = metadata_from_json(attrs[META_ATTR], f"{self.name}: attribute {META_ATTR}")
        return data

    def mapped(self) -> dict[str, Any]:
        def lookup(attr: str) -> Any:
            for attrs in (self.var.attrs, self.ds.attrs):
                if attr in attrs:
                    return attrs[attr]
            raise KeyError(attr)

        return mapped_attrs(self.options, lookup, self.label)

    def n_snapshots_for(self, meta: RunMeta) -> int | None:
        return int(self.ds.sizes[self.time_dim])

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        axes = self._axes(meta)
        n = int(self.ds.sizes[self.time_dim])
        stored = self.ds[self.time_dim].values if self.time_dim in self.ds.coords else None
        times = times_for(
            n, self.options.get("times"), stored, self.name, f"coordinate {self.time_dim!r}"
        )
        n_rep = int(self.ds.sizes[self.rep_dim]) if "replica" in axes else 1
        self.total = n * n_rep
        series = {}
        for key in (INFLOW, OUTFLOW):
            if key in self.ds.data_vars:
                series[key] = (
                    self.ds[key]
                    .transpose(
                        *[d for d in (self.rep_dim, self.time_dim) if d in self.ds[key].dims]
                    )
                    .values
                )
        try:
            yield from array_batches(_LazyVariable(self.var), axes, times, chunk, series=series)
        except (OSError, RuntimeError) as exc:
            raise DataError(f"{self.label}: cannot read ({exc})") from None

    def close(self) -> None:
        self.ds.close()


class NetCDFFormat(Format):
    name = "netcdf"
    suffixes = (".nc", ".nc4", ".netcdf")
    description = "NetCDF (xarray/h5netcdf): variable mass(replica, time, site), time coordinate"
    read_options: ClassVar[dict[str, str]] = {
        "var": "name of the mass variable (default mass)",
        "time-dim": "name of the time dimension (default time)",
        "replica-dim": "name of the replica dimension (default replica)",
        "times": "snapshot times instead of the coordinate: start:step, a list or a file",
        "attrs.NAME": "map attribute NAME onto a metadata key, e.g. attrs.b=model.b",
    }
    write_options: ClassVar[dict[str, str]] = {"compression": "gzip (default) or none"}
    writable = True
    masks = True
    #: A NetCDF-4 file is an HDF5 file too; this sniff is the more specific one.
    sniff_priority = 1

    def sniff(self, head: bytes, path: Path) -> bool:
        if head.startswith(NETCDF_CLASSIC_MAGIC):
            return True
        if not head.startswith(HDF5_MAGIC):
            return False
        # the marks of NetCDF-4 in the first bytes, never the HDF5 library in this process
        # (a damaged file can crash it; see _capped); else the name says what the user means
        return any(mark in head for mark in NETCDF4_MARKS) or path.name.endswith(self.suffixes)

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading netcdf")
        return CappedSource(NetCDFSource, Path(path), dict(options), "NetCDF")

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        import xarray as xr

        guard_options(options, self.write_options, "writing netcdf")
        comp = options.get("compression", "gzip")
        if comp not in ("gzip", "none"):
            raise DataError(f"option compression: expected gzip or none; got {comp!r}")
        lattice = run.sites
        dims = ("replica", "time", *lattice_axes(len(lattice)))
        tc = max(1, min(run.chunk_snapshots, run.n_snapshots))
        chunks = (1, tc, *lattice)
        mass, mask, lost = _checked_blocks(run, allow_missing)
        data: dict[str, Any] = {"mass": (dims, mass, {"long_name": "mass per site"})}
        if allow_missing:
            data[MASK] = (("replica", "time"), mask, {"long_name": "true: not data"})
        for key in (INFLOW, OUTFLOW):
            val = run.series(key)
            if val is not None:
                data[key] = (("replica", "time"), val)
        units = run.meta.run.time_units if run.meta is not None else "model time"
        coords = {
            "time": ("time", run.times, {"units": units}),
            "replica": ("replica", np.arange(run.n_replicas, dtype=np.int32)),
        }
        attrs = {META_ATTR: meta_json(run.meta)} if run.meta is not None else {}
        ds = xr.Dataset(data, coords=coords, attrs=attrs)
        enc: dict[str, Any] = {"chunksizes": chunks}
        if comp == "gzip":
            enc.update(zlib=True, complevel=4)
        ds.to_netcdf(path, engine="h5netcdf", encoding={"mass": enc})
        if progress is not None:
            progress(
                run.n_replicas * run.n_snapshots, run.n_replicas * run.n_snapshots, "snapshots"
            )
        return _notes(run, lost)


def _checked_blocks(run: Run, allow_missing: bool) -> tuple[Any, Any, list[Chunk]]:
    """``mass`` ``(replica, time, *lattice)`` and ``mask`` ``(replica, time)`` as dask
    arrays read chunk by chunk through the checked reader (a missing or corrupt chunk stops
    the export naming it, or with ``allow_missing`` reads as zeros under the mask; zarr
    alone would give the fill value), and the list the missing chunks are added to."""
    import dask
    import dask.array as da

    from .._chunk_read import ChunkReader, missing_chunks, read_checked

    refs = run.chunk_refs()
    reader = ChunkReader(run)
    absent = {} if reader.direct else missing_chunks(run, refs)
    lost: list[Chunk] = []

    def read(i: int) -> Chunk:
        chunk = read_checked(reader, refs[i], absent.get(i), allow_missing=allow_missing)
        if chunk.missing is not None:
            lost.append(chunk)
        return chunk

    rows: dict[int, tuple[list[Any], list[Any]]] = {}
    for i, ref in enumerate(refs):
        n = ref.stop - ref.start
        chunk = dask.delayed(read)(i)
        masses, masks = rows.setdefault(ref.replica, ([], []))
        masses.append(
            da.from_delayed(
                dask.delayed(lambda c: c.mass[None])(chunk), (1, n, *run.sites), run.dtype
            )
        )
        masks.append(
            da.from_delayed(
                dask.delayed(lambda c, n=n: np.full((1, n), c.missing is not None))(chunk),
                (1, n),
                bool,
            )
        )
    if not rows:
        empty = (run.n_replicas, run.n_snapshots)
        return da.zeros((*empty, *run.sites), run.dtype), da.zeros(empty, bool), lost
    mass = da.concatenate([da.concatenate(rows[r][0], axis=1) for r in sorted(rows)], axis=0)
    mask = da.concatenate([da.concatenate(rows[r][1], axis=1) for r in sorted(rows)], axis=0)
    return mass, mask, lost


def _notes(run: Run, lost: list[Chunk]) -> list[str]:
    record = MissingMask(run)
    for chunk in lost:
        record.note(chunk)
    return record.notes(f"the variable {MASK!r}")
