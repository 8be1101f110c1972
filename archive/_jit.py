"""numba, imported only when a compiled kernel is first needed.

Importing numba costs about a third of a second and most of the memory an audit reserves,
so no module of massarc imports it at import time: the compiled kernels live in modules of
their own (``_compiled.py`` beside the code that calls them), imported on first use, and
each is decorated with :func:`kernel`. Compiled machine code is cached on disk by numba
(``cache=True``): beside the module in ``__pycache__``, or, when the package is installed
in a directory this user cannot write, in numba's per-user cache directory
(``NUMBA_CACHE_DIR`` when set). Where neither can be written the kernel is compiled once
per process instead of failing.

:func:`use_numba` is the one switch: numba installed and ``MASSARC_PURE`` not set to 1;
every kernel has a NumPy twin that gives identical numbers.
"""

from __future__ import annotations

import importlib.util
import os
from collections.abc import Callable
from typing import Any

__all__ = ["HAVE_NUMBA", "kernel", "use_numba"]

#: True when numba can be imported (found without importing it).
HAVE_NUMBA = importlib.util.find_spec("numba") is not None


def use_numba() -> bool:
    """True when the compiled path is available and not turned off by ``MASSARC_PURE=1``."""
    return HAVE_NUMBA and os.environ.get("MASSARC_PURE", "") not in ("1", "true", "yes")


def kernel(**options: Any) -> Callable[[Callable[..., Any]], Any]:
    """``numba.njit(cache=True, **options)``, or without the disk cache where numba finds
    no directory it can write (it refuses ``cache=True`` there with a RuntimeError)."""
    import numba

    def wrap(fn: Callable[..., Any]) -> Any:
        try:
            return numba.njit(cache=True, **options)(fn)
        except RuntimeError as exc:
            if "no locator available" not in str(exc):
                raise
            return numba.njit(**options)(fn)

    return wrap
