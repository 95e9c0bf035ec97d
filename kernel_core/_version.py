"""The installed version of levelwise."""

__version__ = "0.2.0"
