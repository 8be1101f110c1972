"""The package version, read by setuptools and by ``massarc --version``."""

__version__ = "0.1.0"
