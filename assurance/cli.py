"""Command line: ``assurance plan DESIGN.toml`` writes results, figures and a decision memo.

Only the standard library is imported at start-up, so ``assurance --help`` is instant;
numerical modules load when a command runs. A user mistake prints one clear message and
exits with status 2, without a traceback. An existing output folder is never replaced
unless ``--overwrite`` is given, and the new folder appears only when complete.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path
from typing import Any

__all__ = ["main"]

EXIT_USER_ERROR = 2

_DESCRIPTION = """\
Plan a clinical trial when the true effect is uncertain: classical power at an assumed
effect beside assurance (probability of success) under a prior on the effect, the n that
reaches each target, and a go/no-go memo. Figures support, and do not replace, review by a
qualified statistician; the final design follows regulatory guidance and the ethics committee.
"""


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="assurance", description=_DESCRIPTION)
    parser.add_argument("--version", action="store_true", help="print the package version")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    plan = sub.add_parser("plan", help="compute power and assurance and write the memo",
                          description="Read a design file; write results.csv, results.nc, "
                          "sample_sizes.csv, figures/ and memo.html into the output folder.")
    plan.add_argument("design", help="TOML design file")
    plan.add_argument("-o", "--out", help="output folder (default: <design name>-plan next to "
                      "the current directory)")
    plan.add_argument("--overwrite", action="store_true",
                      help="replace the output folder if it already exists")
    plan.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")

    check = sub.add_parser("check", help="read a design file and report problems only")
    check.add_argument("design", help="TOML design file")

    sub.add_parser("versions", help="print versions of Python and the libraries in use")
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    args = _parser().parse_args(argv)
    if args.version:
        from . import __version__

        print(__version__)
        return 0
    if args.command is None:
        _parser().print_help()
        return 0
    try:
        if args.command == "versions":
            from .versions import show_versions

            print(show_versions())
            return 0
        if args.command == "check":
            return _check(args)
        return _plan(args)
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except ValueError as exc:  # AssuranceInputError and DesignFileError are ValueErrors
        from .errors import AssuranceInputError

        if not isinstance(exc, AssuranceInputError):
            raise
        print(f"assurance: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR


def _check(args: argparse.Namespace) -> int:
    from .design_file import read_design_file

    spec = read_design_file(args.design)
    print(f"{args.design}: ok - {spec.design.title}")
    return 0


class _Progress:
    def __init__(self, quiet: bool):
        self.quiet = quiet
        self.start = time.perf_counter()

    def say(self, text: str) -> None:
        if not self.quiet:
            print(f"[{time.perf_counter() - self.start:5.1f}s] {text}", file=sys.stderr,
                  flush=True)

    def chunks(self, label: str):
        live = sys.stderr.isatty()

        def report(done: int, total: int) -> None:
            if self.quiet or total < 2:
                return
            if live:
                print(f"\r        {label}: {done}/{total}", end="" if done < total else "\n",
                      file=sys.stderr, flush=True)
            elif done == total:
                print(f"        {label}: {total} chunks done", file=sys.stderr, flush=True)
        return report


def _plan(args: argparse.Namespace) -> int:
    from .errors import AssuranceInputError

    design_path = Path(args.design)
    out = Path(args.out) if args.out else Path.cwd() / f"{design_path.stem}-plan"
    if out.exists() and not args.overwrite:
        raise AssuranceInputError(
            f"The output folder {str(out)!r} already exists. Choose another with --out, or "
            "pass --overwrite to replace it."
        )
    if out.exists() and not out.is_dir():
        raise AssuranceInputError(f"The output path {str(out)!r} exists and is not a folder.")
    progress = _Progress(args.quiet)
    progress.say(f"reading {design_path}")

    from .design_file import read_design_file

    spec = read_design_file(design_path)
    result = run_plan(spec, progress)

    from .outputs import write_outputs

    progress.say("writing results, figures and memo")
    write_outputs(out, spec, result["dataset"], result["answers"], overwrite=args.overwrite,
                  precision=result["precision"])
    if not args.quiet:
        from .report import memo_text_summary

        print(memo_text_summary(spec.design, result["dataset"], result["answers"]))
        print(f"\nWritten to {out}/ (memo.html, results.csv, results.nc, sample_sizes.csv, "
              "figures/)")
    progress.say("done")
    return 0


def run_plan(spec: Any, progress: _Progress | None = None) -> dict[str, Any]:
    """Solve every target in the design file, then evaluate the size grid."""
    import numpy as np

    from .planning import evaluate, solve_sample_size

    progress = progress or _Progress(True)
    design = spec.design
    answers = []
    for quantity, target in spec.targets.items():
        progress.say(f"solving n for {quantity.replace('_', ' ')} {target:g}")
        answers.append(solve_sample_size(design, target, quantity=quantity, draws=spec.draws,
                                         seed=spec.seed))
    sizes = spec.sizes if spec.sizes is not None else _default_sizes(spec, answers)
    solved = [a.n_total for a in answers if a.reached and a.n_total <= 2 * sizes.max()]
    sizes = np.unique(np.concatenate([sizes, np.array(solved, dtype=int)]))
    progress.say(f"evaluating {sizes.size} sample sizes")
    ds = evaluate(design, sizes, draws=spec.draws, seed=spec.seed,
                  progress=progress.chunks("Monte Carlo"))
    if getattr(spec, "zones", None) is not None:
        import xarray as xr

        from .zones import evaluate_zones

        progress.say("go / consider / stop probabilities")
        zones = evaluate_zones(design, spec.zones, sizes, draws=spec.draws, seed=spec.seed)
        attrs = dict(ds.attrs, zones=zones.attrs["zones"])
        ds = xr.merge([ds, zones], combine_attrs="drop", compat="override", join="outer")
        ds.attrs.update(attrs)
    precision_answers: list[Any] = []
    plan = getattr(spec, "precision", None)
    if plan is not None:
        from .precision import interval_width_curve, solve_precision_n
        from .precision_design import precision_model_for

        progress.say("posterior interval width against n")
        model = precision_model_for(design)
        common = {"coverage": plan.coverage, "interval": plan.interval,
                  "likely_share": plan.likely_share, "seed": spec.seed}
        widths = interval_width_curve(model, ds.n.values, length=plan.length, **common)
        widths = widths.drop_vars(["n_treatment", "n_control"])
        attrs = dict(ds.attrs, precision=f"{plan.coverage:g} {plan.interval.replace('_', '-')}"
                     f" intervals, target length {plan.length:g}; {widths.attrs['method']}")
        ds = ds.assign({name: widths[name] for name in widths.data_vars})
        ds.attrs.update(attrs)
        for criterion in plan.criteria:
            progress.say(f"solving n for precision ({criterion})")
            try:
                precision_answers.append(solve_precision_n(model, length=plan.length,
                                                           criterion=criterion, **common))
            except ValueError as exc:  # e.g. WOC unavailable by simulation: say so
                precision_answers.append(str(exc))
    return {"dataset": ds, "answers": answers, "precision": precision_answers}


def _default_sizes(spec: Any, answers: list[Any]) -> Any:
    """About 50 evenly spaced round sizes up to 1.5 times the largest solved n."""
    import math

    import numpy as np

    from .planning import solve_sample_size

    design = spec.design
    reached = [a.n_total for a in answers if a.reached]
    if not reached:
        fallback = solve_sample_size(design, 0.9, quantity="power")
        reached = [fallback.n_total] if fallback.reached else [1000]
    high = max(1.5 * max(reached), 20.0)
    raw_step = high / 50
    magnitude = 10 ** math.floor(math.log10(raw_step))
    step = next(m * magnitude for m in (1, 2, 5, 10) if m * magnitude >= raw_step)
    step = max(int(step), 1)
    grid = np.arange(step, high + step, step).astype(int)
    return grid[grid >= design.endpoint.smallest_total]


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
