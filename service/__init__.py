"""Windvane: a REST forecasting microservice."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("windvane")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+source"
