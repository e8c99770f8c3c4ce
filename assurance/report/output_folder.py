"""Write a plan's results to an output folder, all at once, never over anything a user owns.

How a folder is written:

1. **Checked first.** Before anything is computed or written, the destination is checked:
   a path through an existing file, a folder that cannot be written, the current folder, a
   folder holding the design file, a symbolic link, or a folder holding anything this
   package did not write is refused with a message saying why and what to do.
2. **Claimed.** A hidden temporary folder ``.<name>.assurance-tmp`` is made beside the
   destination, in one step that fails if another run holds it; the running process keeps
   a lock on its ``owner`` file (which records its process id and host). A second run
   into the same destination stops at once with a clear message.
3. **Written** into that temporary folder, then moved into place in one rename. Every
   output folder holds a marker file, :data:`MARKER`, listing the files written.
4. **Replaced only when safe.** An existing folder is replaced only when the caller asks
   (``overwrite=True``) and it carries the marker and holds nothing but the files listed
   there. If anything fails, the old folder is left as it was.

Temporary folders of runs that were killed (their lock is gone) are swept away by the next
run into the same parent folder; a previous output moved aside by a run killed in the middle
of the final swap is put back first.
"""

from __future__ import annotations

import contextlib
import csv
import hashlib
import os
import shutil
import socket
import tempfile
import time
from collections.abc import Iterable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import AssuranceInputError

if TYPE_CHECKING:  # pragma: no cover
    from ..planner import Plan

__all__ = ["MARKER", "FIGURE_FORMATS", "OutputClaim", "claim_output_folder", "write_outputs",
           "write_results_csv", "write_sample_sizes_csv", "write_sensitivity_csv",
           "write_long_csv"]

#: Name of the marker file in every output folder: the list of files the package wrote.
MARKER = ".assurance-output"
#: Figure formats an output folder can hold.
FIGURE_FORMATS = ("png", "svg")

_MARKER_HEAD = "# assurance output folder"
_TMP_SUFFIX = ".assurance-tmp"
_OWNER = "owner"
_OWNER_HEAD = "assurance temporary folder"
#: Age in seconds after which a temporary folder whose owner cannot be checked (no lock
#: support, another host, no owner record) counts as left behind.
STALE_AFTER = 3600.0


# ------------------------------------------------------------------------------------------
# the marker
# ------------------------------------------------------------------------------------------
def _marker_text(files: Iterable[str]) -> str:
    lines = [_MARKER_HEAD,
             "# Written by assurance. A later run with --overwrite (overwrite=True) replaces",
             "# this folder only while it holds nothing but the files listed below. To keep",
             "# the folder from ever being replaced, delete this file or add a file of your own.",
             *sorted(files)]
    return "\n".join(lines) + "\n"


def _marker_files(folder: Path) -> set[str] | None:
    """The files listed in ``folder``'s marker, or None when it has no valid marker."""
    marker = folder / MARKER
    if marker.is_symlink() or not marker.is_file():
        return None
    try:
        lines = marker.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return None
    if not lines or lines[0] != _MARKER_HEAD:
        return None
    return {line for line in lines[1:] if line and not line.startswith("#")}


def _foreign_entries(folder: Path, listed: set[str]) -> list[str]:
    """Entries of ``folder`` (recursively) that are not listed files or their folders."""
    listed = {name.rstrip("/") for name in listed}
    allowed = {MARKER, *listed}
    for name in listed:
        parts = name.split("/")
        allowed.update("/".join(parts[:k]) for k in range(1, len(parts)))
    foreign = []
    for root, dirs, files in os.walk(folder, followlinks=False):
        rel = Path(root).relative_to(folder)
        for name in sorted(dirs + files):
            path = (rel / name).as_posix()
            if path not in allowed:
                foreign.append(path + ("/" if name in dirs else ""))
        dirs[:] = [d for d in dirs if (rel / d).as_posix() in allowed
                   and not (Path(root) / d).is_symlink()]
    return foreign


def _within(inner: str | os.PathLike[str], outer: str | os.PathLike[str]) -> bool:
    """Whether ``inner`` is ``outer`` or lies inside it (symbolic links resolved)."""
    a, b = Path(os.path.realpath(inner)), Path(os.path.realpath(outer))
    return a == b or b in a.parents


def _list_names(names: Sequence[str], limit: int = 4) -> str:
    shown = ", ".join(repr(n) for n in names[:limit])
    return shown + (f" and {len(names) - limit} more" if len(names) > limit else "")


# ------------------------------------------------------------------------------------------
# checks made before anything is computed
# ------------------------------------------------------------------------------------------
def _why_not_replaceable(out: Path, keep: Sequence[Path]) -> str | None:
    """Why the existing ``out`` must not be replaced, or None when it may be."""
    if out.is_symlink():
        return "is a symbolic link"
    if not out.is_dir():
        return "is a file, not a folder"
    try:
        here = Path.cwd()
    except OSError:
        here = None
    if here is not None and _within(here, out):
        return "is the current folder" if _within(out, here) else "holds the current folder"
    for path in keep:
        if _within(path, out):
            return f"holds the design file {str(path)!r}"
    if not any(out.iterdir()):
        return None  # an empty folder: nothing in it can be lost
    listed = _marker_files(out)
    if listed is None:
        return (f"was not written by assurance (it has no {MARKER} file listing the files "
                "written)")
    foreign = _foreign_entries(out, listed)
    if foreign:
        return f"holds files assurance did not write: {_list_names(foreign)}"
    return None


def _shown(path: Path, given: Path | None) -> str:
    """``path`` as the user wrote it, when ``given`` (the path as written) leads to it."""
    return str(path) if given is None else str(given)


def _check_destination(out: Path, overwrite: bool, keep: Sequence[Path],
                       given: Path | None = None) -> None:
    """Raise AssuranceInputError when ``out`` cannot be written (or replaced); change nothing.

    ``out`` is absolute; ``given`` is the same path as the caller wrote it, for messages.
    """
    shown = _shown(out, given)
    if out.parent == out or out.name in ("", ".", ".."):
        raise AssuranceInputError(
            f"The output folder {shown!r} is the root of the file system; choose a new "
            "folder for the results.")
    if out.name.endswith(_TMP_SUFFIX) or out.name == MARKER:
        raise AssuranceInputError(
            f"The output folder {shown!r} has a name assurance keeps for its own files (ending "
            f"in {_TMP_SUFFIX!r}, or {MARKER!r}); choose another name.")
    if os.path.lexists(out):
        reason = _why_not_replaceable(out, keep)
        if reason is not None:
            raise AssuranceInputError(
                f"The output folder {shown!r} already exists and {reason}, so it is never "
                "replaced. Choose a new folder for the results (--out on the command line), "
                "or move or delete this one yourself.")
        if not overwrite:
            raise AssuranceInputError(
                f"The output folder {shown!r} already exists. Pass overwrite=True "
                "(--overwrite on the command line) to replace it, or choose another folder.")
    # the nearest folder that exists must be a folder we may write into
    ancestor, written = out.parent, None if given is None else given.parent
    while not os.path.lexists(ancestor) and ancestor.parent != ancestor:
        ancestor = ancestor.parent
        written = None if written is None or written == written.parent else written.parent
    where = _shown(ancestor, written if written is not None and str(written) != "." else None)
    if not ancestor.is_dir():
        raise AssuranceInputError(
            f"The output folder {shown!r} cannot be made: {where!r} is a file, not a "
            "folder. Choose a folder path that does not pass through a file.")
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise AssuranceInputError(
            f"The output folder {shown!r} cannot be written: there is no permission to write "
            f"in {where!r}. Choose a folder you can write to.")


# ------------------------------------------------------------------------------------------
# temporary folders: claim, owner lock, sweep
# ------------------------------------------------------------------------------------------
def _tmp_name(name: str) -> str:
    stem = name if len(name) <= 180 else \
        f"{name[:160]}-{hashlib.sha256(name.encode('utf-8', 'surrogateescape')).hexdigest()[:12]}"
    return f".{stem}{_TMP_SUFFIX}"


def _lock(fd: int, blocking: bool) -> bool | None:
    """Take an exclusive lock on ``fd``: True if taken, False if held elsewhere, None if
    locks are not supported here."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not POSIX
        return None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | (0 if blocking else fcntl.LOCK_NB))
    except BlockingIOError:
        return False
    except OSError:  # e.g. a network file system without locks
        return None
    return True


def _read_owner(folder: Path) -> dict[str, str]:
    try:
        lines = (folder / _OWNER).read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return {}
    if not lines or lines[0] != _OWNER_HEAD:
        return {}
    return dict(line.split(" = ", 1) for line in lines[1:] if " = " in line)


def _holder(folder: Path) -> str:
    """Who holds a temporary folder, in words, for a message."""
    info = _read_owner(folder)
    if not info:
        return "another assurance run"
    when = ""
    with contextlib.suppress(ValueError, OverflowError, OSError):
        when = time.strftime(", started %Y-%m-%d %H:%M:%S",
                             time.localtime(float(info.get("created", ""))))
    host = info.get("host", "")
    where = "" if host == socket.gethostname() else f" on {host}"
    return f"another assurance run (process {info.get('pid', '?')}{where}{when})"


def _restore_aside(folder: Path, parent: Path, name: str) -> None:
    """Put back a previous output moved aside into ``folder/old`` by a swap that was cut off."""
    old = folder / "old"
    if name and "/" not in name and old.is_dir() and not old.is_symlink() and \
            not os.path.lexists(parent / name):
        with contextlib.suppress(OSError):
            os.rename(old, parent / name)


def _sweep_one(folder: Path, parent: Path) -> None:
    """Remove ``folder`` if it is a temporary folder of this package left behind."""
    owner = folder / _OWNER
    try:
        fd = os.open(owner, os.O_RDONLY)
    except FileNotFoundError:
        # an empty folder of ours whose run died between making it and writing its owner
        with contextlib.suppress(OSError):
            if time.time() - folder.lstat().st_mtime > 60:
                folder.rmdir()  # removes nothing but an empty folder
        return
    except OSError:
        return
    try:
        taken = _lock(fd, blocking=False)
        if taken is False:
            return  # its run is alive
        try:  # the folder must still hold the very file just locked
            stat = os.fstat(fd)
            if not os.path.samestat(stat, os.stat(owner)):
                return
        except OSError:
            return
        age = time.time() - stat.st_mtime
        if taken is None and age < STALE_AFTER:
            return  # no locks here to tell: only old folders go
        info = _read_owner(folder)
        if not info:  # a run that died before writing its record, or not ours at all
            if stat.st_size != 0 or age < 60:
                return
            with contextlib.suppress(OSError):
                names = {p.name for p in folder.iterdir()}
                if names <= {_OWNER, "new"} and not any((folder / "new").glob("*")):
                    shutil.rmtree(folder, ignore_errors=True)
            return
        _restore_aside(folder, parent, info.get("out", ""))
        shutil.rmtree(folder, ignore_errors=True)
    finally:
        os.close(fd)


def _sweep(parent: Path) -> None:
    """Remove this package's temporary folders in ``parent`` whose runs have ended."""
    try:
        entries = list(os.scandir(parent))
    except OSError:
        return
    for entry in entries:
        if entry.name.startswith(".") and entry.name.endswith(_TMP_SUFFIX) and \
                entry.is_dir(follow_symlinks=False):
            _sweep_one(Path(entry.path), parent)


class OutputClaim:
    """An output folder checked and held by this process until its results are in place.

    Made by :func:`claim_output_folder`; use it as a context manager, or call
    :meth:`release` when done. Files are written into :attr:`staging`; :meth:`commit`
    moves them into place.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     out = pathlib.Path(folder) / "plan"
    ...     with claim_output_folder(out) as claim:
    ...         _ = (claim.staging / "notes.txt").write_text("hello", encoding="utf-8")
    ...         _ = claim.commit()
    ...     print(sorted(p.name for p in out.iterdir()))
    ['.assurance-output', 'notes.txt']
    """

    def __init__(self, out: Path, overwrite: bool, keep: Sequence[Path],
                 given: Path | None = None) -> None:
        self.out = out
        self.given = given
        self.shown = _shown(out, given)
        self.overwrite = overwrite
        self.keep = tuple(keep)
        self.committed = False
        self._fd: int | None = None
        self._made: list[Path] = []
        self._folder: Path | None = None
        if out.parent.is_dir():
            _sweep(out.parent)  # first, so a previous output cut off in a swap is back
        _check_destination(out, overwrite, self.keep, given)
        try:
            self._claim()
        except BaseException:
            self.release()
            raise

    @property
    def staging(self) -> Path:
        """The folder to write into (hidden, beside the destination)."""
        if self._folder is None or self.committed:
            raise AssuranceInputError("This output claim has been released or committed.")
        return self._folder / "new"

    def _claim(self) -> None:
        out = self.out
        missing = []
        ancestor = out.parent
        while not os.path.lexists(ancestor):
            missing.append(ancestor)
            ancestor = ancestor.parent
        for folder in reversed(missing):
            try:
                folder.mkdir()
            except FileExistsError:
                continue
            except OSError as exc:
                raise AssuranceInputError(
                    f"The output folder {self.shown!r} cannot be made: {str(folder)!r} could not "
                    f"be created ({exc.strerror}). Choose a folder you can write to.") from None
            self._made.append(folder)
        try:
            prepared = Path(tempfile.mkdtemp(prefix=".", suffix=_TMP_SUFFIX, dir=out.parent))
        except OSError as exc:
            raise AssuranceInputError(
                f"The output folder {self.shown!r} cannot be written: {str(out.parent)!r} does "
                f"not accept new files ({exc.strerror}). Choose a folder you can write to."
            ) from None
        self._folder = prepared
        self._fd = os.open(prepared / _OWNER, os.O_RDWR | os.O_CREAT | os.O_EXCL, 0o644)
        _lock(self._fd, blocking=True)  # held until released; the system drops it if killed
        record = (f"{_OWNER_HEAD}\npid = {os.getpid()}\nhost = {socket.gethostname()}\n"
                  f"created = {time.time():.3f}\nout = {out.name}\n")
        os.write(self._fd, record.encode("utf-8", "surrogateescape"))
        (prepared / "new").mkdir()
        target = out.parent / _tmp_name(out.name)
        for attempt in range(2):
            try:
                os.rename(prepared, target)  # fails while another run holds the name
            except OSError:
                held = target.is_dir() and not target.is_symlink()
                if attempt == 0 and held:
                    _sweep_one(target, out.parent)  # perhaps left by a run that was killed
                    continue
                if held:
                    raise AssuranceInputError(
                        f"The output folder {self.shown!r} is being written by "
                        f"{_holder(target)}. Wait for it to finish, or choose another "
                        "folder for the results.") from None
                raise AssuranceInputError(
                    f"The output folder {self.shown!r} cannot be written: {str(target)!r} is in "
                    "the way. Move it, or choose another folder for the results.") from None
            self._folder = target
            return

    def commit(self) -> Path:
        """Move the staged folder into place (replacing the old one when allowed).

        The marker file :data:`MARKER`, listing every file and folder staged, is added
        first.

        Returns
        -------
        pathlib.Path
            The output folder.
        """
        staged = self.staging
        entries = [p.relative_to(staged).as_posix() + ("/" if p.is_dir() else "")
                   for p in sorted(staged.rglob("*")) if p.name != MARKER]
        (staged / MARKER).write_text(_marker_text(entries), encoding="utf-8")
        with _signals_held():
            self._swap(staged)
            self.committed = True
        self._made.clear()  # the folders made for the output now hold it
        self.release()
        return self.out

    def _swap(self, staged: Path) -> None:
        out = self.out
        assert self._folder is not None
        if not os.path.lexists(out):
            try:
                os.rename(staged, out)
            except OSError:
                raise AssuranceInputError(
                    f"The output folder {self.shown!r} appeared while the results were being "
                    "written; it was left as it is. Choose another folder for the results."
                ) from None
            return
        _check_destination(out, self.overwrite, self.keep, self.given)  # it may have changed
        aside = self._folder / "old"
        try:
            os.rename(out, aside)
            listed = _marker_files(aside)
            if any(aside.iterdir()) and (listed is None or _foreign_entries(aside, listed)):
                raise AssuranceInputError(
                    f"The output folder {self.shown!r} changed while the results were being "
                    "written and now holds files assurance did not write; it was left as it "
                    "is.")
            os.rename(staged, out)
        except BaseException:
            _restore_aside(self._folder, out.parent, out.name)
            raise

    def release(self) -> None:
        """Remove the temporary folder (and any parent folders made for it, if still empty).

        A previous output moved aside by an interrupted :meth:`commit` is put back first.
        """
        if self._folder is not None:
            _restore_aside(self._folder, self.out.parent, self.out.name)
            shutil.rmtree(self._folder, ignore_errors=True)
            self._folder = None
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None
        for folder in reversed(self._made):
            with contextlib.suppress(OSError):
                folder.rmdir()
        self._made.clear()

    def __enter__(self) -> OutputClaim:
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()


@contextlib.contextmanager
def _signals_held() -> Iterator[None]:
    """Hold back SIGINT, SIGTERM and SIGHUP (where possible) for a few renames."""
    import signal

    held = {getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP")
            if hasattr(signal, name)}
    try:
        before = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    except (AttributeError, OSError, ValueError):  # pragma: no cover - not POSIX
        yield
        return
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, before)


def _as_folder_path(out: Any, owner: str) -> Path:
    if not isinstance(out, str | os.PathLike):
        raise AssuranceInputError(
            f"The 'out' parameter of {owner} must be a folder path (str or pathlib.Path). "
            f"Got {out!r} instead.")
    text = os.fspath(out)
    if isinstance(text, bytes) or not text.strip():
        raise AssuranceInputError(
            f"The 'out' parameter of {owner} must name a folder. Got {text!r} instead.")
    return Path(os.path.abspath(text))


def claim_output_folder(out: str | os.PathLike[str], *, overwrite: bool = False,
                        keep: Iterable[str | os.PathLike[str]] = ()) -> OutputClaim:
    """Check an output folder and hold it for this process, before anything is computed.

    Parameters
    ----------
    out
        The folder the results go to. Missing parent folders are made (and removed again
        if nothing is written).
    overwrite
        Allow an existing output folder to be replaced; it still must carry the
        :data:`MARKER` file and hold nothing but the files listed there.
    keep
        Files that must never be inside a replaced folder (the design file being planned).

    Returns
    -------
    OutputClaim
        Hold it until the results are written (``with`` block or :meth:`OutputClaim.release`).

    Raises
    ------
    AssuranceInputError
        When ``out`` passes through a file, cannot be written, exists (without
        ``overwrite``), must not be replaced (the current folder, a folder holding ``keep``
        or anything assurance did not write, a symbolic link), or another run is writing it.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     with claim_output_folder(pathlib.Path(folder) / "plan") as claim:
    ...         print(claim.staging.is_dir())
    ...     print(sorted(pathlib.Path(folder).iterdir()))
    True
    []
    """
    if not isinstance(overwrite, bool):
        raise AssuranceInputError(
            "The 'overwrite' parameter of claim_output_folder must be True or False. "
            f"Got {overwrite!r} instead.")
    path = _as_folder_path(out, "claim_output_folder")
    return OutputClaim(path, overwrite, [Path(p) for p in keep], Path(os.fspath(out)))


# ------------------------------------------------------------------------------------------
# the plan's files
# ------------------------------------------------------------------------------------------
def _check_formats(formats: Any, owner: str) -> tuple[str, ...]:
    chosen = (formats,) if isinstance(formats, str) else formats
    try:
        chosen = tuple(chosen)
    except TypeError:
        chosen = None
    if not chosen or any(f not in FIGURE_FORMATS for f in chosen):
        raise AssuranceInputError(
            f"The 'formats' parameter of {owner} must be one or more of 'png', 'svg'. "
            f"Got {formats!r} instead.")
    return tuple(dict.fromkeys(chosen))


def write_outputs(out: str | os.PathLike[str], plan: Plan, *, overwrite: bool = False,
                  formats: Sequence[str] = ("png",), claim: OutputClaim | None = None) -> Path:
    """Write a plan's results (CSV, netCDF), sample sizes, figures and memo into ``out``.

    The folder holds ``results.csv``, ``results.nc``, ``sample_sizes.csv``, ``design.toml``
    (the normalised design: every key in force, in the design file's names, which
    ``assurance plan`` reads back to the same numbers), ``figures/`` (each of
    :meth:`Plan.figures <assurance.Plan.figures>` in each of ``formats``), ``memo.html`` and
    :data:`MARKER` (the list of files written); when the plan was read from a design file,
    also ``design_as_given.toml``, a byte-for-byte copy of that file.

    Parameters
    ----------
    out
        Destination folder; must not exist unless ``overwrite`` is True.
    plan
        The computed plan (:class:`~assurance.Plan`).
    overwrite
        Replace an existing output folder of this package (see :func:`claim_output_folder`
        for the folders that are never replaced).
    formats
        Figure formats to write: ``"png"``, ``"svg"`` or both.
    claim
        The folder as claimed before computing (:func:`claim_output_folder`, whose
        ``overwrite`` then applies); without it, the folder is checked and claimed here.

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
    ...     print(*sorted(f.name for f in written.iterdir())[4:])
    results.csv results.nc sample_sizes.csv sensitivity.csv sensitivity_map.csv
    """
    formats = _check_formats(formats, "write_outputs")
    keep = _inputs_of(plan)
    own = claim is None
    if claim is None:
        claim = claim_output_folder(out, overwrite=overwrite, keep=keep)
    elif claim.out != _as_folder_path(out, "write_outputs"):
        raise AssuranceInputError(
            f"The 'claim' parameter of write_outputs holds {str(claim.out)!r}, not the output "
            f"folder {str(out)!r}.")
    else:  # files named inside the input (a portfolio's designs) are known only now
        claim.keep = tuple(dict.fromkeys((*claim.keep, *keep)))
    try:
        _write_files(claim.staging, plan, formats)
        return claim.commit()
    finally:
        if own:
            claim.release()


def _inputs_of(plan: Any) -> list[Path]:
    """The files a plan was read from, which an output folder must never replace."""
    paths = getattr(plan, "input_paths", None)
    if paths is not None:
        return [Path(p) for p in paths]
    return [plan.source.path] if getattr(plan, "source", None) is not None else []


def _write_files(tmp: Path, plan: Plan, formats: Sequence[str]) -> None:
    from .memo import write_plan_memo
    from .plan_figures import start_figure_files

    if hasattr(plan, "write_into"):  # programs, interim looks, portfolios write their own files
        plan.write_into(tmp, tuple(formats))
        return
    if hasattr(plan, "model"):  # a general analysis model: simulated trials
        _write_model_files(tmp, plan, formats)
        return
    ds, answers = plan.results, plan.sample_sizes
    finish_figures = start_figure_files(plan, tmp, formats)  # drawn while tables are written
    write_results_csv(ds, tmp / "results.csv")
    write_sample_sizes_csv(answers, tmp / "sample_sizes.csv")
    if "sensitivity_assurance" in ds:
        write_sensitivity_csv(ds, tmp / "sensitivity.csv")
    if "sensitivity_map" in ds:
        write_long_csv(ds["sensitivity_map"].transpose("map_centre", "map_spread"),
                       tmp / "sensitivity_map.csv", ("prior_centre", "prior_spread", "assurance"))
    if "power_check_simulated" in ds:
        names = ("power_check_formula", "power_check_simulated", "power_check_mcse")
        with open(tmp / "power_check.csv", "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(["n", "power_formula", "power_simulated", "power_simulated_mcse"])
            for i, n_total in enumerate(ds["checked_n"].values):
                writer.writerow([int(n_total), *[_fmt(ds[k].values[i]) for k in names]])
    if "oc_go" in ds:
        write_long_csv(ds[["oc_go", "oc_consider", "oc_stop"]].transpose("n", "zone_effect"),
                       tmp / "zones_by_effect.csv", ("n", "true_effect", "go", "consider", "stop"))
    record = plan.design_record()
    saved = ds.copy()
    if record is not None:  # the design in the file's own names travels with the results
        saved.attrs["design_toml"] = record
    saved.to_netcdf(tmp / "results.nc", engine="scipy")
    if record is not None:
        (tmp / "design.toml").write_text(record, encoding="utf-8")
    if plan.source is not None:
        (tmp / "design_as_given.toml").write_bytes(plan.source.content)
    write_plan_memo(plan, tmp / "memo.html", rendered=finish_figures(), design_record=record)


def _write_model_files(tmp: Path, plan: Any, formats: Sequence[str]) -> None:
    """The folder of a model plan: the same files, from the simulated results."""
    from .model_figures import model_figure_makers
    from .model_memo import write_model_memo
    from .plan_figures import start_figure_files

    finish_figures = start_figure_files(plan, tmp, formats,
                                        makers=model_figure_makers)  # while tables are written
    ds = plan.results
    per_n = [name for name, var in ds.data_vars.items() if var.dims == ("n",)]
    with open(tmp / "results.csv", "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["n", "n_treatment", "n_control", *per_n])
        for i in range(ds.sizes["n"]):
            writer.writerow([int(ds.n[i]), int(ds.n_treatment[i]), int(ds.n_control[i]),
                             *[_fmt(ds[name].values[i]) for name in per_n]])
    with open(tmp / "sample_sizes.csv", "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["quantity", "target", "reached", "n_total", "achieved",
                         "achieved_mcse", "note"])
        for a in plan.sample_sizes:
            writer.writerow([a.quantity, _fmt(a.target), a.n is not None,
                             "" if a.n is None else a.n, _fmt(a.value), _fmt(a.mcse), a.note])
    record = plan.design_record()
    saved = ds.copy()
    if record is not None:
        saved.attrs["design_toml"] = record
        (tmp / "design.toml").write_text(record, encoding="utf-8")
    saved.to_netcdf(tmp / "results.nc", engine="scipy")
    if plan.source is not None:
        (tmp / "design_as_given.toml").write_bytes(plan.source.content)
    write_model_memo(plan, tmp / "memo.html", rendered=finish_figures())
    if plan.store is not None and Path(plan.store).is_dir():  # for a later run to resume from
        shutil.copytree(plan.store, tmp / "finished_sizes")


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


def write_sensitivity_csv(ds: Any, path: str | Path) -> None:
    """One row per variation of the design prior: what changed, and the answers under it.

    Columns: ``variation``, ``description``, ``prior_centre``, ``prior_spread`` (prior
    scale), ``assurance`` (at the planned size), ``ceiling`` and ``n_for_<target>`` per
    assurance target (empty when no size reaches it).
    """
    targets = ([str(t) for t in ds.coords["sensitivity_target"].values]
               if "sensitivity_target" in ds.coords else [])
    header = ["variation", "description", "prior_centre", "prior_spread", "assurance",
              "ceiling", *[f"n_for_{t}" for t in targets]]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        for i, name in enumerate(ds.coords["variation"].values):
            row = [str(name), str(ds["variation_description"].values[i])
                   if "variation_description" in ds else ""]
            row += [_fmt(ds[v].values[i]) for v in (
                "sensitivity_prior_centre", "sensitivity_prior_spread",
                "sensitivity_assurance", "sensitivity_ceiling")]
            for j in range(len(targets)):
                n = int(ds["sensitivity_n"].values[i, j])
                row.append("" if n < 0 else str(n))
            writer.writerow(row)


def write_long_csv(data: Any, path: str | Path, header: Sequence[str]) -> None:
    """A DataArray or Dataset over two dimensions as one row per pair of coordinates.

    ``header`` names the two coordinates, then each variable.
    """
    frame = data if hasattr(data, "data_vars") else data.to_dataset(name="value")
    names = list(frame.data_vars)
    first, second = frame[names[0]].dims
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        values = [frame[name].transpose(first, second).values for name in names]
        for i, a in enumerate(frame.coords[first].values):
            for j, b in enumerate(frame.coords[second].values):
                writer.writerow([_fmt(a), _fmt(b), *[_fmt(v[i, j]) for v in values]])


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
