"""Count endpoint: the negative binomial fits of the power check, and the follow-up average.

1. The power check fits every simulated trial by maximum likelihood (dispersion k and two
   log rates, exposure as offset). Ours fits all trials at once (vectorised bisection, then
   the Illinois method); the peer is statsmodels' NB2 regression fitted trial by trial (the
   same estimates; tests/test_counts.py checks they agree to 1e-6). Reported per trial, on
   an invented relapse-like setting: 2 x 300 patients, k = 0.8, 10% dropout a year.
2. The average information per patient over follow-up cut by dropout
   (``_information_per_patient``), 1024 x 40 rates, against its bare numpy limit: one
   16-point Gauss-Legendre rule shared by every element (the fewest nodes; exact only where
   the integrand's pole is far away, so it is the floor, not an alternative).

No target comes from an issue for these rows; they show the cost against a peer and a limit.
Run with ``python benchmarks/bench_counts.py`` or through ``benchmarks/run.py``.
"""

from __future__ import annotations

import math
import time
import warnings

import numpy as np
from _timing import best_of

PATIENTS = 300
TRIALS = 1500
PEER_TRIALS = 20


def _trials():
    from assurance.endpoints.counts import CountEndpoint, _simulate_arm

    ep = CountEndpoint(0.6, 2.0, overdispersion=0.8, dropout_rate=0.1)
    rng = np.random.default_rng(3)
    data = [_simulate_arm(ep, rng, TRIALS, PATIENTS, rate) for rate in (0.42, 0.6)]
    start = [np.log(np.maximum(y.sum(axis=1), 1) / t.sum(axis=1)) for y, t in data]
    return data, start


def _fits() -> None:
    import statsmodels.api as sm

    from assurance.endpoints.counts import _fit_dispersion

    data, start = _trials()
    ours = best_of(lambda: _fit_dispersion(data, [s.copy() for s in start]), repeat=3,
                   number=1) / TRIALS
    design = np.column_stack([np.ones(2 * PATIENTS),
                              np.r_[np.ones(PATIENTS), np.zeros(PATIENTS)]])
    began = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i in range(PEER_TRIALS):
            y = np.concatenate([data[0][0][i], data[1][0][i]])
            t = np.concatenate([data[0][1][i], data[1][1][i]])
            sm.NegativeBinomial(y, design, exposure=t, loglike_method="nb2").fit(disp=0)
    peer = (time.perf_counter() - began) / PEER_TRIALS
    print(f"1. negative binomial fit per simulated trial (2 x {PATIENTS}, dropout): "
          f"ours {ours * 1e3:.3f} ms ({TRIALS:,} at once) | statsmodels NB2 one by one "
          f"{peer * 1e3:.1f} ms | ratio {peer / ours:,.0f}x")


def _information() -> None:
    from assurance.endpoints.counts import _information_per_patient

    rates = np.random.default_rng(1).gamma(5.0, 0.12, size=(1024, 40))
    k, d, t = 0.8, 0.1, 2.0
    x, w = np.polynomial.legendre.leggauss(16)
    s = 0.5 * t * (x + 1.0)
    weight = 0.5 * t * w * d * np.exp(-d * s)

    def bare() -> np.ndarray:
        mu = rates[..., None] * s
        atom = math.exp(-d * t) * rates * t / (1.0 + k * rates * t)
        return np.sum(weight * mu / (1.0 + k * mu), axis=-1) + atom

    ours = best_of(lambda: _information_per_patient(rates, k, d, t), repeat=5, number=5)
    limit = best_of(bare, repeat=5, number=5)
    print(f"2. information over follow-up, {rates.size:,} rates: ours {ours * 1e3:.2f} ms | "
          f"bare numpy 16-point rule {limit * 1e3:.2f} ms | ratio {ours / limit:.2f}x of the "
          "limit")


def main() -> None:
    _fits()
    _information()


if __name__ == "__main__":
    main()
