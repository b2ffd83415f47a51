"""The version of the installed loschmidt, in one place (results, manifests and the package read it)."""

from __future__ import annotations

from . import _core

try:
    from importlib.metadata import PackageNotFoundError, version as _version

    __version__ = _version("loschmidt")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = getattr(_core, "__version__", "0+unknown")
