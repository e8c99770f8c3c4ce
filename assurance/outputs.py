"""Write a plan's results to an output folder, all at once.

Everything is written into a hidden temporary folder beside the destination, which then
takes the destination's name in one rename. An existing folder is replaced only when the
caller asks (``overwrite=True``); if anything fails, the old folder is left as it was.
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import tempfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from .errors import AssuranceInputError

__all__ = ["write_outputs", "write_results_csv", "write_sample_sizes_csv"]


def write_outputs(out: str | Path, spec: Any, ds: Any, answers: Sequence[Any], *,
                  overwrite: bool = False, precision: Sequence[Any] = ()) -> Path:
    """Write results (CSV, netCDF), sample sizes, figures and memo into folder ``out``.

    Parameters
    ----------
    out
        Destination folder; must not exist unless ``overwrite`` is True.
    spec
        The parsed design file (:class:`~assurance.design_file.DesignFile`).
    ds
        Results of :func:`~assurance.evaluate`.
    answers
        :class:`~assurance.SampleSizeAnswer` for each target.
    precision
        :class:`~assurance.precision.PrecisionAnswer` for each precision criterion (or the
        reason a criterion is unavailable).
    overwrite
        Replace an existing folder.

    Returns
    -------
    pathlib.Path
        The folder written.
    """
    from .report import plot_power_and_assurance, plot_prior, save_figure, write_memo

    out = Path(out)
    if out.exists() and not overwrite:
        raise AssuranceInputError(
            f"The output folder {str(out)!r} already exists. Pass overwrite=True (--overwrite "
            "on the command line) to replace it."
        )
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}-", dir=out.parent))
    try:
        write_results_csv(ds, tmp / "results.csv")
        write_sample_sizes_csv(answers, tmp / "sample_sizes.csv")
        ds.to_netcdf(tmp / "results.nc", engine="scipy")
        (tmp / "design.json").write_text(json.dumps(json.loads(ds.attrs["design"]), indent=2))
        figures = tmp / "figures"
        figures.mkdir()
        rendered = {}
        for name, draw in (("prior", lambda: plot_prior(spec.design)),
                           ("power_and_assurance",
                            lambda: plot_power_and_assurance(ds, answers=answers))):
            fig = draw().figure
            png, _svg = save_figure(fig, figures / name)
            rendered[name] = png.read_bytes()
        origin = getattr(spec, "prior_origin", None)
        if type(origin).__name__ == "PriorFit":
            from .elicitation import plot_fit

            png, _svg = save_figure(plot_fit(origin).figure, figures / "prior_fit")
            rendered["prior_fit"] = png.read_bytes()
        if "width_mean" in ds:
            from .report.figures import plot_interval_width

            png, _svg = save_figure(plot_interval_width(ds, precision).figure,
                                    figures / "interval_width")
            rendered["interval_width"] = png.read_bytes()
        write_memo(spec.design, ds, answers, tmp / "memo.html", rendered=rendered,
                   prior_origin=origin, precision=precision)
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
