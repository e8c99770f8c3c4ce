"""Exact binary endpoint: ``evaluate`` over 50 sizes up to 500 per arm, beta priors per arm.

The design of row 6 of ``benchmarks/run.py``: control rate 0.3, ``BetaRates((30, 70), (45,
55))``, one-sided 0.025, 1:1, totals ``linspace(20, 1000, 50)`` (10 to 500 per arm), every
size enumerated exactly (power curve, type I error, assurance and the decomposition).

One row per path (test) and number of linear-algebra threads (1 and 2, set with
``threadpoolctl`` in this process):

* ours: the success region kept as runs of treatment counts and summed with prefix sums
  (no dense matrix, no matrix product);
* peer, measured in the same run: the same calculator with the previous method patched
  back in -- every table decided on the dense ``(x_t, x_c)`` grid and every sum a matrix
  product with a dense 0/1 region;
* the ratio peer / ours, and the target (issue: under 0.1 s for the z, unpooled z and
  chi-square tests, 0.2 s for Fisher's test) met or not.

Then one row per path for thread independence: time with 2 threads / time with 1 (target:
at most 1.25, the spread of repeated timings on a busy two-core machine), beside the peer's
ratio; and the largest difference between our numbers and the peer's (target 1e-12).

Times are the best of several runs (the machine is shared). Run alone with::

    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE .venv/bin/python benchmarks/bench_binary.py
"""

from __future__ import annotations

from contextlib import contextmanager
from functools import partial

import numpy as np
from _timing import best_of, verdict

best_once = partial(best_of, number=1)

SIZES = np.linspace(20, 1000, 50).round().astype(int) // 2 * 2
PATHS = (("z", 0.1), ("unpooled_z", 0.1), ("chi_square", 0.1), ("fisher_exact", 0.2))
THREAD_TARGET = 1.25
SAME_NUMBERS = 1e-12
VARIABLES = ("power", "type_one_error", "assurance", "prob_success_and_benefit",
             "power_curve")


class _DenseRegion:
    """The previous method: a dense 0/1 region, sums as matrix products."""

    def __init__(self, mask: np.ndarray):
        self.m = np.asarray(mask, dtype=float)

    def probability(self, pmf_t: np.ndarray, pmf_c: np.ndarray) -> float:
        return float(pmf_t @ self.m @ pmf_c)

    def by_treatment(self, weights_c: np.ndarray) -> np.ndarray:
        return weights_c @ self.m.T

    def by_control(self, weights_t: np.ndarray) -> np.ndarray:
        return weights_t @ self.m


@contextmanager
def _dense_peer():
    from assurance.compute import binary_exact
    from assurance.endpoints import binary

    saved = binary.success_runs
    binary.success_runs = lambda spec, n_t, n_c: _DenseRegion(
        binary_exact._dense_region(spec, n_t, n_c))
    try:
        yield
    finally:
        binary.success_runs = saved


def main() -> None:
    from threadpoolctl import threadpool_limits

    import assurance as asr

    rows, thread_rows, diffs = [], [], {}
    for test, target in PATHS:
        design = asr.TrialDesign(asr.BinaryEndpoint(0.3, test=test),
                                 asr.BetaRates((30, 70), (45, 55)))
        times: dict[tuple[str, int], float] = {}
        for threads in (1, 2):
            with threadpool_limits(limits=threads, user_api="blas"):
                ours = asr.evaluate(design, SIZES)  # warm-up, and the numbers compared
                times["ours", threads] = best_once(lambda d=design: asr.evaluate(d, SIZES), 7)
                with _dense_peer():
                    peer = asr.evaluate(design, SIZES)
                    times["peer", threads] = best_once(lambda d=design: asr.evaluate(d, SIZES), 3)
            rows.append((test, threads, times["ours", threads], times["peer", threads], target))
        diffs[test] = max(float(np.max(np.abs(ours[v].values - peer[v].values)))
                          for v in VARIABLES)
        thread_rows.append((test, times["ours", 2] / times["ours", 1],
                            times["peer", 2] / times["peer", 1]))

    print("exact binary, evaluate over 50 sizes (10..500 per arm), beta priors per arm")
    print(f"  {'path':<13} {'threads':>7} {'ours':>9} {'dense peer':>11} {'peer/ours':>10}"
          "   target")
    for test, threads, ours_t, peer_t, target in rows:
        print(f"  {test:<13} {threads:>7} {ours_t:>8.3f}s {peer_t:>10.3f}s "
              f"{peer_t / ours_t:>9.1f}x   < {target:g} s: {verdict(ours_t < target)}")
    print("  thread independence: time with 2 threads / time with 1")
    for test, ours_r, peer_r in thread_rows:
        print(f"  {test:<13} ours {ours_r:5.2f} | dense peer {peer_r:5.2f}   "
              f"<= {THREAD_TARGET:g}: {verdict(ours_r <= THREAD_TARGET)}")
    print("  same numbers: largest |ours - peer| over " + ", ".join(VARIABLES))
    for test, diff in diffs.items():
        print(f"  {test:<13} {diff:.1e}   <= {SAME_NUMBERS:g}: {verdict(diff <= SAME_NUMBERS)}")


if __name__ == "__main__":
    main()
