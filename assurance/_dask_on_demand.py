"""Keep xarray from importing dask in a command that never uses it.

xarray asks "is this a dask array?" every time it builds a variable, and "is a dask
scheduler running?" every time it writes a netCDF file. With dask installed (it is a
dependency, for work on a cluster) both questions import it: ``dask.array`` on the first
Dataset and ``dask.distributed`` on the first netCDF file, together about half a second
of a command that otherwise takes one or two. Yet while ``dask`` has not been imported in
this process, the answers are known without it: no dask array can exist and no scheduler
can be running.

:func:`answer_without_importing_dask` tells xarray so, keeping the answers exact: once
anything imports dask (a model plan on a cluster, a user's own code), xarray's own checks
are used again. It is called by the command line only (a process the package owns), never
on ``import assurance``. It relies on two private parts of xarray (the cache of optional
array modules and the netCDF writers' scheduler check); where they are missing (another
xarray version) it does nothing, and xarray imports dask as before.
"""

from __future__ import annotations

import functools
import importlib.util
import sys
from typing import Any

__all__ = ["answer_without_importing_dask"]


class _DaskWhenLoaded:
    """xarray's record of the optional ``dask`` module, read only once dask is loaded.

    Stands in for ``xarray.namedarray.pycompat.DuckArrayModule("dask")``: ``type`` is the
    empty tuple while ``dask.array`` is not imported (no object can be a dask array then),
    and xarray's own record, built on first need, afterwards.
    """

    def __init__(self, real_record: Any) -> None:
        self._real_record = real_record
        self._real: Any = None

    def _loaded(self) -> Any:
        if self._real is None:
            self._real = self._real_record("dask")
        return self._real

    @property
    def type(self) -> tuple[type, ...]:
        if "dask.array" not in sys.modules:
            return ()
        return self._loaded().type

    @property
    def available(self) -> bool:
        if "dask" not in sys.modules:
            return importlib.util.find_spec("dask") is not None
        return self._loaded().available

    @property
    def module(self) -> Any:
        return self._loaded().module

    @property
    def version(self) -> Any:
        return self._loaded().version


def answer_without_importing_dask() -> bool:
    """Let xarray answer its dask questions without importing dask while it is not loaded.

    Returns True when both of xarray's checks were replaced, False when dask is already
    loaded or this xarray lacks the parts replaced (then nothing changes).

    Examples
    --------
    >>> answer_without_importing_dask() in (True, False)
    True
    """
    if "dask" in sys.modules:
        return False
    try:
        from xarray.backends import locks, writers
        from xarray.namedarray import pycompat, utils
    except ImportError:  # pragma: no cover - another xarray layout
        return False
    cache = getattr(pycompat, "_cached_duck_array_modules", None)
    record = getattr(pycompat, "DuckArrayModule", None)
    askers = [m for m in (locks, writers) if callable(getattr(m, "get_dask_scheduler", None))]
    if not isinstance(cache, dict) or record is None or len(askers) != 2:
        return False  # pragma: no cover - another xarray version
    if not callable(getattr(utils, "is_dask_collection", None)):
        return False  # pragma: no cover - another xarray version
    if "dask" not in cache:
        cache["dask"] = _DaskWhenLoaded(record)
    for module in askers:
        module.get_dask_scheduler = _only_when_loaded(module.get_dask_scheduler, None)
    utils.is_dask_collection = _only_when_loaded(utils.is_dask_collection, False)
    return True


def _only_when_loaded(original: Any, answer: Any) -> Any:
    """``original`` (one of xarray's dask checks), answering ``answer`` while dask is not
    loaded: no dask collection can exist and no dask scheduler can run before that."""
    if getattr(original, "_asks_only_when_loaded", False):
        return original

    @functools.wraps(original)
    def check(*args: Any, **kwargs: Any) -> Any:
        if "dask" not in sys.modules:
            return answer
        return original(*args, **kwargs)

    check._asks_only_when_loaded = True  # type: ignore[attr-defined]
    return check
