"""Read-only, hashable containers for the metadata models, and the field types that use them.

Sequence fields of the models are tuples (:data:`Items`); free tables
(``CustomModel.parameters``, ``RunMeta.extra``) are :class:`FrozenMap`, deep-frozen: a table
inside becomes a :class:`FrozenMap` and a list a tuple (:data:`Table`). Dumping gives plain
dicts and lists again, so what is written (archive header, JSON, TOML) does not depend on
the frozen types.

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
from typing import TYPE_CHECKING, Annotated, Any, TypeAlias, TypeVar

from pydantic import AfterValidator, PlainSerializer, Strict

__all__ = ["FrozenMap", "Items", "Table", "freeze", "thaw"]

T = TypeVar("T")
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


if TYPE_CHECKING:
    Items: TypeAlias = tuple[T, ...]
else:
    #: A sequence field: read as a list (a JSON or TOML array; a tuple from Python), held as
    #: a tuple, dumped as a list. The list validator reports length and item errors cleanly.
    Items = Annotated[list[T], Strict(False), AfterValidator(tuple), PlainSerializer(list)]

#: A free table: read as a table, held deep-frozen (:class:`FrozenMap`, tuples), dumped plain.
Table = Annotated[Mapping[str, T], AfterValidator(freeze), PlainSerializer(thaw)]
