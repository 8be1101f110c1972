"""One registry helper for what massarc lets third parties add: statistics, checks, formats.

A :class:`Registry` holds the classes of one kind by their key attribute (``name`` or
``id``). Built-ins come from one explicit loader function that returns them in order (no
registration as an import side effect: a built-in that fails to import raises); plugins
come from an entry-point group, loaded lazily on the first listing, and from the
``register`` decorator. The rules are the same for every kind:

* :meth:`Registry.register` validates the contract at once (a violation raises
  :class:`TypeError` naming the class, the attribute and what was expected) and is
  idempotent for the same class, so a class both decorated and named by an entry point
  is registered once;
* a built-in whose key is taken by another built-in is an error; a plugin whose key is
  taken gives a warning and the first registered wins (built-ins always come first);
* an entry point that fails to load or breaks the contract gives a warning and is skipped;
* :meth:`Registry.available` loads the built-ins, then the plugins, once, and returns the
  same read-only mapping on every call: built-ins in their listed order, then entry-point
  plugins by entry-point name, then classes registered only by the decorator;
* :meth:`Registry.get` raises :class:`KeyError` with a message listing the known keys.

>>> from types import SimpleNamespace
>>> def valid(cls, origin):
...     if not isinstance(getattr(cls, "name", None), str):
...         raise TypeError(f"{origin}: expected {cls.__name__}.name to be a string")
>>> Word = type("Word", (), {"name": "word"})
>>> words = Registry("word", "name", "massarc.examples", valid, lambda: [Word])
>>> list(words.available()), words.get("word") is Word
(['word'], True)
>>> words.get("verse")
Traceback (most recent call last):
    ...
KeyError: "unknown word 'verse'; expected one of word"
"""

from __future__ import annotations

import threading
import warnings
from collections.abc import Callable, Iterable, Mapping
from importlib.metadata import entry_points
from types import MappingProxyType
from typing import Any, Generic, TypeVar

__all__ = ["Registry", "class_path"]

T = TypeVar("T")

#: ``validate(cls, origin)`` raises (``TypeError``) when ``cls`` breaks the contract;
#: ``origin`` says where the class came from, for the message.
Validator = Callable[[Any, str], None]


def class_path(cls: Any) -> str:
    """``module.QualName`` of a class (its own repr for anything else)."""
    if isinstance(cls, type):
        return f"{cls.__module__}.{cls.__qualname__}"
    return repr(cls)


class Registry(Generic[T]):
    """Classes of one kind by their key, built-ins first, then plugins.

    Parameters
    ----------
    kind
        What is registered, for messages: ``"statistic"``, ``"check"``, ``"format"``.
    key
        The class attribute holding the registered name: ``"name"`` or ``"id"``.
    group
        The entry-point group of third-party plugins (``"massarc.checks"``...).
    validate
        ``validate(cls, origin)`` raises when ``cls`` breaks the contract of the kind.
    builtins
        Returns the built-in classes in listing order; it imports them, so that a broken
        built-in raises here, on the first listing.
    """

    def __init__(
        self,
        kind: str,
        key: str,
        group: str,
        validate: Validator,
        builtins: Callable[[], Iterable[type[T]]],
    ) -> None:
        self.kind = kind
        self.key = key
        self.group = group
        self._validate = validate
        self._builtins = builtins
        self._entries: dict[str, type[T]] = {}
        self._view: Mapping[str, type[T]] = MappingProxyType(self._entries)
        self._decorated: list[type[T]] = []  # registered by the decorator before loading
        self._warned: set[tuple[str, Any]] = set()
        self._loaded = False
        self._loading = False
        self._lock = threading.RLock()

    def fresh(self) -> Registry[T]:
        """A new, unloaded registry of the same kind (tests swap it in for the real one)."""
        return Registry(self.kind, self.key, self.group, self._validate, self._builtins)

    # registration ------------------------------------------------------------------------

    def validate(self, cls: Any, origin: str) -> None:
        """Raise (``TypeError``) when ``cls`` breaks the contract; ``origin`` names it."""
        self._validate(cls, origin)

    def register(self, cls: type[T]) -> type[T]:
        """Register a plugin class (usable as a decorator); validates the contract now.

        Raises :class:`TypeError` for a class that breaks the contract. A key already taken
        by another class gives a warning and the first registered wins.
        """
        self._validate(cls, class_path(cls))
        with self._lock:
            if self._loaded:
                self._add(cls, class_path(cls), builtin=False)
            elif cls not in self._decorated:
                self._decorated.append(cls)
        return cls

    def _add(self, cls: type[T], origin: str, *, builtin: bool) -> None:
        name = getattr(cls, self.key)
        have = self._entries.get(name)
        if have is cls:
            return
        if have is None:
            self._entries[name] = cls
            return
        if builtin:
            raise ValueError(
                f"{origin}: {self.kind} {self.key} {name!r} is already registered by "
                f"{class_path(have)}"
            )
        if (name, cls) not in self._warned:
            self._warned.add((name, cls))
            warnings.warn(
                f"massarc: {self.kind} plugin {origin} reuses the {self.key} {name!r} of "
                f"{class_path(have)}; the first registered wins",
                stacklevel=4,
            )

    # listing -----------------------------------------------------------------------------

    def available(self) -> Mapping[str, type[T]]:
        """Every registered class by key (read-only; the same mapping on every call)."""
        with self._lock:
            if not self._loaded and not self._loading:
                self._load()
        return self._view

    def get(self, name: str) -> type[T]:
        """The class registered as ``name``; :class:`KeyError` lists the known keys."""
        found = self.available()
        if name not in found:
            known = ", ".join(found) or "(none)"
            raise KeyError(f"unknown {self.kind} {name!r}; expected one of {known}")
        return found[name]

    def _load(self) -> None:
        self._loading = True
        try:
            for cls in self._builtins():
                origin = f"built-in {class_path(cls)}"
                self._validate(cls, origin)
                self._add(cls, origin, builtin=True)
            self._load_entry_points()
            for cls in self._decorated:
                self._add(cls, class_path(cls), builtin=False)
        except BaseException:
            self._entries.clear()  # a broken built-in fails every listing, loudly
            raise
        finally:
            self._loading = False
        self._decorated.clear()
        self._loaded = True

    def _load_entry_points(self) -> None:
        for ep in sorted(entry_points(group=self.group), key=lambda e: (e.name, e.value)):
            origin = f"{ep.name!r} ({ep.value})"
            try:
                cls = ep.load()
                self._validate(cls, f"{self.kind} plugin {origin}")
            except Exception as exc:  # a broken plugin must not break the tool
                warnings.warn(f"massarc: skipping {self.kind} plugin {origin}: {exc}", stacklevel=4)
                continue
            self._add(cls, origin, builtin=False)
