"""Read-only, hashable containers for the metadata models.

Sequence fields of the models are tuples; free tables (``CustomModel.parameters``,
``RunMeta.extra``) are :class:`FrozenMap`, deep-frozen: a table inside becomes a
:class:`FrozenMap` and a list a tuple. Dumping gives plain dicts and lists again, so what is
written (archive header, JSON, TOML) does not depend on the frozen types.

>>> table = freeze({"scenario": "depot ring", "depots": [1, 2], "line": {"km": 12.5}})
>>> table["line"]["km"], table["depots"]
(12.5, (1, 2))
>>> hash(table) == hash(freeze({"line": {"km": 12.5}, "depots": [1, 2], "scenario": "depot ring"}))
True
>>> thaw(table)
{'scenario': 'depot ring', 'depots': [1, 2], 'line': {'km': 12.5}}
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import Any, TypeVar

__all__ = ["FrozenMap", "freeze", "thaw"]

V = TypeVar("V")


class FrozenMap(Mapping[str, V]):
    """A read-only mapping that hashes by content (order of keys does not matter).

    It compares equal to any mapping with the same items, a plain dict included.
    """

    __slots__ = ("_data", "_hash")

    def __init__(self, data: Mapping[str, V] | None = None) -> None:
        self._data: dict[str, V] = dict(data or {})
        self._hash: int | None = None

    def __getitem__(self, key: str) -> V:
        return self._data[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._data)

    def __len__(self) -> int:
        return len(self._data)

    def __hash__(self) -> int:
        if self._hash is None:
            self._hash = hash(frozenset(self._data.items()))
        return self._hash

    def __repr__(self) -> str:
        return f"FrozenMap({self._data!r})"


def freeze(value: Any) -> Any:
    """``value`` with every dict turned into a :class:`FrozenMap` and every list into a tuple."""
    if isinstance(value, Mapping):
        return FrozenMap({k: freeze(v) for k, v in value.items()})
    if isinstance(value, list | tuple):
        return tuple(freeze(v) for v in value)
    return value


def thaw(value: Any) -> Any:
    """The plain form of ``value``: mappings become dicts, tuples and lists become lists."""
    if isinstance(value, Mapping):
        return {k: thaw(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [thaw(v) for v in value]
    return value
