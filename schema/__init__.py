"""massarc.schema: the ground floor. Metadata models, archive header, the names of the
on-disk specification, the package version, and the exact laws a declared model implies.
Imports nothing else of massarc.

Names are resolved on first use (PEP 562), so that ``massarc.schema.version`` can be read
without importing pydantic.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from .errors import MetadataError, validation_problems
    from .header import ArchiveHeader, NewerFormatWarning, WriteState, parse_header
    from .load import (
        apply_overrides,
        load_json,
        load_metadata,
        parse_metadata,
        read_metadata_file,
    )
    from .models import (
        FAMILIES,
        CMAMModel,
        CustomModel,
        InitialCondition,
        Lattice,
        OpenRates,
        RunInfo,
        RunMeta,
        Simulator,
        ZRPModel,
    )
    from .spec import ARCHIVE_VERSION, ATTRIBUTE_KEY, RUN_KIND, mass_dimensions
    from .sweep import SweepPoint, sweep_point

#: public name -> module of this package that defines it
_HOME = {
    "ARCHIVE_VERSION": "spec",
    "ATTRIBUTE_KEY": "spec",
    "RUN_KIND": "spec",
    "mass_dimensions": "spec",
    "MetadataError": "errors",
    "validation_problems": "errors",
    "ArchiveHeader": "header",
    "NewerFormatWarning": "header",
    "WriteState": "header",
    "parse_header": "header",
    "apply_overrides": "load",
    "load_json": "load",
    "load_metadata": "load",
    "parse_metadata": "load",
    "read_metadata_file": "load",
    "FAMILIES": "models",
    "CMAMModel": "models",
    "CustomModel": "models",
    "InitialCondition": "models",
    "Lattice": "models",
    "OpenRates": "models",
    "RunInfo": "models",
    "RunMeta": "models",
    "Simulator": "models",
    "ZRPModel": "models",
    "json_schema": "jsonschema",
    "SweepPoint": "sweep",
    "sweep_point": "sweep",
}

__all__ = [
    "ARCHIVE_VERSION",
    "ATTRIBUTE_KEY",
    "FAMILIES",
    "RUN_KIND",
    "ArchiveHeader",
    "CMAMModel",
    "CustomModel",
    "InitialCondition",
    "Lattice",
    "MetadataError",
    "NewerFormatWarning",
    "OpenRates",
    "RunInfo",
    "RunMeta",
    "Simulator",
    "SweepPoint",
    "WriteState",
    "ZRPModel",
    "apply_overrides",
    "json_schema",
    "load_json",
    "load_metadata",
    "mass_dimensions",
    "parse_header",
    "parse_metadata",
    "read_metadata_file",
    "sweep_point",
    "validation_problems",
]


def __getattr__(name: str) -> Any:
    module = _HOME.get(name)
    if module is None:
        raise AttributeError(f"module 'massarc.schema' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
