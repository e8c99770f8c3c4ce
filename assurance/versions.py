"""Versions of Python, the platform and the numerical libraries, for bug reports and memos."""

from __future__ import annotations

import platform
import sys
from importlib import metadata

__all__ = ["show_versions", "version_table"]

_PACKAGES = ("assurance", "numpy", "scipy", "xarray", "matplotlib", "pymc", "arviz")


def version_table() -> dict[str, str]:
    """Installed versions as ``{name: version}`` (``"not installed"`` where missing).

    Examples
    --------
    >>> "numpy" in version_table()
    True
    """
    table = {"python": sys.version.split()[0], "platform": platform.platform()}
    for name in _PACKAGES:
        try:
            table[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            table[name] = "not installed"
    return table


def show_versions() -> str:
    """Versions as printable lines (also written into every memo).

    Examples
    --------
    >>> "python" in show_versions()
    True
    """
    return "\n".join(f"{k:<11} {v}" for k, v in version_table().items())
