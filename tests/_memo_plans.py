"""Plans of every case study on coarse size grids, made once per test session.

Shared by ``test_memo.py`` and ``test_memo_browser.py``. Each plan is read from the case
study's design file exactly as ``assurance plan`` reads it, except that the sizes are a
coarse grid (five sizes across the file's range) and Monte Carlo uses fewer draws, to keep
the tests fast; the solved sizes and the planned size are still evaluated exactly.
"""

from __future__ import annotations

import functools
from dataclasses import replace
from pathlib import Path

import numpy as np

import assurance as asr

ROOT = Path(__file__).resolve().parents[1]
CASE_STUDIES = sorted(p.parent.name for p in (ROOT / "case_studies").glob("*/design.toml"))
DRAWS = 4000


@functools.cache
def case_plan(name: str) -> asr.Plan:
    from assurance.design_file import read_design_file
    from assurance.planner import DesignSource

    path = ROOT / "case_studies" / name / "design.toml"
    spec = read_design_file(path)
    sizes = None
    if spec.sizes is not None:
        full = np.asarray(spec.sizes)
        sizes = np.unique(np.linspace(full.min(), full.max(), 5).round().astype(int))
    made = asr.plan(spec.design, targets=spec.targets, sizes=sizes, zones=spec.zones,
                    precision=spec.precision, draws=min(spec.draws, DRAWS), seed=spec.seed,
                    prior_origin=spec.prior_origin, planned=spec.planned,
                    sensitivity=spec.sensitivity or False)
    return replace(made, source=DesignSource(path, spec.content, spec.record, spec.notes),
                   made_by=f"tests: case study {name}")
