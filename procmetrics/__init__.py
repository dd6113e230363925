"""procmetrics: mine a git history and measure its development process honestly.

Pipeline: :mod:`procmetrics.mine` -> :mod:`procmetrics.store` ->
:mod:`procmetrics.analyse` -> :mod:`procmetrics.report`.
"""
from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("procmetrics")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+source"

__all__ = ["__version__"]
