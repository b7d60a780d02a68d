"""lowdim: which dimensionality-reduction method to trust for your data, with evidence."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("lowdim")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
