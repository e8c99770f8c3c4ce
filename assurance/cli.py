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
                          "sample_sizes.csv, design.toml (the design with every key in "
                          "force), design_as_given.toml (a copy of the design file), "
                          "figures/ and memo.html into the output folder.")
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
    _say_notes(spec.notes)
    print(f"{args.design}: ok - {spec.design.title}")
    return 0


def _say_notes(notes: tuple[str, ...]) -> None:
    """The reader's warnings about a design (not errors), one per line on stderr."""
    for note in notes:
        print(f"assurance: note: {note}", file=sys.stderr)


class _Progress:
    """Progress lines on stderr, with the seconds since the start.

    Called as ``progress(text)`` for a step and ``progress(label, done, total)`` for chunks
    of a long step (a live counter on a terminal, one line at the end otherwise).
    """

    def __init__(self, quiet: bool):
        self.quiet = quiet
        self.start = time.perf_counter()
        self.live = sys.stderr.isatty()

    def __call__(self, text: str, done: int | None = None, total: int | None = None) -> None:
        if self.quiet:
            return
        if done is None or total is None:
            print(f"[{time.perf_counter() - self.start:5.1f}s] {text}", file=sys.stderr,
                  flush=True)
        elif total < 2:
            return
        elif self.live:
            print(f"\r        {text}: {done}/{total}", end="" if done < total else "\n",
                  file=sys.stderr, flush=True)
        elif done == total:
            print(f"        {text}: {total} chunks done", file=sys.stderr, flush=True)


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
    progress(f"reading {design_path}")

    from .planner import Plan

    plan = Plan.from_file(design_path, progress=progress)
    _say_notes(plan.source.notes if plan.source is not None else ())
    progress("writing results, figures and memo")
    plan.write(out, overwrite=args.overwrite)
    if not args.quiet:
        print(plan.summary())
        print(f"\nWritten to {out}/ (memo.html, results.csv, results.nc, sample_sizes.csv, "
              "figures/,\n  design.toml: every key in force, and design_as_given.toml: the "
              "file as given)")
    progress("done")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
