"""Any analysis model written in PyMC: prior-predictive assurance, classical power and
posterior interval widths by simulation.

A :class:`GeneralModel` pairs a data simulator (driven by the design prior) with a PyMC
analysis model built on ``pm.Data`` containers. :func:`simulate_general` fits every simulated
trial by a Laplace (normal) approximation at the posterior mode, checks it by NUTS on a
subset, and returns a Dataset over sizes; :func:`solve_general_n` reads the smallest size
reaching a target. PyMC, pytensor, ArviZ and Dask load only when a model is fitted or the
work is spread.

Names load on first use (PEP 562), so importing this package stays light.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

# public name -> module of this package that defines it
_PUBLIC = {
    "GeneralModel": "model",
    "decides": "decide",
    "CompiledModel": "fit",
    "ChunkSpec": "engine",
    "ChunkResult": "engine",
    "run_chunk": "engine",
    "simulate_general": "engine",
    "solve_general_n": "engine",
    "GeneralSizeAnswer": "engine",
}

__all__ = [
    "GeneralModel",
    "decides",
    "CompiledModel",
    "ChunkSpec",
    "ChunkResult",
    "run_chunk",
    "simulate_general",
    "solve_general_n",
    "GeneralSizeAnswer",
]

if TYPE_CHECKING:  # pragma: no cover
    from .decide import decides
    from .engine import (
        ChunkResult,
        ChunkSpec,
        GeneralSizeAnswer,
        run_chunk,
        simulate_general,
        solve_general_n,
    )
    from .fit import CompiledModel
    from .model import GeneralModel


def __getattr__(name: str) -> Any:
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'assurance.general' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
