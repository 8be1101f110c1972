"""The error of the samplers' own arguments (metadata problems raise MetadataError)."""

from __future__ import annotations

__all__ = ["SamplerError"]


class SamplerError(ValueError):
    """An argument of a sampler that cannot be used: the message says what was expected."""
