"""The package version, read from the installed distribution's metadata."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("sigtune")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+unknown"
