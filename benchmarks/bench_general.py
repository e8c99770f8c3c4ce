"""General analysis models: the Laplace fast path against NUTS, a planning run over local
worker processes, and the same run on a Dask LocalCluster with one and with two workers.

The model throughout is the built-in logistic regression with a binary covariate (an
invented scenario: control response 30%, log odds ratio prior N(0.5, 0.3), 40% of patients
with the covariate, its log odds ratio 0.7), success when P(log OR > 0 | data) >= 0.975, at
ten total sizes 100, 200, ..., 1000.

1. Per simulated trial: the Laplace fit (posterior mode and curvature through the compiled
   log density, gradient and Hessian) against NUTS with the engine's defaults (2 chains of
   500 tuning steps and 500 draws), both on the same compiled model and data, warm. Target
   (issue): the fast path at least 300 times faster.
2. 1,000 trials x 10 sizes (prior scenario, no NUTS check) with ``executor="processes"`` on
   this machine's cores, cold (worker processes started, PyMC imported and the model compiled
   inside the timed run), beside the same run in this process and the limit of the fits
   alone (Laplace time per trial x 10,000 / cores). Target (issue): under 60 s on 2 cores.
3. The same run on a LocalCluster (one thread per worker process) with 2 workers against 1
   worker; the clusters are started and PyMC imported on the workers before the clock starts,
   the model compiles inside the run (first run) and is cached (second run). Target (issue):
   2 workers at least 1.6 times faster. Beside it, the limit of this machine measured on the
   same cluster: two copies of a bare CPU task (numpy and plain Python) on two workers against
   one copy on one. On a two-core virtual machine the two cores are not always two full
   cores, and the scheduler and client share them with the workers.

Run alone with::

    .venv/bin/python benchmarks/bench_general.py
"""

from __future__ import annotations

import os
import time
import warnings

import numpy as np
from _timing import best_of, verdict

SIZES = list(range(100, 1001, 100))
TRIALS = 1000
FAST_OVER_NUTS = 300.0      # issue: the fast path at least 300x faster than NUTS per trial
RUN_TARGET = 60.0           # seconds, 1,000 trials x 10 sizes on 2 cores
CLUSTER_SPEEDUP = 1.6       # 2 workers over 1


def _setting():
    from assurance.general.builtin import logistic
    from assurance.priors import Normal
    from assurance.rules.posterior import PosteriorProbability

    model = logistic(Normal(0.5, 0.3), 0.5, control_rate=0.3, covariate_share=0.4,
                     covariate_log_odds=0.7)
    return model, PosteriorProbability(0.975, 0.0)


def _run(model, rule, executor) -> float:
    from assurance.general.engine import simulate_general

    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        simulate_general(model, SIZES, rule=rule, trials=TRIALS, seed=1, nuts_check=0,
                         power=False, progress=False, executor=executor)
    return time.perf_counter() - start


def _fast_and_nuts(model) -> tuple[float, float]:
    from assurance.general.fit import CompiledModel

    rng = np.random.default_rng(7)
    n_t, n_c = model.arm_sizes(300)
    truth = {"effect": 0.5, "control_rate": 0.3}
    data = [model.simulate(rng, n_t, n_c, truth) for _ in range(200)]
    compiled = CompiledModel(model, data[0])

    def fast():
        for d in data:
            compiled.laplace(d)

    per_fast = best_of(fast, repeat=5, number=1, warm_up=True) / len(data)
    compiled.nuts(data[0], seed=0)            # builds the NUTS step once
    k = 4
    start = time.perf_counter()
    for i in range(k):
        compiled.nuts(data[i + 1], seed=i + 1)
    per_nuts = (time.perf_counter() - start) / k
    return per_fast, per_nuts


def _cluster_times(model, rule, workers: int) -> tuple[float, float, float | None]:
    """Cold and warm run times, and (2 workers) the machine's capacity: how much faster two
    workers finish two copies of a bare CPU task than one worker finishes one copy
    (:func:`_bare_work`: numpy and plain Python, no PyMC), measured on the same cluster."""
    from distributed import Client, LocalCluster

    with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster, \
            Client(cluster, set_as_default=False) as client:
        client.run(_import_pymc)
        first = _run(model, rule, client)
        second = _run(model, rule, client)
        capacity = None
        if workers == 2:
            ratios = []
            for _ in range(3):
                start = time.perf_counter()
                client.submit(_bare_work, 0, pure=False).result()
                one = time.perf_counter() - start
                start = time.perf_counter()
                client.gather(client.map(_bare_work, [1, 2], pure=False))
                ratios.append(2 * one / (time.perf_counter() - start))
            capacity = float(np.median(ratios))
    return first, second, capacity


def _bare_work(seed: int) -> float:
    """About a second of CPU work of the kind a simulated trial does (small linear algebra,
    elementwise maths, Python loops)."""
    rng = np.random.default_rng(seed)
    a = rng.random((60, 60))
    total = 0.0
    for i in range(400):
        a = np.tanh(a @ a.T / 60.0)
        for j in range(500):
            total += (i * j) % 7
    return total + float(a.sum())


def _import_pymc() -> None:
    import pymc  # noqa: F401


def main() -> None:
    import pymc  # noqa: F401  (imported before any clock starts)

    model, rule = _setting()
    cores = os.cpu_count() or 1
    print(f"   (load average before: {os.getloadavg()[0]:.1f} on {cores} cores; the ratios "
          "below assume an otherwise idle machine)")

    per_fast, per_nuts = _fast_and_nuts(model)
    ratio = per_nuts / per_fast
    print("1. logistic model, n = 300, per simulated trial (warm, same compiled model)")
    print(f"   Laplace fast path {per_fast * 1e3:.3f} ms | NUTS 2 x (500 + 500) "
          f"{per_nuts * 1e3:.0f} ms | ratio {ratio:,.0f}x | target >= {FAST_OVER_NUTS:g}x: "
          f"{verdict(ratio >= FAST_OVER_NUTS)}")

    here = _run(model, rule, None)
    procs = _run(model, rule, "processes")
    limit = per_fast * TRIALS * len(SIZES) / cores
    print(f"2. {TRIALS:,} trials x {len(SIZES)} sizes (n = {SIZES[0]}..{SIZES[-1]}), "
          f"no NUTS check, {cores} cores")
    print(f"   executor='processes' {procs:.1f} s (cold: workers start, import PyMC, "
          f"compile) | in this process {here:.1f} s | ratio {here / procs:.2f}x | fits "
          f"alone / cores {limit:.1f} s | target under {RUN_TARGET:g} s: "
          f"{verdict(procs < RUN_TARGET)}")

    one_cold, one_warm, _ = _cluster_times(model, rule, 1)
    two_cold, two_warm, capacity = _cluster_times(model, rule, 2)
    speed_cold, speed_warm = one_cold / two_cold, one_warm / two_warm
    print("3. the same run on a LocalCluster, 1 thread per worker process")
    print(f"   first run (compiles): 1 worker {one_cold:.1f} s | 2 workers {two_cold:.1f} s | "
          f"ratio {speed_cold:.2f}x | target >= {CLUSTER_SPEEDUP:g}x: "
          f"{verdict(speed_cold >= CLUSTER_SPEEDUP)}")
    print(f"   second run (compiled models cached on the workers): 1 worker {one_warm:.1f} s "
          f"| 2 workers {two_warm:.1f} s | ratio {speed_warm:.2f}x")
    print(f"   this machine's limit, same cluster: a bare CPU task on 2 workers {capacity:.2f}x "
          f"faster than on 1 | first run {speed_cold / capacity:.0%} and second run "
          f"{speed_warm / capacity:.0%} of it")
    print(f"   (load average after: {os.getloadavg()[0]:.1f})")


if __name__ == "__main__":
    main()
