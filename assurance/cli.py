"""Command line: ``assurance plan DESIGN.toml`` writes results, figures and a decision memo.

Only the standard library is imported at start-up, so ``assurance --help`` is instant;
numerical modules load when a command runs. A user mistake prints one clear message and
exits with status 2, without a traceback. The output folder is checked and claimed before
anything is computed; an existing one is replaced only with ``--overwrite`` and only when
assurance wrote it and it holds nothing else; the new folder appears only when complete.
SIGTERM, SIGHUP and Ctrl-C stop a run cleanly: the unfinished output is removed. Warnings
print as one plain line, and text from a design file reaches the terminal with control
characters shown escaped.
"""

from __future__ import annotations

import argparse
import os
import shutil
import signal
import sys
import time
import warnings
from dataclasses import replace
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
                          "sample_sizes.csv, design.toml (the design with every key in "
                          "force), design_as_given.toml (a copy of the design file), "
                          "figures/ and memo.html into the output folder.")
    plan.add_argument("design", help="TOML design file")
    _output_options(plan, "<design name>-plan")
    plan.add_argument("--scheduler", metavar="ADDRESS",
                      help="analysis models: spread the simulated trials over the Dask cluster "
                           "at this scheduler address (overrides [simulation] scheduler)")
    plan.add_argument("--workers", type=int, metavar="N",
                      help="analysis models: simulate in N local worker processes "
                           "(overrides [simulation] workers; 0: in this process)")

    for name, (what, written) in _OTHER_KINDS.items():
        other = sub.add_parser(name, help=what, description=f"{what[0].upper()}{what[1:]}; "
                               f"write {written} and memo.html into the output folder.")
        other.add_argument("file", help=f"TOML {name} file")
        _output_options(other, f"<file name>-{name}")
        if name == "portfolio":
            other.add_argument("--scheduler", metavar="ADDRESS",
                               help="spread the portfolio's simulated trials over the Dask "
                                    "cluster at this scheduler address")

    check = sub.add_parser("check", help="read a design file and report problems only")
    check.add_argument("design", help="TOML design file")

    sub.add_parser("versions", help="print versions of Python and the libraries in use")
    return parser


#: The commands beyond one trial: what each does, what it writes, and its Plan-like class.
_OTHER_KINDS = {
    "program": ("plan a phase 2 trial followed by a phase 3 trial that runs after a go",
                "the program's results, the grid over phase 2 sizes and go thresholds, "
                "figures/"),
    "interim": ("predict the final result of a running trial from its interim data",
                "the predictive probabilities, conditional powers, boundaries and their "
                "operating characteristics, figures/"),
    "portfolio": ("probability of success, expected successes and the size worth paying for "
                  "across several trials",
                  "the portfolio tables, the value of each size, figures/"),
}
_OTHER_CLASSES = {"program": ("program_plan", "ProgramPlan"),
                  "interim": ("interim_plan", "InterimPlan"),
                  "portfolio": ("portfolio_plan", "PortfolioPlan")}


def _output_options(command: argparse.ArgumentParser, default: str) -> None:
    """The options every command that writes an output folder takes."""
    command.add_argument("-o", "--out", help=f"output folder (default: {default} in the "
                         "current folder)")
    command.add_argument("--overwrite", action="store_true",
                         help="replace the output folder if it already exists (only a folder "
                         "assurance wrote that holds nothing else)")
    command.add_argument("--svg", action="store_true",
                         help="also write each figure as SVG (PNG only by default)")
    command.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")


class _Stopped(BaseException):
    """Raised by the signal handler so that every cleanup on the way out runs."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


# invisible characters that reorder or hide text on a terminal, besides control characters
_HIDDEN = frozenset("\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068"
                    "\u2069\ufeff")


def _visible(text: str) -> str:
    """``text`` for the terminal: control characters (except line breaks and tabs), line
    separators and direction overrides are shown escaped (``\\x1b``), never sent raw."""
    if text.isprintable():
        return text
    import unicodedata

    return "".join(
        ch if ch in "\n\t" or (ch not in _HIDDEN and unicodedata.category(ch)
                                not in ("Cc", "Zl", "Zp"))
        else ch.encode("unicode_escape").decode("ascii") for ch in text)


def _say(text: str, *, err: bool = False) -> None:
    print(_visible(text), file=sys.stderr if err else sys.stdout, flush=err)


def _plain_warning(message: Warning | str, category: type[Warning], filename: str,
                   lineno: int, file: Any = None, line: str | None = None) -> None:
    """Show a warning as one plain line on stderr, without the source line."""
    _say("assurance: warning: " + " ".join(str(message).split()), err=True)


class _Signals:
    """While active, SIGTERM, SIGHUP and SIGINT raise :class:`_Stopped` (once), unless the
    process was started with them ignored."""

    def __init__(self) -> None:
        self.fired = False
        self.before: dict[int, Any] = {}

    def _handler(self, signum: int, frame: Any) -> None:
        if self.fired:
            return  # the first one is already unwinding; let the cleanup finish
        self.fired = True
        raise _Stopped(signum)

    def __enter__(self) -> _Signals:
        for name in ("SIGTERM", "SIGHUP", "SIGINT"):
            signum = getattr(signal, name, None)
            if signum is None:
                continue
            try:
                if signal.getsignal(signum) in (signal.SIG_IGN, None):
                    continue  # ignored on purpose by whoever started us (nohup, say)
                self.before[signum] = signal.signal(signum, self._handler)
            except (ValueError, OSError):  # not the main thread: leave them alone
                continue
        return self

    def __exit__(self, *exc: object) -> None:
        for signum, handler in self.before.items():
            signal.signal(signum, handler)


def _signal_name(signum: int) -> str:
    try:
        return signal.Signals(signum).name
    except ValueError:
        return f"signal {signum}"


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
    shown = warnings.showwarning
    warnings.showwarning = _plain_warning
    try:
        if args.command == "versions":
            from .versions import show_versions

            print(show_versions())
            return 0
        if args.command == "check":
            return _check(args)
        from ._dask_on_demand import answer_without_importing_dask

        answer_without_importing_dask()  # about 0.5 s less per command; answers unchanged
        with _Signals():
            if args.command in _OTHER_KINDS:
                return _other(args)
            return _plan(args)
    except (KeyboardInterrupt, _Stopped) as stop:
        signum = stop.signum if isinstance(stop, _Stopped) else int(signal.SIGINT)
        written = getattr(stop, "written", None)
        what = (f"the results were already complete in {written}/" if written else
                "the unfinished output was removed and nothing else was changed")
        _say(f"assurance: stopped ({_signal_name(signum)}); {what}.", err=True)
        return 128 + signum
    except ValueError as exc:  # AssuranceInputError and DesignFileError are ValueErrors
        from .errors import AssuranceInputError

        if not isinstance(exc, AssuranceInputError):
            raise
        _say(f"assurance: error: {exc}", err=True)
        return EXIT_USER_ERROR
    finally:
        warnings.showwarning = shown


def _check(args: argparse.Namespace) -> int:
    from .design_file import read_design_file

    spec = read_design_file(args.design)
    _say_notes(spec.notes)
    _say(f"{args.design}: ok - {spec.title}")
    return 0


def _say_notes(notes: tuple[str, ...]) -> None:
    """The reader's warnings about a design (not errors), one per line on stderr."""
    for note in notes:
        _say(f"assurance: note: {note}", err=True)


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
            _say(f"[{time.perf_counter() - self.start:5.1f}s] {text}", err=True)
        elif total < 2:
            return
        elif self.live:
            print(f"\r        {_visible(text)}: {done}/{total}", end="" if done < total else "\n",
                  file=sys.stderr, flush=True)
        elif done == total:
            _say(f"        {text}: {total} chunks done", err=True)


def _plan(args: argparse.Namespace) -> int:
    from .errors import AssuranceInputError

    if args.out is not None and not args.out.strip():
        raise AssuranceInputError(
            f"The --out option must name a folder. Got {args.out!r} instead. Leave --out out "
            "to write <design name>-plan in the current folder.")
    design_path = Path(args.design)
    out = Path(args.out) if args.out is not None else Path(f"{design_path.stem}-plan")
    progress = _Progress(args.quiet)

    from .design_file import read_design_file
    from .planner import Plan
    from .report.output_folder import claim_output_folder, write_outputs
    from .report.plan_figures import figure_workers_started_early

    # checked and held before anything is computed; released (and cleaned) on any way out.
    # The figure workers (forked once the modules above are loaded) load matplotlib
    # meanwhile, on the other cores.
    claim = None
    try:
        with claim_output_folder(out, overwrite=args.overwrite, keep=[design_path]) as claim, \
                figure_workers_started_early():
            progress(f"reading {design_path}")
            spec = read_design_file(design_path)
            if spec.model is None and (args.scheduler is not None or args.workers is not None):
                raise AssuranceInputError(
                    "The --scheduler and --workers options are for analysis models ([endpoint] "
                    f"type = \"model\"); {design_path} describes a built-in endpoint, which "
                    "needs no simulation cluster.")
            if spec.model is not None:  # an analysis model: simulated trials
                from dataclasses import replace as _with

                from .model_plan import ModelPlan

                spec = _with(spec, simulation=_simulation(spec.simulation, args))

                store = out.parent / f".{out.name}.finished-sizes"
                progress("simulating trials (an interrupted run resumes from "
                         f"{store.name})")
                plan = ModelPlan.from_spec(spec, progress=not args.quiet, store=store)
            else:
                plan = Plan.from_spec(spec, progress=progress)
            plan = replace(plan, made_by=_command_line(args))
            _say_notes(plan.source.notes if plan.source is not None else ())
            progress("writing results, figures and memo")
            write_outputs(out, plan, formats=("png", "svg") if args.svg else ("png",),
                          claim=claim)
            if getattr(plan, "store", None) is not None:  # kept in the folder: no longer needed
                shutil.rmtree(plan.store, ignore_errors=True)
        if not args.quiet:
            _say(plan.summary())
            _say(f"\nWritten to {out}/ (memo.html, results.csv, results.nc, sample_sizes.csv, "
                 "figures/,\n  design.toml: every key in force, and design_as_given.toml: the "
                 "file as given; sensitivity and zone tables as CSV when computed)")
        progress("done")
    except (KeyboardInterrupt, _Stopped) as stop:
        if claim is not None and claim.committed:
            stop.written = out  # type: ignore[union-attr]
        raise
    return 0


def _other(args: argparse.Namespace) -> int:
    """``assurance program | interim | portfolio FILE``: read, compute, write the folder."""
    import importlib

    from .errors import AssuranceInputError

    if args.out is not None and not args.out.strip():
        raise AssuranceInputError(
            f"The --out option must name a folder. Got {args.out!r} instead. Leave --out out "
            f"to write <file name>-{args.command} in the current folder.")
    path = Path(args.file)
    out = Path(args.out) if args.out is not None else Path(f"{path.stem}-{args.command}")
    progress = _Progress(args.quiet)
    module, name = _OTHER_CLASSES[args.command]

    from .report.output_folder import claim_output_folder, write_outputs
    from .report.plan_figures import figure_workers_started_early

    claim = None
    try:
        # as for a plan: a figure worker loads matplotlib while the results are computed
        with claim_output_folder(out, overwrite=args.overwrite, keep=[path]) as claim, \
                figure_workers_started_early():
            progress(f"reading {path}")
            kind = getattr(importlib.import_module(f"assurance.{module}"), name)
            options = {}
            if getattr(args, "scheduler", None) is not None:
                options["scheduler"] = _simulation_address(args.scheduler)
            plan = kind.from_file(path, **options)
            plan = replace(plan, made_by=_command_line(args))
            progress("writing results, figures and memo")
            write_outputs(out, plan, formats=("png", "svg") if args.svg else ("png",),
                          claim=claim)
        if not args.quiet:
            _say(plan.summary())
            _say(f"\nWritten to {out}/ (memo.html, the result tables as CSV, figures/ and a "
                 "copy of every input file)")
        progress("done")
    except (KeyboardInterrupt, _Stopped) as stop:
        if claim is not None and claim.committed:
            stop.written = out  # type: ignore[union-attr]
        raise
    return 0


def _simulation_address(text: str) -> str:
    from .errors import AssuranceInputError

    address = text.strip()
    if not address or len(address) > 300 or not address.isprintable():
        raise AssuranceInputError(
            "The --scheduler option must be a Dask scheduler address such as "
            f"tcp://10.0.0.5:8786 (one line, at most 300 characters). Got "
            f"{_visible(text)!r:.80} instead.")
    return address


def _simulation(table: Any, args: argparse.Namespace) -> Any:
    """The [simulation] settings with the command line's --scheduler / --workers in force."""
    from .errors import AssuranceInputError

    changes: dict[str, Any] = {}
    if args.scheduler is not None:
        changes["scheduler"] = _simulation_address(args.scheduler)
    if args.workers is not None:
        if not 0 <= args.workers <= 256:
            raise AssuranceInputError(
                "The --workers option must be a whole number from 0 to 256. Got "
                f"{args.workers} instead.")
        changes["workers"] = args.workers
    return table.model_copy(update=changes) if changes else table


def _command_line(args: argparse.Namespace) -> str:
    """The command as a user would type it again (quoted where needed)."""
    import shlex

    words = ["assurance", args.command, str(getattr(args, "design", None) or args.file)]
    if args.out is not None:
        words += ["--out", args.out]
    words += [flag for flag, on in (("--overwrite", args.overwrite), ("--svg", args.svg),
                                    ("--quiet", args.quiet)) if on]
    if getattr(args, "scheduler", None) is not None:
        words += ["--scheduler", args.scheduler]
    if getattr(args, "workers", None) is not None:
        words += ["--workers", str(args.workers)]
    return " ".join(shlex.quote(_visible(w)) for w in words)


def run(argv: list[str] | None = None) -> None:
    """The console command: :func:`main`, then leave the process at once.

    When :func:`main` returns, every output is written, closed and moved into place, and
    the figure workers have ended; what remains of a normal exit is the interpreter's
    teardown of the libraries loaded (matplotlib, xarray, scipy: about 0.3 s of a 3-4 s
    plan), which changes nothing on disk. Standard output and error are flushed first. An
    unexpected exception still ends the process the usual way, with its traceback.
    """
    status = main(argv)
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (BrokenPipeError, ValueError):  # the reader went away: nothing left to say
        pass
    os._exit(status)


if __name__ == "__main__":  # pragma: no cover
    run()
