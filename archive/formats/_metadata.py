"""Run metadata in and out of interchange files.

Exports embed the metadata as JSON (the ``# massarc-meta:`` line of the text formats, the
``metadata`` array of an ``.npz``, the ``massarc_metadata`` attribute of HDF5 and NetCDF)
and imports read it back; HDF5 and NetCDF attributes may also be mapped onto metadata keys
one by one (``--option attrs.NAME=key.path``).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np

from massarc.schema import MetadataError, RunMeta, apply_overrides, load_json

from ..errors import DataError

__all__ = [
    "META_ATTR",
    "attr_value",
    "mapped_attrs",
    "meta_dict",
    "meta_json",
    "metadata_from_json",
]

#: The HDF5/NetCDF attribute that holds the metadata as JSON.
META_ATTR = "massarc_metadata"


def meta_dict(meta: RunMeta) -> dict[str, Any]:
    """Metadata as the plain dict text formats embed and importers read back."""
    return meta.model_dump(mode="json", exclude_none=True)


def meta_json(meta: RunMeta) -> str:
    """Metadata as the JSON text of an ``.npz`` array or an HDF5/NetCDF attribute."""
    return json.dumps(meta_dict(meta))


def attr_value(value: Any) -> Any:
    """An HDF5/NetCDF attribute (or a 0-d array) as a plain JSON-able value."""
    if isinstance(value, bytes):
        return value.decode("utf-8", errors="replace")
    if isinstance(value, np.ndarray):
        return [attr_value(v) for v in value.tolist()] if value.ndim else attr_value(value.item())
    if isinstance(value, np.generic):
        return value.item()
    return value


def metadata_from_json(raw: Any, where: str) -> dict[str, Any]:
    """The metadata dict stored as JSON text in ``raw`` (a string, bytes, an attribute or a
    0-d string array); ``where`` names it in the :class:`MetadataError`."""
    try:
        data = load_json(attr_value(raw))
    except (TypeError, ValueError) as exc:
        raise MetadataError([f"expected JSON metadata; got invalid JSON ({exc})"], where) from None
    if not isinstance(data, dict):
        raise MetadataError(["expected a JSON object"], where)
    return data


def mapped_attrs(
    options: Mapping[str, str], lookup: Callable[[str], Any], where: str
) -> dict[str, Any]:
    """Metadata from ``attrs.NAME=key.path`` options; ``lookup(NAME)`` returns the value or
    raises KeyError."""
    data: dict[str, Any] = {}
    for key, path in options.items():
        if not key.startswith("attrs."):
            continue
        attr = key[len("attrs.") :]
        try:
            value = attr_value(lookup(attr))
        except KeyError:
            raise DataError(f"{where}: no attribute {attr!r} (option {key}={path})") from None
        data = apply_overrides(data, [f"{path}={json.dumps(value)}"])
    return data
