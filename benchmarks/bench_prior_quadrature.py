"""Speed of evaluate over 100 sizes: closed form, the fixed rule over a non-normal prior, and
the benefit scale for ``better = "lower"``.

One row per path: the time measured, the peer or bare-numpy limit measured in the same run,
their ratio and the target (met / not met). Run alone with
``python benchmarks/bench_prior_quadrature.py`` or through ``benchmarks/run.py``.

Paths and targets (from the hardening issue):

1. ``evaluate``, normal design prior, z analysis, relevant effect: within 3x of a bare
   numpy/scipy computation of every returned quantity on the same grid (arm split, power
   curve, type I error, assurance, both joint probabilities, conditional assurance, miss
   probability, ceiling and prior probabilities).
2. The same design with ``better = "lower"``: within 1.2x of ``"higher"``.
3. Student t, frozen scipy (logistic) and a mixture with a Student t part, z analysis: under
   10 ms; the peer is the adaptive quadrature the package used before (``quad_vec`` on the
   prior's probability scale with the thresholds as breakpoints), for the same three
   probabilities per size.
4. The fixed rule alone over the thresholds of a t analysis (32 sample-SD nodes x 100
   sizes): under 10 ms, against the same adaptive peer.
5. ``evaluate`` with a t analysis and the priors of row 3: under 10 ms (warm and cold: cold
   clears the prior rule's node cache); the peer is the package's former adaptive rule for
   this path (``quad_vec`` of the non-central t power over the prior's probability scale,
   success and two cuts).
"""

from __future__ import annotations

import time
from functools import partial

import numpy as np
from _timing import best_of
from scipy import integrate, special, stats

best_warm = partial(best_of, warm_up=True)

N_TOTAL = np.arange(20, 2020, 20)  # 100 sizes
SIGMA, MEAN, SD, RELEVANT, ALPHA = 10.0, 4.0, 3.0, 3.0, 0.025


def interleaved(funcs: dict, rounds: int = 15, number: int = 30) -> dict:
    """Best time of each function, measured in alternating batches (fair under shared load)."""
    for f in funcs.values():
        f()
    best = {k: float("inf") for k in funcs}
    for _ in range(rounds):
        for key, f in funcs.items():
            start = time.perf_counter()
            for _ in range(number):
                f()
            best[key] = min(best[key], (time.perf_counter() - start) / number)
    return best


def _orthant(h, k, rho):
    """P(Z1 > h, Z2 > k), Owen's T identity (no zero arguments on this grid)."""
    x, y = -h, -k
    root = np.sqrt(1.0 - rho * rho)
    ax = (y - rho * x) / (x * root)
    ay = (x - rho * y) / (y * root)
    beta = 0.5 * ((x > 0) != (y > 0))
    return 0.5 * (special.ndtr(x) + special.ndtr(y)) - special.owens_t(x, ax) \
        - special.owens_t(y, ay) - beta


def bare_numpy(n_total=N_TOTAL):
    """Every quantity evaluate returns for the normal-prior z design, in plain numpy/scipy."""
    n_c = n_total // 2
    n_t = n_total - n_c
    se = SIGMA * np.sqrt(1.0 / n_t + 1.0 / n_c)
    c = -special.ndtri(ALPHA) * se
    effects = np.array([RELEVANT, MEAN])
    curve = special.ndtr((effects[:, None] - c) / se)
    type_one = special.ndtr(-c / se)
    tau = np.sqrt(SD * SD + se * se)
    h = (c - MEAN) / tau
    assurance = special.ndtr(-h)
    rho = SD / tau
    benefit = _orthant(h, np.full(h.shape, -MEAN / SD), rho)
    relevant = _orthant(h, np.full(h.shape, (RELEVANT - MEAN) / SD), rho)
    p_rel = special.ndtr((MEAN - RELEVANT) / SD)
    p_ben = special.ndtr(MEAN / SD)
    return (n_t, n_c, curve, curve[1], type_one, assurance, benefit, relevant,
            relevant / p_rel, p_rel - relevant, p_ben, p_ben, p_rel)


def former_adaptive(part, c, s, cut):
    """The package's former rule: quad_vec of Phi((F^-1(u) - c)/se) over u in (F(cut), 1)
    with breakpoints at F(c) and F(c +- 4 se), scalar ppf at every node."""
    u_low = 0.0 if cut is None else float(part.cdf(cut))

    def integrand(u):
        return special.ndtr((part.ppf(min(max(u, 1e-300), 1 - 1e-16)) - c) / s)

    centres = np.unique(np.concatenate([c.ravel(), (c - 4 * s).ravel(), (c + 4 * s).ravel()]))
    if centres.size > 150:
        centres = np.quantile(centres, np.linspace(0.0, 1.0, 150))
    points = [float(v) for v in np.unique(part.cdf(centres)) if u_low < v < 1.0]
    value, _ = integrate.quad_vec(integrand, u_low, 1.0, epsabs=1e-10, epsrel=1e-9,
                                  limit=4000, norm="max", points=points)
    return value


def former_adaptive_t(part, se, df, crit, cuts):
    """The package's former rule for a t analysis: quad_vec of the non-central t power over
    u = F(delta), with breakpoints where the power curve rises and at the cuts."""
    from assurance.compute.normal_outcome import nct_sf

    u_cuts = [float(part.cdf(cut)) for cut in cuts]
    ratios = np.array([0.0, 0.25, 0.5, 0.75, 1.0, 1.5, 2.0, 4.0])
    rise = (crit * se)[None, :] * ratios[:, None]
    centres = np.unique(np.concatenate([rise.ravel(), (rise - 4 * se).ravel(),
                                        (rise + 4 * se).ravel()]))
    if centres.size > 150:
        centres = np.quantile(centres, np.linspace(0.0, 1.0, 150))
    u_points = np.unique(np.concatenate([np.asarray(part.cdf(centres), dtype=float), u_cuts]))
    points = [float(v) for v in u_points if 0.0 < v < 1.0]

    def integrand(u):
        power = nct_sf(crit, df, part.ppf(min(max(u, 1e-300), 1 - 1e-16)) / se)
        return np.concatenate([power] + [power * (u > uc) for uc in u_cuts])

    value, _ = integrate.quad_vec(integrand, 0.0, 1.0, epsabs=1e-11, epsrel=1e-10,
                                  limit=4000, norm="max", points=points or None)
    return value


def _row(label: str, ours: float, peer: float, peer_label: str, target: str, met: bool,
         unit: str = "ms") -> None:
    scale = 1e3 if unit == "ms" else 1e6
    print(f"  {label:<46s} {ours * scale:9.3f} {unit} | {peer_label} {peer * scale:9.3f} {unit}"
          f" | ratio {ours / peer:.3g}x | target {target}: {'met' if met else 'NOT MET'}")


def main() -> None:
    import assurance as asr
    from assurance.compute.normal_outcome import Cut
    from assurance.compute.prior_predictive import prob_estimate_above
    from assurance.compute.sd_quadrature import sd_ratio_nodes

    print("bench_prior_quadrature: 100 sizes (20, 40, ..., 2000), sigma 10")

    # 1-2. closed form, and the benefit scale
    higher = asr.TrialDesign(asr.ContinuousEndpoint(SIGMA, analysis="z"),
                             asr.Normal(MEAN, SD), relevant_effect=RELEVANT)
    lower = asr.TrialDesign(asr.ContinuousEndpoint(SIGMA, analysis="z", better="lower"),
                            asr.Normal(-MEAN, SD), relevant_effect=-RELEVANT)
    ds = asr.evaluate(higher, N_TOTAL)
    ref = bare_numpy()
    assert np.allclose(ds.assurance.values, ref[5], atol=1e-12, rtol=0)
    assert np.allclose(ds.prob_success_and_relevant.values, ref[7], atol=1e-12, rtol=0)
    t = interleaved({"higher": lambda: asr.evaluate(higher, N_TOTAL),
                     "lower": lambda: asr.evaluate(lower, N_TOTAL),
                     "bare": bare_numpy})
    _row("1. evaluate, normal prior, z (Dataset)", t["higher"], t["bare"], "bare numpy",
         "<= 3x bare", t["higher"] <= 3 * t["bare"], unit="us")
    _row('2. evaluate, better = "lower"', t["lower"], t["higher"], '"higher"', '<= 1.2x "higher"',
         t["lower"] <= 1.2 * t["higher"], unit="us")

    # 3. non-normal priors through the fixed rule (z analysis)
    priors = {
        "student t(5, 4, 3)": asr.StudentT(5, MEAN, SD),
        "scipy logistic(4, 2)": asr.FromScipy(stats.logistic(MEAN, 2.0)),
        "mixture 0.2 x 0 + 0.8 x t(5, 4, 3)": asr.Mixture(
            [asr.PointMass(0.0), asr.StudentT(5, MEAN, SD)], [0.2, 0.8]),
    }
    for name, prior in priors.items():
        design = asr.TrialDesign(asr.ContinuousEndpoint(SIGMA, analysis="z"), prior,
                                 relevant_effect=RELEVANT)
        ours = best_warm(lambda d=design: asr.evaluate(d, N_TOTAL), repeat=5, number=5)
        n_t, n_c = design.endpoint.arm_sizes(N_TOTAL)
        se = SIGMA * np.sqrt(1.0 / n_t + 1.0 / n_c)
        c = stats.norm.isf(ALPHA) * se
        parts = [part for _, part in design.benefit_prior.parts()
                 if not isinstance(part, asr.PointMass)]

        def peer(parts=parts, c=c, se=se):
            for part in parts:
                for cut in (None, 0.0, RELEVANT):
                    former_adaptive(part, c, se, cut)

        theirs = best_warm(peer, repeat=1, number=1)
        _row(f"3. evaluate, {name}", ours, theirs, "former adaptive", "< 10 ms", ours < 0.010)

    # 4. the fixed rule over the thresholds of a t analysis
    part = asr.StudentT(5, MEAN, SD)
    n_t, n_c = N_TOTAL - N_TOTAL // 2, N_TOTAL // 2
    se = SIGMA * np.sqrt(1.0 / n_t + 1.0 / n_c)
    df = (N_TOTAL - 2).astype(float)
    ratio, _ = sd_ratio_nodes(df)
    c = stats.t.isf(ALPHA, df)[None, :] * se[None, :] * ratio

    def fixed():
        for cut in (Cut(0.0), Cut(RELEVANT, True), None):
            prob_estimate_above(part, c, se[None, :],
                                effect_above=None if cut is None else cut.value)

    ours = best_warm(fixed, repeat=5, number=3)
    theirs = best_warm(lambda: [former_adaptive(part, c, se[None, :], cut)
                                for cut in (None, 0.0, RELEVANT)], repeat=1, number=1)
    _row(f"4. fixed rule, {c.shape[0]} x {c.shape[1]} thresholds (t nodes)", ours, theirs,
         "former adaptive", "< 10 ms", ours < 0.010)

    # 5. t analysis with the priors of row 3
    from assurance.compute import prior_predictive

    crit_t = stats.t.isf(ALPHA, df)
    for name, prior in priors.items():
        design = asr.TrialDesign(asr.ContinuousEndpoint(SIGMA, analysis="t"), prior,
                                 relevant_effect=RELEVANT)
        warm = best_warm(lambda d=design: asr.evaluate(d, N_TOTAL), repeat=5, number=5)

        def cold(d=design):
            prior_predictive._NODE_CACHE.clear()
            asr.evaluate(d, N_TOTAL)

        cold_time = best_warm(cold, repeat=5, number=3)
        parts = [part for _, part in design.benefit_prior.parts()
                 if not isinstance(part, asr.PointMass)]

        def peer_t(parts=parts):
            for part in parts:
                former_adaptive_t(part, se, df, crit_t, (0.0, RELEVANT))

        theirs = best_warm(peer_t, repeat=1, number=1)
        _row(f"5. evaluate, t, {name}, warm", warm, theirs, "former adaptive", "< 10 ms",
             warm < 0.010)
        _row(f"5. evaluate, t, {name}, cold", cold_time, theirs, "former adaptive",
             "< 10 ms", cold_time < 0.010)


if __name__ == "__main__":
    main()
