"""The package version, read by setuptools, by ``massarc --version`` and by every layer
that records which massarc wrote something (it lives on the ground floor for that)."""

__version__ = "0.1.0"
