"""Loading third-party plugins from entry points, shared by the check and format registries.

A broken plugin gives a warning, not a crash; a plugin whose name is already taken gives a
warning and the first registered wins.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Collection, Iterable
from importlib.metadata import EntryPoint
from typing import Any

__all__ = ["load_plugins"]


def load_plugins(
    eps: Iterable[EntryPoint],
    *,
    kind: str,
    key: str,
    validate: Callable[[Any, str], None],
    taken: Collection[str],
) -> dict[str, Any]:
    """Load and validate the classes behind ``eps``, by their ``key`` attribute.

    ``kind`` names the plugins in warnings ("check", "format"); ``validate(cls, origin)``
    raises for a class that breaks the contract; ``taken`` holds the built-in names.
    """
    found: dict[str, Any] = {}
    for ep in eps:
        try:
            cls = ep.load()
            validate(cls, f"entry point {ep.name!r} ({ep.value})")
        except Exception as exc:  # a broken plugin must not break the tool
            warnings.warn(f"massarc: skipping {kind} plugin {ep.name!r}: {exc}", stacklevel=3)
            continue
        name = getattr(cls, key)
        if name in taken or name in found:
            warnings.warn(
                f"massarc: {kind} plugin {ep.name!r} reuses the {key} {name!r}; "
                "the first registered wins",
                stacklevel=3,
            )
            continue
        found[name] = cls
    return found
