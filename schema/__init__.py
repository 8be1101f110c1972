"""massarc.schema: the ground floor. Metadata models, archive header, format constants,
and the exact laws a declared model implies. Imports nothing else of massarc."""

from .errors import MetadataError, describe_validation_error
from .format import ATTRIBUTE_KEY, FORMAT_VERSION, RUN_FORMAT, mass_dimensions
from .header import ArchiveHeader, NewerFormatWarning, WriteState, parse_header
from .load import apply_overrides, load_metadata, parse_metadata, read_metadata_file
from .models import (
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

__all__ = [
    "ATTRIBUTE_KEY",
    "FORMAT_VERSION",
    "RUN_FORMAT",
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
    "WriteState",
    "ZRPModel",
    "apply_overrides",
    "describe_validation_error",
    "json_schema",
    "load_metadata",
    "mass_dimensions",
    "parse_header",
    "parse_metadata",
    "read_metadata_file",
]


def json_schema(which: str = "metadata") -> dict:
    """The JSON Schema of the metadata file (``"metadata"``) or archive header (``"header"``)."""
    model = {"metadata": RunMeta, "header": ArchiveHeader}.get(which)
    if model is None:
        raise ValueError(f"expected 'metadata' or 'header', got {which!r}")
    schema = model.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["$id"] = f"https://massarc.invalid/schema/{which}-v{FORMAT_VERSION}.json"
    return schema
