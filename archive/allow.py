"""What massarc agrees to decode: an allow-list of Zarr data types and codecs, checked on
the metadata of every array of a run before any chunk is decoded.

Zarr accepts any registered codec; some allocate without bound (``vlen-bytes`` on an
integer array, pickled objects), and a codec that does not fit the data type has no
business in a run. The list holds the codecs of FORMAT.md (``bytes``, ``blosc``,
``crc32c``) and the standard Zarr v3 compressors other writers use (``zstd``, ``gzip``),
plus ``transpose``; sharding is not on it (a shard is a store inside a chunk, with its own
index to trust). Each array's decoded chunk must also fit :func:`~.limits.max_chunk_bytes`.

The metadata are read as raw JSON (every ``zarr.json`` below the run, depth-limited), so
that nothing is handed to zarr's codec registry before it is vetted.
"""

from __future__ import annotations

import math
from typing import Any

from zarr.abc.store import Store
from zarr.core.buffer import default_buffer_prototype
from zarr.core.sync import collect_aiterator, sync

from massarc.schema import load_json

from .limits import max_chunk_bytes

__all__ = ["ALLOWED_CODECS", "ALLOWED_DATA_TYPES", "array_problem", "run_problem"]

#: Data types an array of a run may have.
ALLOWED_DATA_TYPES = frozenset(
    {"bool", "int8", "int16", "int32", "int64", "uint8", "uint16", "uint32", "uint64"}
    | {"float32", "float64"}
)
#: Codecs an array of a run may use (Zarr v3 names).
ALLOWED_CODECS = ("bytes", "transpose", "blosc", "zstd", "gzip", "crc32c")
#: Largest ``zarr.json`` read (a metadata document, not data).
_MAX_METADATA_BYTES = 1 << 20
_ITEMSIZE = {"bool": 1, "int8": 1, "uint8": 1, "int16": 2, "uint16": 2, "float32": 4}


def _itemsize(data_type: str) -> int:
    return _ITEMSIZE.get(data_type, 8 if data_type.endswith("64") else 4)


def array_problem(name: str, doc: Any) -> str | None:
    """Why the array metadata ``doc`` (a parsed ``zarr.json``) is refused, naming ``name``;
    None when it is allowed (or not an array: groups are not checked here).

    >>> print(array_problem("mass", {"node_type": "array", "data_type": "uint16",
    ...     "chunk_grid": {"configuration": {"chunk_shape": [1, 4]}},
    ...     "codecs": [{"name": "vlen-bytes"}]}))  # doctest: +ELLIPSIS
    mass: codec 'vlen-bytes' is not allowed; expected one of bytes, transpose, blosc, ...
    """
    if not isinstance(doc, dict) or doc.get("node_type") != "array":
        return None
    dtype = doc.get("data_type")
    if not isinstance(dtype, str) or dtype not in ALLOWED_DATA_TYPES:
        allowed = ", ".join(sorted(ALLOWED_DATA_TYPES))
        return f"{name}: data type {dtype!r} is not allowed; expected one of {allowed}"
    codecs = doc.get("codecs")
    if not isinstance(codecs, list):
        return f"{name}: codecs: expected a list; got {type(codecs).__name__}"
    for codec in codecs:
        cname = codec.get("name") if isinstance(codec, dict) else codec
        if cname not in ALLOWED_CODECS:
            return (
                f"{name}: codec {str(cname)[:60]!r} is not allowed; expected one of "
                f"{', '.join(ALLOWED_CODECS)}"
            )
    grid = doc.get("chunk_grid")
    conf = grid.get("configuration") if isinstance(grid, dict) else None
    chunk = conf.get("chunk_shape") if isinstance(conf, dict) else None
    if not isinstance(chunk, list) or not all(isinstance(n, int) and n > 0 for n in chunk):
        return f"{name}: chunk_grid: expected a regular grid of positive chunk lengths"
    size = math.prod(chunk) * _itemsize(dtype)
    cap = max_chunk_bytes()
    if size > cap:
        return (
            f"{name}: chunks of {chunk} decode to {size} bytes; expected at most {cap} "
            "(MASSARC_MAX_CHUNK_BYTES)"
        )
    return None


def run_problem(store: Store, prefix: str) -> str | None:
    """The first refusal among the arrays stored below ``prefix`` (a run's path in
    ``store``, "" for its root); None when every array is allowed."""
    try:
        keys = sorted(collect_aiterator(store.list_prefix(prefix)))
    except Exception:  # a store that cannot list: the arrays are vetted as zarr opens them
        return None
    proto = default_buffer_prototype()
    for key in keys:
        if key != "zarr.json" and not key.endswith("/zarr.json"):
            continue
        name = key[len(prefix) :].removesuffix("zarr.json").strip("/") or "."
        try:
            raw = sync(store.get(key, prototype=proto))
        except Exception:  # unreadable metadata: the schema check reports it
            continue
        if raw is None:
            continue
        data = raw.to_bytes()
        if len(data) > _MAX_METADATA_BYTES:
            return f"{name}/zarr.json: {len(data)} bytes; expected at most {_MAX_METADATA_BYTES}"
        try:
            doc = load_json(data)
        except ValueError:
            continue  # not JSON: reported where zarr fails to open it
        problem = array_problem(name, doc)
        if problem is not None:
            return problem
    return None
