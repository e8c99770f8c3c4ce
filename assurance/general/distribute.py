"""Where the simulation tasks run: in this process, in local worker processes, or on a
Dask cluster.

:func:`map_chunks` applies one function to a list of task descriptions and returns the
results in the order of the list. Each task carries its own seed, so the numbers do not
depend on where, in which order or on how many workers the tasks run; only the wall time
does.

The executors:

* ``None``: a plain loop in this process (the default; nothing is started).
* ``"processes"`` or a whole number ``k``: ``k`` local worker processes (every core for
  ``"processes"``), started with the ``forkserver`` method where the system has it and
  ``spawn`` elsewhere, never ``fork`` (a forked copy of a process whose numerical libraries
  run threads can hang). The function and the tasks must be picklable: module-level
  functions and data. Each worker keeps its own caches (compiled models) for the whole call.
* a Dask scheduler address such as ``"tcp://10.0.0.5:8786"``: a client is connected for the
  call and closed after it; a :class:`distributed.Client` (or a Dask cluster object such as
  :class:`distributed.LocalCluster`) is used as it is and left open. One Dask task per
  task description. Each worker process runs one task at a time, whatever its number of
  threads (a compiled model swaps its data in place, so two threads must not share it):
  start workers with one thread each and one worker process per core.

Dask is imported only when a scheduler is asked for.
"""

from __future__ import annotations

import contextlib
import math
import multiprocessing
import os
import re
import signal
import sys
import threading
import time
import uuid
from collections.abc import Callable, Iterator, Sequence
from numbers import Integral
from typing import Any, TypeVar

from ..errors import AssuranceInputError

__all__ = ["map_chunks", "describe_executor", "CONNECT_TIMEOUT"]

T = TypeVar("T")
R = TypeVar("R")

#: Seconds to wait for a Dask scheduler to answer before giving up with a message.
CONNECT_TIMEOUT = 5.0

_OWNER = "map_chunks"
#: More local worker processes than this is a mistake, not a machine.
_MOST_PROCESSES = 4096
_ALLOWED = (
    "None (run in this process), 'processes' (one local worker process per core), a whole "
    "number >= 1 of local worker processes, a Dask scheduler address such as "
    "'tcp://host:8786', or a distributed.Client"
)
#: "tcp://host:8786", "tls://[::1]:8786", "inproc://..."; or a bare "host:8786"
_ADDRESS = re.compile(r"^(?:[a-z][a-z0-9+.\-]*://\S+|[A-Za-z0-9_.\-]+:\d{1,5})$")
_INSTALL = "pip install 'dask[distributed]'"


def map_chunks(
    func: Callable[[T], R],
    specs: Sequence[T],
    executor: Any = None,
    *,
    progress: bool = False,
    label: str = "trials",
    on_result: Callable[[int, R], None] | None = None,
) -> list[R]:
    """Apply ``func`` to every task description, in this process or spread over workers.

    Parameters
    ----------
    func
        The task function, called once per element of ``specs``. For worker processes and
        Dask it must be picklable (a module-level function).
    specs
        The task descriptions, each carrying its own seed.
    executor
        ``None`` (in this process), ``"processes"`` (one local worker process per core), a
        whole number of local worker processes, a Dask scheduler address
        (``"tcp://host:8786"``), a :class:`distributed.Client`, or a Dask cluster object.
    progress
        Show a progress bar over finished tasks on a terminal (one closing line on standard
        error otherwise). Nothing is printed when False.
    label
        Words naming what the tasks compute, shown beside the progress bar.
    on_result
        Called in this process as ``on_result(index, result)`` as each task finishes (in
        the order they finish), e.g. to store finished sizes before the whole run ends.

    Returns
    -------
    list
        ``func(spec)`` for every spec, in the order of ``specs`` (whatever order the
        workers finished in).

    Raises
    ------
    AssuranceInputError
        ``executor`` is not one of the allowed forms, Dask is not installed, or the
        scheduler cannot be reached within :data:`CONNECT_TIMEOUT` seconds.
    Exception
        The first exception raised by a task, of its own type and message; the outstanding
        tasks are cancelled first.

    Notes
    -----
    On Ctrl-C (``KeyboardInterrupt``) or ``SIGTERM`` the outstanding tasks are cancelled,
    local worker processes are stopped and a client this function connected is closed;
    then the interruption goes on (``KeyboardInterrupt`` is raised again; ``SIGTERM`` is
    delivered again to the previous handler, which by default ends the process).

    Examples
    --------
    >>> map_chunks(abs, [-3, 1, -2])
    [3, 1, 2]
    >>> map_chunks(abs, [-3, 1, -2], executor="thread")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    assurance.errors.AssuranceInputError: The 'executor' parameter of map_chunks must be ...
    """
    kind, value = _classify(executor)
    if not callable(func):
        raise AssuranceInputError(
            f"The 'func' parameter of {_OWNER} must be a callable. Got {func!r:.80} instead.")
    specs = list(specs)
    if not specs:
        return []
    with _Progress(len(specs), label, progress, _where(kind, value)) as bar, \
            _sigterm_as_interrupt():
        if kind == "none":
            return _run_here(func, specs, bar, on_result)
        if kind == "processes":
            return _run_processes(func, specs, value, bar, on_result)
        return _run_dask(func, specs, kind, value, bar, on_result)


def describe_executor(executor: Any = None) -> str:
    """Plain words for where the tasks run (for a memo's method line).

    Examples
    --------
    >>> describe_executor(None)
    'in one process'
    >>> describe_executor(2)
    '2 local worker processes'
    >>> describe_executor("tcp://10.0.0.5:8786")
    'a Dask cluster at tcp://10.0.0.5:8786'
    """
    kind, value = _classify(executor)
    return _where(kind, value)


# --------------------------------------------------------------------------- validation
def _classify(executor: Any) -> tuple[str, Any]:
    """("none" | "processes" | "address" | "client" | "cluster", cleaned value)."""
    if executor is None:
        return "none", None
    if isinstance(executor, str):
        text = executor.strip()
        if text == "processes":
            return "processes", max(1, os.cpu_count() or 1)
        if _ADDRESS.match(text):
            return "address", text
        raise _bad_executor(executor)
    if isinstance(executor, bool):
        raise _bad_executor(executor)
    if isinstance(executor, Integral):   # numpy's whole numbers too
        if not 1 <= int(executor) <= _MOST_PROCESSES:
            raise _bad_executor(executor)
        return "processes", int(executor)
    if "distributed" in sys.modules:   # a Client can only exist once distributed is imported
        import distributed

        if isinstance(executor, distributed.Client):
            return "client", executor
        cluster_types = tuple(t for t in (getattr(distributed, "SpecCluster", None),
                                          getattr(distributed.deploy, "Cluster", None)) if t)
        if cluster_types and isinstance(executor, cluster_types):
            return "cluster", executor
    raise _bad_executor(executor)


def _bad_executor(value: object) -> AssuranceInputError:
    shown = repr(value)
    if len(shown) > 80:
        shown = shown[:77] + "..."
    return AssuranceInputError(
        f"The 'executor' parameter of {_OWNER} must be {_ALLOWED}. Got {shown} instead.")


def _where(kind: str, value: Any) -> str:
    if kind == "none":
        return "in one process"
    if kind == "processes":
        return f"{value} local worker process{'es' if value != 1 else ''}"
    if kind == "address":
        return f"a Dask cluster at {value}"
    if kind == "client":
        address = getattr(getattr(value, "scheduler", None), "address", None)
        return f"a Dask cluster at {address}" if address else "a Dask cluster"
    return "a Dask cluster"


# --------------------------------------------------------------------------- progress
class _Progress:
    """A rich progress bar on a terminal, one closing line elsewhere, nothing when off."""

    def __init__(self, total: int, label: str, enabled: bool, where: str) -> None:
        self.total, self.label, self.enabled, self.where = total, str(label), enabled, where
        self.done = 0
        self._bar = None
        self._task = None
        self._start = time.perf_counter()

    def __enter__(self) -> _Progress:
        if self.enabled and _stderr_is_terminal():
            from rich.console import Console
            from rich.progress import (
                BarColumn,
                MofNCompleteColumn,
                Progress,
                TextColumn,
                TimeElapsedColumn,
                TimeRemainingColumn,
            )

            self._bar = Progress(TextColumn("{task.description}"), BarColumn(),
                                 MofNCompleteColumn(), TextColumn("tasks"),
                                 TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn(),
                                 console=Console(stderr=True), transient=False)
            self._bar.start()
            self._task = self._bar.add_task(f"{self.label} ({self.where})", total=self.total)
        return self

    def advance(self) -> None:
        self.done += 1
        if self._bar is not None:
            self._bar.advance(self._task)

    def __exit__(self, exc_type, exc, tb) -> None:
        if self._bar is not None:
            self._bar.stop()
        elif self.enabled:
            seconds = time.perf_counter() - self._start
            state = "done" if exc_type is None else "stopped"
            print(f"{self.label}: {self.done} of {self.total} tasks {state} in "
                  f"{_seconds(seconds)} ({self.where})", file=sys.stderr, flush=True)


def _stderr_is_terminal() -> bool:
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):
        return False


def _seconds(s: float) -> str:
    if s < 60:
        return f"{s:.1f} s"
    minutes, s = divmod(s, 60)
    return f"{int(minutes)} min {s:.0f} s" if minutes < 60 else \
        f"{int(minutes // 60)} h {int(minutes % 60)} min"


# --------------------------------------------------------------------------- interruption
class _Terminated(KeyboardInterrupt):
    """SIGTERM turned into an exception so that the clean-up code runs."""


@contextlib.contextmanager
def _sigterm_as_interrupt() -> Iterator[None]:
    """While the tasks run, SIGTERM raises :class:`_Terminated` (main thread only); after
    the clean-up the signal goes to the handler that was there before."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def handler(signum, frame):
        raise _Terminated()

    try:
        previous = signal.signal(signal.SIGTERM, handler)
    except (ValueError, OSError):   # not allowed here (e.g. an embedded interpreter)
        yield
        return
    try:
        yield
    except _Terminated:
        signal.signal(signal.SIGTERM, previous)
        previous = None
        signal.raise_signal(signal.SIGTERM)
        raise    # the previous handler let the process live: go on as an interruption
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


# --------------------------------------------------------------------------- in process
def _run_here(func, specs, bar, on_result):
    results = []
    for i, spec in enumerate(specs):
        result = func(spec)
        results.append(result)
        bar.advance()
        if on_result is not None:
            on_result(i, result)
    return results


# --------------------------------------------------------------------------- processes
def _start_method() -> str:
    methods = multiprocessing.get_all_start_methods()
    return "forkserver" if "forkserver" in methods else "spawn"


def _ignore_interrupt() -> None:
    """Worker processes leave Ctrl-C to the parent, which stops them (no traceback from
    every worker)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _run_processes(func, specs, workers, bar, on_result):
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    context = multiprocessing.get_context(_start_method())
    pool = ProcessPoolExecutor(max_workers=min(workers, len(specs)), mp_context=context,
                               initializer=_ignore_interrupt)
    futures = {}
    try:
        futures = {pool.submit(func, spec): i for i, spec in enumerate(specs)}
        results: list[Any] = [None] * len(specs)
        pending = set(futures)
        while pending:
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for future in sorted(done, key=futures.__getitem__):
                i = futures[future]
                results[i] = future.result()    # a task's exception, raised here as itself
                bar.advance()
                if on_result is not None:
                    on_result(i, results[i])
        pool.shutdown(wait=True)
        return results
    except BaseException:
        _stop_pool(pool)
        raise


def _stop_pool(pool) -> None:
    """Stop the worker processes, then the pool. The futures are left to the pool's own
    thread, which marks them failed or cancelled (cancelling them from here as well races
    with it on Python 3.11)."""
    processes = list((getattr(pool, "_processes", None) or {}).values())
    for process in processes:
        with contextlib.suppress(Exception):
            process.terminate()
    pool.shutdown(wait=True, cancel_futures=True)


# --------------------------------------------------------------------------- Dask
def _import_distributed():
    try:
        import distributed
    except ImportError:
        raise AssuranceInputError(
            "Running the tasks on a Dask cluster needs the dask.distributed package, which "
            f"is not installed here. Install it with: {_INSTALL}") from None
    return distributed


def _connect(distributed, address: str):
    try:
        return distributed.Client(address, timeout=f"{CONNECT_TIMEOUT}s",
                                  set_as_default=False)
    except (OSError, TimeoutError) as err:
        raise AssuranceInputError(
            f"The Dask scheduler at {address!r} did not answer within "
            f"{CONNECT_TIMEOUT:g} s ({err}). Check that the scheduler is running and that "
            "this machine can reach that address and port, or leave the scheduler out to "
            "run on this machine.") from None
    except ValueError as err:    # an address Dask cannot parse
        raise AssuranceInputError(
            f"The 'executor' parameter of {_OWNER} must be {_ALLOWED}. Got {address!r} "
            f"instead ({err}).") from None


class _OneAtATime:
    """Runs the task function under a lock of the worker process: a worker with several
    threads still runs one task at a time (compiled models swap their data in place)."""

    def __init__(self, func) -> None:
        self.func = func

    def __call__(self, spec):
        with _WORKER_LOCK:
            return self.func(spec)


_WORKER_LOCK = threading.Lock()


def _run_dask(func, specs, kind, value, bar, on_result):
    distributed = _import_distributed()
    own = kind in ("address", "cluster")
    client = _connect(distributed, value) if kind == "address" else \
        distributed.Client(value, set_as_default=False) if kind == "cluster" else value
    futures: list[Any] = []
    try:
        token = uuid.uuid4().hex[:12]
        digits = len(str(len(specs) - 1))
        keys = [f"assurance-task-{token}-{i:0{digits}d}" for i in range(len(specs))]
        futures = client.map(_OneAtATime(func), specs, key=keys, pure=False)
        index = {future.key: i for i, future in enumerate(futures)}
        results: list[Any] = [None] * len(specs)
        for future in distributed.as_completed(futures, loop=client.loop):
            i = index[future.key]
            results[i] = future.result()    # a task's exception, raised here as itself
            future.release()
            bar.advance()
            if on_result is not None:
                on_result(i, results[i])
        return results
    except BaseException:
        if futures:
            with contextlib.suppress(Exception):
                client.cancel(futures)
        raise
    finally:
        if own:
            with contextlib.suppress(Exception):
                client.close(timeout=math.ceil(CONNECT_TIMEOUT))
