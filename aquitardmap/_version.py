"""The installed package's version (``0.0.0+source`` when run from an uninstalled tree)."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("aquitardmap")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+source"
