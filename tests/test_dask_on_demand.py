"""The command line keeps xarray from importing dask, without changing xarray's answers.

Each check runs in a fresh interpreter (the test process has long loaded dask), and compares
against xarray's own behaviour (the reference: xarray with dask, as documented by xarray:
a Dataset built on a dask array is chunked and lazy; one built on numpy is not).
"""

from __future__ import annotations

import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

CASE = Path(__file__).resolve().parents[1] / "case_studies" / "knee_pain" / "design.toml"


def _run(code: str) -> str:
    done = subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return done.stdout.strip()


def test_numpy_datasets_and_netcdf_files_do_not_load_dask(tmp_path):
    out = _run(f"""
        import sys
        import numpy as np, xarray as xr
        from assurance._dask_on_demand import answer_without_importing_dask
        print(answer_without_importing_dask())
        ds = xr.Dataset({{"a": ("n", np.arange(5.0))}}, coords={{"n": np.arange(5)}})
        ds = (ds * 2).sel(n=slice(1, 3))
        ds.to_netcdf({str(tmp_path / "x.nc")!r}, engine="scipy")
        back = xr.open_dataset({str(tmp_path / "x.nc")!r}, engine="scipy").load()
        print(back.identical(ds), ds.chunks == {{}}, "dask" in sys.modules)
    """)
    assert out.splitlines() == ["True", "True True False"]


def test_dask_arrays_are_still_recognised_once_dask_is_loaded(tmp_path):
    pytest.importorskip("dask.array")
    out = _run(f"""
        import numpy as np, xarray as xr
        from assurance._dask_on_demand import answer_without_importing_dask
        answer_without_importing_dask()
        xr.Dataset({{"a": ("n", np.arange(4.0))}})  # xarray's checks run before dask loads
        import dask.array as da
        ds = xr.Dataset({{"a": ("n", da.arange(6.0, chunks=3))}})
        lazy = ds["a"].variable._data
        print(type(lazy).__module__.startswith("dask"), dict(ds.chunks))
        ds.to_netcdf({str(tmp_path / "y.nc")!r}, engine="scipy")
        print(float(xr.open_dataset({str(tmp_path / "y.nc")!r}, engine="scipy")["a"].sum()))
    """)
    assert out.splitlines() == ["True {'n': (3, 3)}", "15.0"]


def test_the_command_line_writes_a_plan_without_loading_dask(tmp_path):
    out = _run(f"""
        import sys
        from assurance.cli import main
        code = main(["plan", {str(CASE)!r}, "--out",
                     {str(tmp_path / "out")!r}, "--quiet"])
        print(code, "dask" in sys.modules, "scipy.stats" in sys.modules,
              "scipy.optimize" in sys.modules)
    """)
    # nor scipy.stats (two t quantiles) or scipy.optimize (one root in the sensitivity
    # analysis): together about a second of importing for a closed-form plan
    assert out == "0 False False False"


@pytest.mark.parametrize("case", ["event_driven", "weekly_injection", "response_rate"])
def test_closed_form_and_exact_plans_of_other_endpoints_load_neither_scipy_stats_nor_optimize(
        case):
    # a time-to-event plan (normal quantiles, one event-time root), a plan with an uncertain
    # SD (the inverse gamma's functions) and an exact binary plan (the beta that gives the
    # sensitivity map's mean and SD, closed form on the difference scale)
    out = _run(f"""
        import sys
        from assurance.design_file import read_design_file
        from assurance.planner import Plan
        Plan.from_spec(read_design_file({str(CASE.parents[1] / case / "design.toml")!r}))
        print("scipy.stats" in sys.modules, "scipy.optimize" in sys.modules)
    """)
    assert out == "False False"
