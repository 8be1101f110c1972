"""The built-in checks. Importing this package registers them, in report order.

The checks of this package register like plugins do. The basic checks are imported
first; the statistical ones after them, defensively: a module that is missing or fails to
import is skipped with a warning, so that the others stay available.
"""

from __future__ import annotations

import importlib
import warnings

__all__ = ["BUILTIN_MODULES"]

#: The basic checks, in report order (an import error here is a bug: it propagates).
_BASIC = ("schema", "integrity", "time_order", "nonnegative", "conservation")
#: The statistical checks, imported defensively.
_OPTIONAL = ("steady_state", "boundary", "stationary_law")

#: Fully qualified names of the modules that registered checks.
BUILTIN_MODULES: list[str] = []

for _name in _BASIC:
    BUILTIN_MODULES.append(importlib.import_module(f"{__name__}.{_name}").__name__)

for _name in _OPTIONAL:
    try:
        BUILTIN_MODULES.append(importlib.import_module(f"{__name__}.{_name}").__name__)
    except ModuleNotFoundError as _exc:
        if _exc.name != f"{__name__}.{_name}":  # the module exists but lacks a dependency
            warnings.warn(f"massarc: check module {_name!r} not loaded: {_exc}", stacklevel=2)
    except Exception as _exc:  # a broken built-in must not take the others down
        warnings.warn(f"massarc: check module {_name!r} not loaded: {_exc}", stacklevel=2)
