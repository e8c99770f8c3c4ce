"""Where simulation tasks run: the same numbers in this process, in local worker processes
and on a Dask cluster (one LocalCluster with two worker processes for the whole module).

The task function below is a small numpy simulation of our own, seeded only from its task's
seed, so the reference for every executor is the plain in-process loop, checked here against
a direct numpy computation written in the test.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from dataclasses import dataclass

import numpy as np
import pytest

from assurance.errors import AssuranceInputError
from assurance.general import distribute
from assurance.general.distribute import describe_executor, map_chunks


@dataclass(frozen=True)
class Task:
    """One task: ``trials`` normal means of ``n`` draws, seeded by (entropy, spawn key)."""

    entropy: int
    key: tuple[int, ...]
    n: int = 20
    trials: int = 50
    fail: bool = False


class TaskFailed(RuntimeError):
    """Raised on purpose inside a task."""


def simulate(task: Task) -> np.ndarray:
    if task.fail:
        raise TaskFailed(f"task {task.key} failed on purpose")
    rng = np.random.default_rng(np.random.SeedSequence(task.entropy, spawn_key=task.key))
    return rng.normal(0.3, 1.0, size=(task.trials, task.n)).mean(axis=1)


def sleepy(task: Task) -> int:
    """Later tasks finish first: the order of results must still follow the tasks."""
    time.sleep(0.02 * (5 - task.key[0] % 6))
    return task.key[0]


def worker_pid(task: Task) -> int:
    time.sleep(0.05)
    return os.getpid()


TASKS = [Task(2024, (i,)) for i in range(12)]


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster, set_as_default=False) as client:
        yield client


def test_in_process_matches_direct_numpy():
    # reference: the same seeds drawn directly with numpy, outside map_chunks
    got = map_chunks(simulate, TASKS)
    for task, result in zip(TASKS, got, strict=True):
        rng = np.random.default_rng(np.random.SeedSequence(2024, spawn_key=task.key))
        np.testing.assert_array_equal(result, rng.normal(0.3, 1.0, (50, 20)).mean(axis=1))
    # the seeds differ between tasks, so the check above can fail on a mix-up
    assert not np.array_equal(got[0], got[1])


def test_processes_equal_in_process():
    here = map_chunks(simulate, TASKS)
    for executor in (2, "processes"):
        there = map_chunks(simulate, TASKS, executor)
        assert len(there) == len(here)
        for a, b in zip(here, there, strict=True):
            np.testing.assert_array_equal(a, b)


def test_cluster_equals_in_process(cluster):
    here = map_chunks(simulate, TASKS)
    there = map_chunks(simulate, TASKS, cluster)
    for a, b in zip(here, there, strict=True):
        np.testing.assert_array_equal(a, b)
    # the cluster object itself, and its address, give the same numbers
    address = cluster.scheduler.address
    by_address = map_chunks(simulate, TASKS[:4], address)
    for a, b in zip(here[:4], by_address, strict=True):
        np.testing.assert_array_equal(a, b)
    assert cluster.status == "running"    # a client we were handed stays open


def test_cluster_uses_both_workers(cluster):
    pids = map_chunks(worker_pid, [Task(1, (i,)) for i in range(8)], cluster)
    assert len(set(pids)) == 2 and os.getpid() not in pids


@pytest.mark.parametrize("executor", [None, 2, "cluster"])
def test_order_follows_the_tasks(executor, cluster):
    tasks = [Task(1, (i,)) for i in range(10)]
    seen = []
    got = map_chunks(sleepy, tasks, cluster if executor == "cluster" else executor,
                     on_result=lambda i, r: seen.append((i, r)))
    assert got == list(range(10))
    assert sorted(seen) == [(i, i) for i in range(10)]


@pytest.mark.parametrize("executor", [None, 2, "cluster"])
def test_task_error_reaches_the_caller(executor, cluster):
    tasks = [Task(1, (i,), fail=(i == 3)) for i in range(6)]
    with pytest.raises(TaskFailed, match=r"task \(3,\) failed on purpose"):
        map_chunks(simulate, tasks, cluster if executor == "cluster" else executor)


@pytest.mark.parametrize("bad", ["thread", "", "process", 0, -2, 1.5, True, object(),
                                 ["tcp://a:1"], "tcp//host:8786"])
def test_bad_executor_is_refused_with_the_message(bad):
    with pytest.raises(AssuranceInputError) as info:
        map_chunks(simulate, TASKS[:1], bad)
    message = str(info.value)
    assert message.startswith("The 'executor' parameter of map_chunks must be None")
    assert "'processes'" in message and "tcp://host:8786" in message
    assert f"Got {bad!r}"[:40] in message


def test_unreachable_scheduler_gives_the_message_quickly(monkeypatch):
    monkeypatch.setattr(distribute, "CONNECT_TIMEOUT", 1.0)
    with socket.socket() as s:          # a loopback port with nobody listening
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    start = time.perf_counter()
    with pytest.raises(AssuranceInputError, match="did not answer within 1 s") as info:
        map_chunks(simulate, TASKS[:2], f"tcp://127.0.0.1:{port}")
    assert time.perf_counter() - start < 10
    assert info.value.__cause__ is None and info.value.__suppress_context__


def test_without_dask_the_message_says_how_to_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)   # import distributed fails
    with pytest.raises(AssuranceInputError, match=r"pip install 'dask\[distributed\]'"):
        map_chunks(simulate, TASKS[:2], "tcp://127.0.0.1:8786")


def test_progress_prints_nothing_when_off_and_one_line_when_on(capsys):
    map_chunks(simulate, TASKS[:3], progress=False)
    assert capsys.readouterr() == ("", "")
    map_chunks(simulate, TASKS[:3], progress=True, label="trials at n = 40")
    out, err = capsys.readouterr()
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("trials at n = 40: 3 of 3 tasks done")


def test_empty_and_describe():
    assert map_chunks(simulate, [], 2) == []
    assert describe_executor(None) == "in one process"
    assert describe_executor(3) == "3 local worker processes"


@pytest.mark.parametrize("sig", ["SIGINT", "SIGTERM"])
def test_interrupt_stops_the_workers(sig, tmp_path):
    script = tmp_path / "run.py"
    script.write_text(
        "import os, signal, sys, threading\n"
        # Ctrl-C as in a terminal, even when the tests were started from a shell that
        # ignores it (a background job of a non-interactive shell; children inherit that)
        "signal.signal(signal.SIGINT, signal.default_int_handler)\n"
        f"sys.path.insert(0, {os.path.dirname(__file__)!r})\n"
        "from assurance.general.distribute import map_chunks\n"
        "from test_general_distribute import Task, sleep_long\n"
        "if __name__ == '__main__':\n"
        f"    threading.Timer(2.0, lambda: os.kill(os.getpid(), signal.{sig})).start()\n"
        "    try:\n"
        "        map_chunks(sleep_long, [Task(1, (i,)) for i in range(4)], 2)\n"
        "    except KeyboardInterrupt:\n"
        "        print('interrupted', flush=True)\n")
    start = time.perf_counter()
    run = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                         timeout=60)
    assert time.perf_counter() - start < 30          # the 60 s tasks did not run out
    if sig == "SIGINT":
        assert run.stdout.strip() == "interrupted" and run.returncode == 0
    else:   # the default SIGTERM handler ends the process after the clean-up
        assert run.returncode == -15 and "interrupted" not in run.stdout
    assert "Traceback" not in run.stderr


def sleep_long(task: Task) -> int:
    time.sleep(60)
    return 0


def normal_simulate(rng, n_t, n_c, truth):
    """Invented: two arms, normal outcome with SD 2 (a tiny model: quick to compile)."""
    treated = np.r_[np.ones(n_t), np.zeros(n_c)]
    y = truth["mu"] + truth["effect"] * treated + rng.normal(0.0, 2.0, n_t + n_c)
    return {"y": y, "treated": treated}


def normal_build(data):
    import pymc as pm

    with pm.Model() as model:
        y = pm.Data("y", data["y"])
        treated = pm.Data("treated", data["treated"])
        mu = pm.Normal("mu", 0.0, 100.0)
        effect = pm.Normal("effect", 0.0, 100.0)
        pm.Normal("outcome", mu + effect * treated, 2.0, observed=y)
    return model


def test_general_model_on_the_cluster_equals_in_process(cluster):
    # the check: a small general-model run through the LocalCluster gives exactly
    # the numbers of the in-process run (one seed stream per task, whatever worker runs it)
    pytest.importorskip("pymc")
    from assurance.general.engine import simulate_general
    from assurance.general.model import GeneralModel
    from assurance.priors import Normal
    from assurance.rules.posterior import PosteriorProbability

    model = GeneralModel("invented: two arms, normal outcome, SD 2", normal_simulate,
                         normal_build, design_prior={"effect": Normal(0.8, 0.5),
                                                     "mu": Normal(1.0, 1.0)},
                         assumed={"effect": 0.8, "mu": 1.0})
    settings = dict(rule=PosteriorProbability(0.9, 0.0), trials=12, chunk=4, seed=11,
                    nuts_check=0, power=False, progress=False)
    here = simulate_general(model, [40, 80], **settings)
    there = simulate_general(model, [40, 80], executor=cluster, **settings)
    for name in ("assurance", "width_mean", "width_median", "width_q90"):
        np.testing.assert_array_equal(here[name].values, there[name].values, err_msg=name)
    # the widths come from fitted posteriors: they shrink with the size (about 2 * 1.96 *
    # 2 * sqrt(4 / n) for a known SD of 2, common practice), so a mix-up would show
    assert here["width_mean"].values[0] > here["width_mean"].values[1] > 0
