"""The installed version, read from the package metadata (no import of the package façade)."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("reachgate")
except PackageNotFoundError:  # running from a source tree without installing
    __version__ = "0.0.0+source"
