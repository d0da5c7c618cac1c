"""kinroots: roots of the linear Vlasov dispersion relation of multi-species plasmas."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("kinroots")
except PackageNotFoundError:  # running from a source tree without installation
    __version__ = "0+unknown"

__all__ = ["__version__"]
