"""Write a plan's results to an output folder, all at once.

Everything is written into a hidden temporary folder beside the destination, which then
takes the destination's name in one rename. An existing folder is replaced only when the
caller asks (``overwrite=True``); if anything fails, the old folder is left as it was.
"""

from __future__ import annotations

import csv
import os
import shutil
import tempfile
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import AssuranceInputError

if TYPE_CHECKING:  # pragma: no cover
    from ..planner import Plan

__all__ = ["write_outputs", "write_results_csv", "write_sample_sizes_csv"]


def write_outputs(out: str | Path, plan: Plan, *, overwrite: bool = False) -> Path:
    """Write a plan's results (CSV, netCDF), sample sizes, figures and memo into ``out``.

    The folder holds ``results.csv``, ``results.nc``, ``sample_sizes.csv``, ``design.toml``
    (the normalised design: every key in force, in the design file's names, which
    ``assurance plan`` reads back to the same numbers), ``figures/`` (PNG and SVG of each of
    :meth:`Plan.figures <assurance.Plan.figures>`) and ``memo.html``; when the plan was read
    from a design file, also ``design_as_given.toml``, a byte-for-byte copy of that file.

    Parameters
    ----------
    out
        Destination folder; must not exist unless ``overwrite`` is True.
    plan
        The computed plan (:class:`~assurance.Plan`).
    overwrite
        Replace an existing folder.

    Returns
    -------
    pathlib.Path
        The folder written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> p = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200])
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     written = write_outputs(pathlib.Path(folder) / "plan", p)
    ...     print(sorted(f.name for f in written.iterdir()))
    ['design.toml', 'figures', 'memo.html', 'results.csv', 'results.nc', 'sample_sizes.csv']
    """
    from . import save_figure, write_memo

    out = Path(out)
    if out.exists() and not overwrite:
        raise AssuranceInputError(
            f"The output folder {str(out)!r} already exists. Pass overwrite=True (--overwrite "
            "on the command line) to replace it."
        )
    if out.exists() and not out.is_dir():
        raise AssuranceInputError(
            f"The output path {str(out)!r} exists and is not a folder; it is left alone.")
    ds, answers = plan.results, plan.sample_sizes
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}-", dir=out.parent))
    try:
        write_results_csv(ds, tmp / "results.csv")
        write_sample_sizes_csv(answers, tmp / "sample_sizes.csv")
        record = plan.design_record()
        saved = ds.copy()
        if record is not None:  # the design in the file's own names travels with the results
            saved.attrs["design_toml"] = record
        saved.to_netcdf(tmp / "results.nc", engine="scipy")
        if record is not None:
            (tmp / "design.toml").write_text(record, encoding="utf-8")
        if plan.source is not None:
            (tmp / "design_as_given.toml").write_bytes(plan.source.content)
        figures = tmp / "figures"
        figures.mkdir()
        rendered = {}
        for name, fig in plan.figures().items():
            png, _svg = save_figure(fig, figures / name)
            rendered[name] = png.read_bytes()
        write_memo(plan.design, ds, answers, tmp / "memo.html", rendered=rendered,
                   prior_origin=plan.prior_origin, precision=plan.precision,
                   design_record=record)
        os.chmod(tmp, 0o755)
        _swap_into_place(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out


def _swap_into_place(tmp: Path, out: Path) -> None:
    if not out.exists():
        os.replace(tmp, out)
        return
    backup = Path(tempfile.mkdtemp(prefix=f".{out.name}-old-", dir=out.parent))
    backup.rmdir()
    os.replace(out, backup)
    try:
        os.replace(tmp, out)
    except BaseException:
        os.replace(backup, out)
        raise
    shutil.rmtree(backup, ignore_errors=True)


def write_results_csv(ds: Any, path: str | Path) -> None:
    """One row per total sample size: arm sizes, power, assurance and its decomposition.

    Further per-size coordinates of the endpoint (expected events, say) follow the arm
    sizes; power at each extra effect is a column ``power_at_<effect>``.
    """
    per_n = [name for name, var in ds.data_vars.items() if var.dims == ("n",)]
    extra = [name for name, var in ds.coords.items()
             if var.dims == ("n",) and name not in ("n", "n_treatment", "n_control")]
    effects = [float(e) for e in ds.effect.values]
    header = ["n", "n_treatment", "n_control", *extra, *per_n] + \
        [f"power_at_{e:g}" for e in effects]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        for i in range(ds.sizes["n"]):
            row = [int(ds.n[i]), int(ds.n_treatment[i]), int(ds.n_control[i])]
            row += [_fmt(ds[name].values[i]) for name in extra]
            row += [_fmt(ds[name].values[i]) for name in per_n]
            row += [_fmt(ds.power_curve.values[j, i]) for j in range(len(effects))]
            writer.writerow(row)


def write_sample_sizes_csv(answers: Sequence[Any], path: str | Path) -> None:
    """One row per target: whether it is reached, the sizes, the value achieved, the ceiling."""
    fields = ["quantity", "target", "reached", "n_total", "n_treatment", "n_control",
              "achieved", "achieved_mcse", "ceiling", "message"]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=fields)
        writer.writeheader()
        for answer in answers:
            row = answer.to_dict()
            writer.writerow({k: "" if row[k] is None else row[k] for k in fields})


def _fmt(value: Any) -> str:
    return f"{float(value):.6g}"
