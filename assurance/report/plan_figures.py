"""The figures of a plan: which ones it has, and drawing them all at once on several cores.

:meth:`Plan.figures <assurance.Plan.figures>` and the output folder use the same list
(:func:`figure_makers`), so the folder's ``figures/``, the memo and a notebook show the same
figures. Drawing is the slowest part of writing a plan's folder (each figure is laid out,
its labels placed and rendered), and the figures are independent, so :func:`render_figures`
draws them in forked worker processes where the platform forks (each worker reads the plan
it inherited; only the finished image bytes come back), and one after another elsewhere.
The command line starts one worker before computing (:func:`figure_workers_started_early`),
so that it loads matplotlib on another core meanwhile, and sends it the finished plan
(:func:`start_rendering`); that worker forks the further drawers from its warm state, and
the command writes its tables while the figures are drawn.

Examples
--------
>>> import assurance as asr
>>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
...                          asr.Normal(4.0, 2.0))
>>> p = asr.plan(design, sizes=[100, 200], sensitivity=False)
>>> list(figure_makers(p))
['prior', 'power_and_assurance']
>>> images = render_figures(p, ("png",))
>>> sorted(images), images["prior"]["png"][:4]
(['power_and_assurance', 'prior'], b'\\x89PNG')
"""

from __future__ import annotations

import contextlib
import itertools
import multiprocessing
import os
import pickle
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure

__all__ = ["figure_makers", "figure_workers_started_early", "render_figures", "start_figure_files",
           "start_rendering"]


def figure_makers(plan: Any) -> dict[str, Callable[[], Figure]]:
    """Name -> a function drawing that figure of ``plan``, in the memo's order.

    ``"prior"`` and ``"power_and_assurance"`` always; ``"prior_fit"`` for a prior fitted to
    elicited judgements; ``"interval_width"`` with precision; ``"zones"`` and
    ``"zones_by_effect"`` (at the planned size) with a go / consider / stop rule;
    ``"sensitivity_map"`` with the prior sensitivity.
    """
    from . import figures as f

    ds = plan.results
    makers: dict[str, Callable[[], Figure]] = {
        "prior": lambda: f.plot_prior(plan.design).figure,
        "power_and_assurance": lambda: f.plot_power_and_assurance(
            ds, answers=list(plan.sample_sizes)).figure,
    }
    if type(plan.prior_origin).__name__ == "PriorFit":
        makers["prior_fit"] = lambda: f.plot_fit(plan.prior_origin).figure
    if "width_mean" in ds:
        makers["interval_width"] = lambda: f.plot_interval_width(ds, plan.precision).figure
    if "prob_go" in ds:
        makers["zones"] = lambda: f.plot_zones(ds, planned_n=plan.planned_n).figure
        makers["zones_by_effect"] = lambda: f.plot_zone_characteristic(
            ds, plan.planned_n).figure
    if "sensitivity_map" in ds and ds["sensitivity_map"].size:
        makers["sensitivity_map"] = lambda: f.plot_sensitivity_map(
            ds, plan.design, target=plan.settings.targets.get("assurance")).figure
    return makers


#: the plan a forked worker draws from, and the list of its figures (set in the parent
#: just before forking)
_PLAN: Any = None
_MAKERS: Any = None


def _draw(job: tuple[str, tuple[str, ...]]) -> dict[str, bytes]:
    """Draw one figure of the inherited plan; return its bytes per format."""
    from .figures import figure_bytes

    name, formats = job
    fig = _MAKERS(_PLAN)[name]()  # off-screen (not pyplot's): freed with the last use
    return {fmt: figure_bytes(fig, fmt) for fmt in formats}


def _quiet_worker() -> None:
    """A worker leaves signals to the parent: it ends when the parent ends the pool."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if hasattr(signal, "SIGHUP"):
        signal.signal(signal.SIGHUP, signal.SIG_DFL)


def _warm_up() -> None:
    """Load fonts and the text machinery once, so forked workers do not each load them."""
    from .figures import _axes, figure_bytes

    ax = _axes(None, (1.0, 1.0))
    ax.set_title("warm up")
    ax.plot([0, 1], [0, 1], marker="o")
    figure_bytes(ax.figure, "png", dpi=10)


#: workers started before the plan was computed (see figure_workers_started_early)
_EARLY_POOL: Any = None
#: in an early worker: the plan and figure list last received, and its token
_SENT: tuple[Any, Any, Any] = (None, None, None)
_TOKENS = itertools.count()


def _prepare_early_worker() -> None:
    """An early worker: leave signals to the parent, load matplotlib and the figure code.

    The modules a plan needs come with the fork (the command line loads them first) or
    load when the first plan is unpickled."""
    _quiet_worker()
    from .._dask_on_demand import answer_without_importing_dask

    answer_without_importing_dask()
    _warm_up()


def _die_with_parent() -> None:
    """Linux: end this process when its parent ends (a drawer forked by an early worker
    that is itself ended mid-drawing leaves nothing running). Elsewhere, nothing."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, 9)  # PR_SET_PDEATHSIG, SIGKILL
    except Exception:  # noqa: BLE001 - no prctl: the drawer ends when its share is drawn
        pass


def _take_jobs(jobs: Sequence[tuple[str, tuple[str, ...]]], lock: Any, taken: Any,
               ) -> list[tuple[int, dict[str, bytes]]]:
    """Draw figures from the shared list until none is left: (index, bytes per format)."""
    out = []
    while True:
        with lock:
            i = taken.value
            taken.value = i + 1
        if i >= len(jobs):
            return out
        out.append((i, _draw(jobs[i])))


def _read_all(fd: int) -> bytes:
    chunks = []
    while chunk := os.read(fd, 1 << 20):
        chunks.append(chunk)
    return b"".join(chunks)


def _draw_in_forks(jobs: Sequence[tuple[str, tuple[str, ...]]], drawers: int,
                   ) -> list[dict[str, bytes]]:
    """Draw ``jobs`` here and in ``drawers - 1`` processes forked from here.

    Called in an early worker, which has matplotlib loaded and warmed up: a fork of it
    draws at once, where a fresh worker would first spend about as long as one figure
    takes loading matplotlib. Each process takes the next undrawn figure until none is
    left; the forked ones send theirs back through a pipe."""
    if drawers <= 1 or len(jobs) <= 1:
        return [_draw(job) for job in jobs]
    ctx = multiprocessing.get_context("fork")
    lock, taken = ctx.Lock(), ctx.RawValue("i", 0)
    children = []
    for _ in range(min(drawers, len(jobs)) - 1):
        read_end, write_end = os.pipe()
        pid = os.fork()
        if pid == 0:  # pragma: no cover - runs in the forked drawer (coverage sees no exit)
            os.close(read_end)
            try:
                _die_with_parent()
                message = pickle.dumps(("drawn", _take_jobs(jobs, lock, taken)))
            except BaseException as exc:  # noqa: BLE001 - reported to the parent
                try:
                    message = pickle.dumps(("failed", exc))
                except Exception:  # noqa: BLE001 - an exception that does not pickle
                    message = pickle.dumps(("failed", RuntimeError(repr(exc))))
            try:
                with os.fdopen(write_end, "wb") as pipe:
                    pipe.write(message)
            finally:
                os._exit(0)
        os.close(write_end)
        children.append((pid, read_end))
    failure: BaseException | None = None
    try:
        drawn = dict(_take_jobs(jobs, lock, taken))
    except Exception as exc:  # noqa: BLE001 - raised once the drawers are collected
        drawn, failure = {}, exc
    for pid, read_end in children:
        try:
            message = _read_all(read_end)
        finally:
            os.close(read_end)
            os.waitpid(pid, 0)
        if not message:
            failure = failure or RuntimeError("a figure drawer ended without its figures")
            continue
        kind, value = pickle.loads(message)
        if kind == "failed":
            failure = failure or value
        else:
            drawn.update(value)
    if failure is not None:
        raise failure
    return [drawn[i] for i in range(len(jobs))]


def _draw_sent(job: tuple[Any, bytes, list[tuple[str, tuple[str, ...]]], int],
               ) -> list[dict[str, bytes]]:
    """Draw every figure of a plan sent as pickled bytes, in ``drawers`` processes."""
    global _SENT, _PLAN, _MAKERS

    token, payload, jobs, drawers = job
    if _SENT[0] != token:
        plan, makers = pickle.loads(payload)
        _SENT = (token, plan, makers)
    _PLAN, _MAKERS = _SENT[1], _SENT[2]
    return _draw_in_forks(jobs, drawers)


@contextlib.contextmanager
def figure_workers_started_early() -> Iterator[None]:
    """Start a figure worker now, so it loads matplotlib while the plan is computed.

    Loading matplotlib and its fonts takes about as long as computing a closed-form plan;
    one worker forked at the start of a command does it on another core meanwhile. When
    the plan is finished, :func:`start_rendering` sends it (pickled) to that worker, which
    forks one drawer per further core from its warm state, so no process loads matplotlib
    twice and none competes with the computation for the cores. Within the block,
    :func:`render_figures` and :func:`start_rendering` with ``workers=None`` use this
    worker; on leaving it, it is ended. Where the platform cannot fork, or with one core,
    nothing is started and figures are drawn as without it. The bytes of every figure are
    the same either way.

    Examples
    --------
    >>> with figure_workers_started_early():
    ...     pass
    """
    global _EARLY_POOL

    if _workers(4) == 1 or _EARLY_POOL is not None:
        yield
        return
    pool = multiprocessing.get_context("fork").Pool(1, initializer=_prepare_early_worker)
    _EARLY_POOL = pool
    try:
        yield
    finally:
        _EARLY_POOL = None
        pool.terminate()
        pool.join()


def _workers(count: int) -> int:
    if "fork" not in multiprocessing.get_all_start_methods():
        return 1
    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - platforms without affinity
        cores = os.cpu_count() or 1
    return max(1, min(cores, count, 4))


def render_figures(plan: Any, formats: Sequence[str], *, workers: int | None = None,
                   makers: Callable[[Any], dict[str, Callable[[], Figure]]] | None = None,
                   ) -> dict[str, dict[str, bytes]]:
    """Every figure of ``plan`` as image bytes: name -> format -> bytes.

    Parameters
    ----------
    plan
        A :class:`~assurance.Plan`.
    formats
        ``"png"``, ``"svg"`` or both.
    workers
        Processes to draw in; None: one per available core, at most one per figure and at
        most 4, and 1 where the platform cannot fork. The bytes do not depend on it.
    makers
        The list of figures (:func:`figure_makers` unless given; a model plan's list for
        a :class:`~assurance.ModelPlan`).

    Returns
    -------
    dict
        In the order of :func:`figure_makers`.
    """
    return start_rendering(plan, formats, workers=workers, makers=makers)()


def start_rendering(plan: Any, formats: Sequence[str], *, workers: int | None = None,
                    makers: Callable[[Any], dict[str, Callable[[], Figure]]] | None = None,
                    ) -> Callable[[], dict[str, dict[str, bytes]]]:
    """Start drawing the figures of ``plan``; the returned function waits for the bytes.

    With a worker started by :func:`figure_workers_started_early` (and ``workers=None``),
    the figures are drawn there while the caller goes on (writing the tables, say);
    otherwise they are drawn when the returned function is called. Parameters and result
    as :func:`render_figures`.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> p = asr.plan(design, sizes=[100, 200], sensitivity=False)
    >>> finish = start_rendering(p, ("png",))
    >>> sorted(finish())
    ['power_and_assurance', 'prior']
    """
    from . import figures  # noqa: F401 - imported once here, inherited by the workers

    makers = figure_makers if makers is None else makers
    names = list(makers(plan))
    jobs = [(name, tuple(formats)) for name in names]
    if _EARLY_POOL is not None and workers is None and len(jobs) > 1:
        try:
            payload = pickle.dumps((plan, makers), protocol=pickle.HIGHEST_PROTOCOL)
        except Exception:  # noqa: BLE001 - a plan holding something unpicklable: fork below
            payload = None
        if payload is not None:
            token = (os.getpid(), next(_TOKENS))
            pending = _EARLY_POOL.apply_async(_draw_sent,
                                              ((token, payload, jobs, _workers(len(jobs))),))

            def finish() -> dict[str, dict[str, bytes]]:
                try:
                    drawn = pending.get()
                except Exception:  # noqa: BLE001 - e.g. a worker that cannot unpickle the
                    # plan: draw as without the early worker (an error there is the user's)
                    return _render_here(plan, makers, names, jobs, None)
                return dict(zip(names, drawn, strict=True))

            return finish
    return lambda: _render_here(plan, makers, names, jobs, workers)


def start_figure_files(plan: Any, folder: Path, formats: Sequence[str], *,
                       makers: Callable[[Any], dict[str, Callable[[], Figure]]] | None = None,
                       ) -> Callable[[], dict[str, bytes]]:
    """Start drawing the figures of an output folder; the returned function writes them.

    The figures are drawn as by :func:`start_rendering` (while the caller writes its
    tables), in ``formats`` and PNG; the returned function waits for them, writes
    ``folder/figures/<name>.<format>`` for each of ``formats`` and returns name -> PNG
    bytes (the memo embeds the PNG in any case).

    Examples
    --------
    >>> import tempfile, pathlib, assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0))
    >>> p = asr.plan(design, sizes=[100, 200], sensitivity=False)
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     finish = start_figure_files(p, pathlib.Path(folder), ("svg",))
    ...     pngs = finish()
    ...     written = sorted(f.name for f in (pathlib.Path(folder) / "figures").iterdir())
    >>> sorted(pngs), written
    (['power_and_assurance', 'prior'], ['power_and_assurance.svg', 'prior.svg'])
    """
    finish = start_rendering(plan, tuple(dict.fromkeys(("png", *formats))), makers=makers)

    def write() -> dict[str, bytes]:
        figures = folder / "figures"
        figures.mkdir()
        rendered = {}
        for name, by_format in finish().items():
            rendered[name] = by_format["png"]
            for fmt in formats:
                (figures / f"{name}.{fmt}").write_bytes(by_format[fmt])
        return rendered

    return write


def _render_here(plan: Any, makers: Any, names: list[str],
                 jobs: list[tuple[str, tuple[str, ...]]], workers: int | None,
                 ) -> dict[str, dict[str, bytes]]:
    """Draw in this process, or in workers forked from it."""
    global _PLAN, _MAKERS

    count = _workers(len(jobs)) if workers is None else max(1, min(workers, len(jobs)))
    _PLAN, _MAKERS = plan, makers
    try:
        if count == 1:
            drawn = [_draw(job) for job in jobs]
        else:
            _warm_up()
            pool = multiprocessing.get_context("fork").Pool(count, initializer=_quiet_worker)
            try:
                drawn = pool.map(_draw, jobs, chunksize=1)
                pool.close()
            finally:
                pool.terminate()
                pool.join()
    finally:
        _PLAN = _MAKERS = None
    return dict(zip(names, drawn, strict=True))
