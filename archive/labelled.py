"""Runs and collections as labelled arrays (xarray), read lazily through Dask.

A run becomes an :class:`xarray.DataTree` that mirrors its Zarr group:

* the root holds ``mass`` (dimensions ``replica, time, site`` or ``replica, time, y, x``),
  and ``inflow``/``outflow`` when the run has them, over the **committed** extent only;
  coordinates ``replica``, ``time`` (the stored times, ``units`` from the metadata) and
  ``site`` (or ``y``, ``x``); the attributes are the metadata (``model``, ``lattice``,
  ``run``, ... as plain JSON), ``format_version`` and ``complete``;
* the child ``summaries`` holds the stored summaries (schema/FORMAT.md section 6) with
  their own dimension names and attributes, and the summaries' provenance as its
  attributes. It is a child rather than more variables of the root because its
  ``occupation`` array has a dimension named ``mass``, which xarray would confuse with
  the ``mass`` variable. Summaries that cover another extent than the committed one (the
  run grew after ``massarc summarize``) are left out, and the root attribute
  ``summaries_note`` says so.

Every array is a Dask array; nothing is decoded until it is computed. ``mass`` has one
block per chunk of the run, read by :class:`~massarc.archive._chunk_read.ChunkReader`:
checksums are verified, a chunk larger than its caps is refused before it is decoded
(:mod:`massarc.archive.bounded`, :mod:`massarc.archive.limits`), and a missing or corrupt
chunk raises :class:`~massarc.archive.errors.ChunkError` naming it instead of reading as
the fill value. The other arrays are read through zarr with the bounded codecs.

A collection is a sequence of runs (:class:`Collection`). Its :meth:`Collection.to_xarray`
stacks the runs along a new dimension ``run`` when they line up (same lattice, replicas,
dtype and times, and summaries with the same sizes, or none), with one coordinate per
scalar metadata parameter (``density``, ``b``, ...) along ``run``; otherwise it returns a
mapping from run name to that run's tree. ``to_xarray(summaries=False)`` leaves the
summaries out, which often makes a summarised sweep stackable.

xarray and Dask come from the ``xarray`` extra (``pip install 'massarc[xarray]'``).
"""

from __future__ import annotations

import uuid
from collections.abc import Iterator, Sequence
from typing import TYPE_CHECKING, Any, overload

import numpy as np

from massarc.schema.spec import INFLOW, OUTFLOW, mass_dimensions

from .errors import ArchiveError
from .reader import ChunkRef, Run, open_runs
from .store import Location, location_name

if TYPE_CHECKING:
    from ._chunk_read import ChunkReader

__all__ = ["Collection", "mass_dask", "open_collection", "run_tree"]

#: The extra that brings xarray and Dask.
EXTRA = "xarray"


def _libs() -> tuple[Any, Any]:
    try:
        import dask.array as da
        import xarray as xr
    except ImportError as exc:
        raise ImportError(
            f"labelled arrays need xarray and dask (missing: {exc.name}); install them with "
            f"pip install 'massarc[{EXTRA}]'"
        ) from None
    return xr, da


def _block(reader: ChunkReader, ref: ChunkRef, missing: tuple[str, str] | None) -> np.ndarray:
    """One Dask block of ``mass``: the chunk ``ref``, with its replica axis."""
    from ._chunk_read import read_checked

    return read_checked(reader, ref, missing).mass[np.newaxis]


class _Slab:
    """A member array read by slices inside its committed shape (for ``da.from_array``)."""

    def __init__(self, arr: Any, shape: tuple[int, ...]) -> None:
        self.arr = arr
        self.shape = shape
        self.dtype = np.dtype(arr.dtype)
        self.ndim = len(shape)

    def __getitem__(self, key: Any) -> np.ndarray:
        return np.asarray(self.arr[key])


def _lazy(arr: Any, shape: tuple[int, ...]) -> Any:
    _, da = _libs()
    chunks = tuple(max(1, min(int(c), n)) for c, n in zip(arr.chunks, shape, strict=True))
    return da.from_array(_Slab(arr, shape), chunks=chunks, name=f"massarc-{uuid.uuid4().hex}")


def mass_dask(run: Run) -> Any:
    """The committed masses of ``run`` as a Dask array, one block per chunk (see the
    module docstring for what each block checks)."""
    from ._chunk_read import ChunkReader, missing_chunks

    _, da = _libs()
    shape, dtype = run.shape, run.dtype
    if not run.has_data:
        return da.zeros(shape, dtype=dtype)
    refs = run.chunk_refs()
    reader = ChunkReader(run)
    missing = {} if reader.direct else missing_chunks(run, refs)
    name = f"massarc-mass-{uuid.uuid4().hex}"
    tail = (0,) * len(run.sites)
    step = run.chunk_snapshots
    graph = {
        (name, ref.replica, ref.start // step, *tail): (_block, reader, ref, missing.get(i))
        for i, ref in enumerate(refs)
    }
    times = tuple(min(step, run.n_snapshots - s) for s in range(0, run.n_snapshots, step))
    chunks = ((1,) * run.n_replicas, times, *((n,) for n in run.sites))
    return da.Array(graph, name, chunks, dtype=dtype)


def _attrs(run: Run) -> dict[str, Any]:
    if run.header is None or run.meta is None:
        raise ArchiveError(f"{run.name}: no valid header: {'; '.join(run.problems)}")
    meta = run.meta.model_dump(mode="json", exclude_none=True)
    return {**meta, "format_version": run.header.format_version, "complete": run.complete}


def _summaries(run: Run) -> tuple[Any | None, str | None]:
    """The summaries as a Dataset, or None with the reason they are left out."""
    from .summaries import plain

    xr, _ = _libs()
    stored = run.summaries
    if stored is None:
        return None, None
    extent = stored.provenance.get("extent") or {}
    have = (extent.get("replicas"), extent.get("snapshots"))
    if have != (run.n_replicas, run.n_snapshots):
        return None, (
            f"stored summaries cover {have[0]} replicas x {have[1]} snapshots; the run has "
            f"{run.n_replicas} x {run.n_snapshots} (run massarc summarize)"
        )
    data = {}
    for name in stored:
        arr = stored.group[name]
        data[name] = (stored.dims(name), _lazy(arr, tuple(arr.shape)), stored.attrs(name))
    ds = xr.Dataset(data, attrs=plain(stored.provenance))
    if "probe_time" in ds and ds["probe_time"].dims == ("probe",):
        ds = ds.set_coords("probe_time")
    return ds, None


def run_tree(run: Run, *, summaries: bool = True) -> Any:
    """``run`` as an :class:`xarray.DataTree` (see the module docstring); lazy.

    >>> from massarc.archive import open_run
    >>> tree = run_tree(open_run("samples/dune-strip.zarr"))
    >>> tree["mass"].dims, tree["mass"].shape, tree.attrs["model"]["family"]
    (('replica', 'time', 'site'), (4, 512, 64), 'cmam')
    >>> int(tree["mass"][0, 0].sum())  # decodes one chunk
    128
    """
    xr, _ = _libs()
    attrs = _attrs(run)
    dims = mass_dimensions(len(run.sites))
    arr = run.mass  # an absent or unreadable array raises ArchiveError saying why
    data: dict[str, Any] = {"mass": (dims, mass_dask(run), dict(arr.attrs))}
    for key in (INFLOW, OUTFLOW):
        series = run.array(key)
        if series is not None and run.has_data:
            data[key] = (("replica", "time"), _lazy(series, (run.n_replicas, run.n_snapshots)))
    units = run.meta.run.time_units if run.meta is not None else None
    coords: dict[str, Any] = {
        "replica": ("replica", np.arange(run.n_replicas)),
        "time": ("time", np.asarray(run.times), {"units": units} if units else {}),
    }
    for dim, n in zip(dims[2:], run.sites, strict=True):
        coords[dim] = (dim, np.arange(n))
    stored, note = _summaries(run) if summaries else (None, None)
    if note is not None:
        attrs["summaries_note"] = note
    nodes = {"/": xr.Dataset(data, coords=coords, attrs=attrs)}
    if stored is not None:
        nodes["/summaries"] = stored
    return xr.DataTree.from_dict(nodes)


def _parameters(attrs: dict[str, Any]) -> dict[str, Any]:
    """Scalar metadata values of the model, the run and open boundaries, by leaf name."""
    out: dict[str, Any] = {}
    for section in (attrs.get("model", {}), attrs.get("run", {})):
        out.update({k: v for k, v in section.items() if isinstance(v, str | int | float)})
    out.update(attrs.get("lattice", {}).get("open") or {})
    return out


class Collection(Sequence[Run]):
    """The runs of a collection (or a single run), in name order; index by position or
    by run name. Build it with :func:`open_collection`.

    >>> sweep = open_collection("samples")
    >>> len(sweep), sweep.names[0]
    (3, 'samples/depot-ring-unsettled.zarr')
    >>> sweep.parameters()["density"]
    [1.5, 1.5, 2.0]
    """

    def __init__(self, name: str, runs: list[Run]) -> None:
        self.name = name
        self.runs = runs

    @property
    def names(self) -> list[str]:
        return [r.name for r in self.runs]

    def __len__(self) -> int:
        return len(self.runs)

    def __iter__(self) -> Iterator[Run]:
        return iter(self.runs)

    @overload
    def __getitem__(self, key: int | str) -> Run: ...
    @overload
    def __getitem__(self, key: slice) -> Sequence[Run]: ...
    def __getitem__(self, key: int | str | slice) -> Run | Sequence[Run]:
        if isinstance(key, str):
            for run in self.runs:
                if run.name == key:
                    return run
            raise KeyError(f"{self.name}: no run {key!r}; runs: {', '.join(self.names)}")
        return self.runs[key]

    def parameters(self) -> dict[str, list[Any]]:
        """Scalar metadata values present in every run (``density``, ``b``, ``regime``...),
        one list entry per run."""
        found = [_parameters(_attrs(r)) for r in self.runs]
        keys = [k for k in found[0] if all(k in f for f in found[1:])] if found else []
        return {k: [f[k] for f in found] for k in keys}

    def to_xarray(self, *, summaries: bool = True) -> Any:
        """One :class:`xarray.DataTree` with a ``run`` dimension when the runs line up,
        else ``{run name: DataTree}`` (see the module docstring)."""
        xr, _ = _libs()
        trees = {r.name: run_tree(r, summaries=summaries) for r in self.runs}
        if not _stackable(list(trees.values())):
            return trees
        names = list(trees)
        params = {k: ("run", v) for k, v in self.parameters().items()}
        nodes = {}
        for path in _paths(trees[names[0]]):
            parts = [trees[n][path].to_dataset(inherit=False) for n in names]
            stacked = xr.concat(
                parts,
                dim="run",
                data_vars="all",
                coords="different",
                compat="equals",
                join="exact",
                combine_attrs="drop",
            )
            stacked.attrs = {"runs": {n: dict(p.attrs) for n, p in zip(names, parts, strict=True)}}
            nodes[path] = stacked
        nodes["/"] = nodes["/"].assign_coords(run=("run", names), **params)
        return xr.DataTree.from_dict(nodes)

    def _repr_html_(self) -> str:
        from .notebook import collection_html

        return collection_html(self)

    def __repr__(self) -> str:
        return f"<Collection {self.name!r} of {len(self)} runs>"


def _paths(tree: Any) -> list[str]:
    return ["/"] + [f"/{name}" for name in tree.children]


def _stackable(trees: list[Any]) -> bool:
    """True when every tree has the same nodes, variables, sizes, dtypes and times."""
    if not trees:
        return False
    first = trees[0]

    def layout(tree: Any) -> list[tuple[Any, ...]]:
        out = []
        for path in _paths(tree):
            ds = tree[path].to_dataset(inherit=False)
            out.append(
                (path, dict(ds.sizes), {k: (v.dims, v.dtype) for k, v in ds.variables.items()})
            )
        return out

    want = layout(first)
    times = np.asarray(first["time"])
    return all(
        layout(t) == want and np.array_equal(np.asarray(t["time"]), times) for t in trees[1:]
    )


def open_collection(location: Location, *, lenient: bool = False) -> Collection:
    """Open a collection (a Zarr group of runs or a directory of runs; a single run gives a
    collection of one) as a :class:`Collection`. ``lenient`` as for
    :func:`~massarc.archive.open_runs`."""
    return Collection(location_name(location), open_runs(location, lenient=lenient))
