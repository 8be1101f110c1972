"""The ``summaries`` group of a run (format 1.1): store it atomically, read it back.

Layout (schema/FORMAT.md, section 6): a Zarr group ``summaries`` inside the run, one array
per observable (names in :data:`massarc.schema.spec.SUMMARY_ARRAYS`), each with its
``dimension_names`` and attributes (units, massarc version, options, window), and the
group attribute ``massarc`` holding the provenance of the whole set.

Atomic replacement (local stores). The new group is written completely under a temporary
name beside the old one (``summaries.new-<token>``); then the old group is renamed away
(``summaries.old-<token>``), the new one renamed to ``summaries``, and the old one removed.
A crash leaves either the old group (under its own name, or as the only
``summaries.old-*`` when the crash fell between the two renames, which readers then use)
or the new one, never a mix; the next write removes the leftovers. Other stores
(``memory://``, fsspec URLs) have no rename: the group is replaced in place.

Writing never touches ``mass``, ``time`` or the run's header.
"""

from __future__ import annotations

import math
import os
import shutil
import uuid
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

import numpy as np
import zarr
from zarr.storage import LocalStore, MemoryStore

from massarc.schema.spec import ATTRIBUTE_KEY, SUMMARIES, SUMMARIES_KIND

from .errors import ArchiveError
from .reader import Run
from .store import local_path

__all__ = [
    "StoredArray",
    "Summaries",
    "hold_summaries",
    "read_summaries",
    "write_summaries",
]

_NEW, _OLD = f"{SUMMARIES}.new-", f"{SUMMARIES}.old-"


@dataclass(frozen=True)
class StoredArray:
    """One array to store: its dimension names, data and attributes (JSON values), and
    the stored dtype when it is wider than the data's (``None``: the data's). A wider
    dtype is cast a block of chunks at a time while writing, so that long runs' (replica,
    snapshot) observables are not held twice, once narrow and once 64-bit."""

    dims: tuple[str, ...]
    data: np.ndarray
    attrs: Mapping[str, Any]
    dtype: np.dtype | None = None

    def __post_init__(self) -> None:
        if len(self.dims) != np.ndim(self.data):
            raise ValueError(
                f"expected {np.ndim(self.data)} dimension names; got {list(self.dims)}"
            )


def plain(value: Any) -> Any:
    """``value`` as plain JSON: NumPy scalars and arrays to Python, NaN and inf to None.

    >>> plain({"a": np.float64("nan"), "b": (np.int64(2), 0.5)})
    {'a': None, 'b': [2, 0.5]}
    """
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple | np.ndarray):
        return [plain(v) for v in (value.tolist() if isinstance(value, np.ndarray) else value)]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _run_dir(run: Run) -> Path | None:
    """The run's directory when its store is a local directory (None otherwise)."""
    store = run.group.store
    if not isinstance(store, LocalStore):
        return None
    root = local_path(store)
    assert root is not None
    return root / run.group.path if run.group.path else root


def _fill(group: zarr.Group, arrays: Mapping[str, StoredArray], attrs: Mapping[str, Any]) -> None:
    """Create and write every array (concurrently, through zarr's asynchronous API), then
    the group attribute."""
    from zarr.core.sync import sync

    async def one(name: str, item: StoredArray) -> None:
        data = np.ascontiguousarray(item.data)
        dtype = np.dtype(item.dtype) if item.dtype is not None else data.dtype
        arr = await group._async_group.create_array(
            name,
            shape=data.shape,
            dtype=dtype,
            dimension_names=item.dims,
            attributes=plain(dict(item.attrs)),
            fill_value=np.nan if dtype.kind == "f" else 0,
            chunk_key_encoding={"name": "default", "separator": "."},  # no nested folders
        )
        if not data.size:
            return
        if dtype == data.dtype or data.ndim == 0:
            await arr.setitem(Ellipsis, data.astype(dtype, copy=False))
            return
        # cast whole chunks along the last axis, a block of about 2**20 values at a time
        step = arr.chunks[-1] * max(1, (1 << 20) // max(1, math.prod(arr.chunks)))
        for lo in range(0, data.shape[-1], step):
            block = (Ellipsis, slice(lo, lo + step))
            await arr.setitem(block, data[block].astype(dtype))

    async def every() -> None:
        # one array after the other: each writes its chunks concurrently, and long runs'
        # (replica, snapshot) arrays would otherwise all hold their encoded chunks at once
        for name, item in arrays.items():
            await one(name, item)

    sync(every())
    group.update_attributes({ATTRIBUTE_KEY: plain({"format": SUMMARIES_KIND, **attrs})})


def _leftovers(directory: Path) -> list[Path]:
    return sorted(p for p in directory.iterdir() if p.name.startswith((_NEW, _OLD)))


def write_summaries(run: Run, arrays: Mapping[str, StoredArray], attrs: Mapping[str, Any]) -> None:
    """Replace the run's ``summaries`` group by ``arrays`` with group attributes ``attrs``
    (stored under ``massarc`` next to ``format``), atomically on local stores."""
    directory = _run_dir(run)
    if directory is None:
        store = run.group.store.with_read_only(False)
        root = zarr.open_group(store, path=run.group.path, mode="r+", zarr_format=3)
        _fill(root.create_group(SUMMARIES, overwrite=True), arrays, attrs)
        return
    token = uuid.uuid4().hex[:12]
    final, new, old = (
        directory / SUMMARIES,
        directory / f"{_NEW}{token}",
        directory / f"{_OLD}{token}",
    )
    if final.exists():
        for stale in _leftovers(directory):  # a complete group is in place: earlier debris
            shutil.rmtree(stale, ignore_errors=True)
    try:
        _fill(zarr.open_group(LocalStore(new), mode="w", zarr_format=3), arrays, attrs)
    except BaseException:
        shutil.rmtree(new, ignore_errors=True)
        raise
    if final.exists():
        os.rename(final, old)
    os.rename(new, final)
    for stale in _leftovers(directory):
        shutil.rmtree(stale, ignore_errors=True)


class Summaries(Mapping[str, Any]):
    """The stored summaries of a run, read lazily.

    ``summaries[name]`` is an :class:`xarray.DataArray` (dimensions, coordinates,
    attributes) when xarray is installed, else a NumPy array; :meth:`array` always gives
    the NumPy array and :meth:`attrs` its attributes. :attr:`provenance` holds the group
    attributes: massarc version, options, window, the extent of the run summarised.
    """

    def __init__(self, run: Run, group: zarr.Group) -> None:
        self.run = run
        self.group = group
        raw = group.attrs.get(ATTRIBUTE_KEY)
        self.provenance: dict[str, Any] = dict(raw) if isinstance(raw, dict) else {}
        self._names = sorted(group.array_keys())

    def __iter__(self) -> Iterator[str]:
        return iter(self._names)

    def __len__(self) -> int:
        return len(self._names)

    def __getitem__(self, name: str) -> Any:
        if name not in self._names:
            raise KeyError(f"{self.run.name}: no summary {name!r}; stored: {', '.join(self)}")
        try:
            import xarray as xr
        except ImportError:
            return self.array(name)
        return xr.DataArray(
            self.array(name),
            dims=self.dims(name),
            coords=self._coords(self.dims(name)),
            name=name,
            attrs=self.attrs(name),
        )

    def array(self, name: str) -> np.ndarray:
        """The stored values as a NumPy array."""
        return np.asarray(self.group[name][...])

    def attrs(self, name: str) -> dict[str, Any]:
        """The array's attributes (units, massarc version, options, window, ...)."""
        return dict(self.group[name].attrs)

    def dims(self, name: str) -> tuple[str, ...]:
        """The array's dimension names."""
        return tuple(self.group[name].metadata.dimension_names or ())

    def _coords(self, dims: tuple[str, ...]) -> dict[str, Any]:
        coords: dict[str, Any] = {}
        if "time" in dims:
            coords["time"] = np.asarray(self.run.times)
        if "probe" in dims and "probe_time" in self._names:
            coords["probe_time"] = ("probe", self.array("probe_time"))
        return coords

    def to_xarray(self) -> Any:
        """Every array in one :class:`xarray.Dataset` (needs xarray) with the provenance
        as its attributes."""
        import xarray as xr

        return xr.Dataset({n: self[n] for n in self}, attrs=plain(self.provenance))


def read_summaries(run: Run) -> Summaries | None:
    """The run's stored summaries, or None when it has none.

    When a writer crashed between its two renames, the only complete group is the
    ``summaries.old-*`` it left; it is read in place of ``summaries``.
    """
    group = run.group.get(SUMMARIES)
    if not isinstance(group, zarr.Group):
        try:
            names = sorted(k for k in run.group.group_keys() if k.startswith(_OLD))
        except Exception as exc:  # a store that cannot list
            raise ArchiveError(f"{run.name}: cannot list the run's groups ({exc})") from None
        group = run.group.get(names[0]) if names else None
        if not isinstance(group, zarr.Group):
            return None
    return Summaries(run, group)


@dataclass
class _HeldRun(Run):
    """A run as read, whose summaries are held in memory instead of read from the run."""

    held: Summaries | None = None

    @property
    def summaries(self) -> Summaries | None:  # type: ignore[override]
        return self.held


def hold_summaries(run: Run, arrays: Mapping[str, StoredArray], attrs: Mapping[str, Any]) -> Run:
    """A view of ``run`` whose :attr:`~massarc.archive.Run.summaries` are ``arrays`` and
    ``attrs`` held in memory (a Zarr memory store, laid out as :func:`write_summaries`
    stores them); nothing is written into the run. The view reads everything else from the
    run itself."""
    group = zarr.open_group(MemoryStore(), mode="w", zarr_format=3)
    _fill(group, arrays, attrs)
    view = _HeldRun(**{f.name: getattr(run, f.name) for f in fields(run)})
    view.held = Summaries(view, group)
    return view
