"""Speed of the t analysis and of the quadrature over an uncertain SD.

Each row: our time, a peer or a bare limit measured in the same run, their ratio, and the
target with "met" / "not met". Run alone (``python benchmarks/bench_t_and_sd.py``) or through
``benchmarks/run.py``. Times are the best mean over several batches (warm: node caches
filled); "cold" clears the node caches and the cached critical values before every call.

Rows
----
1. ``evaluate``, t analysis, normal prior with a relevant effect, 100 sizes, warm, against
   statsmodels' ``TTestIndPower().power`` called once per size (power only). Target 5x.
2. The same, cold.
3. ``evaluate`` with a z analysis on the same grid: the share of ``evaluate`` that is not the
   t test (dataset, labels, ceiling, checks); its ratio to the loop bounds row 1.
4. Classical t power alone over the 100 sizes (the endpoint's calculator) against the same
   loop, and the bare limit: one vectorised ``scipy.special.nctdtr`` call. Target 5x.
5. Uncertain SD (scaled inverse chi-square, 30 df), normal prior, relevant effect, 50 sizes:
   ``evaluate`` by quadrature against the Monte Carlo route it replaces (20,000 draws, same
   sizes, measured here). Target under 20 ms.
6. The weekly-injection case study's design over 50 sizes (t analysis, SD prior with 40 df,
   non-inferiority). Target under 20 ms.
"""

from __future__ import annotations

import numpy as np
from _timing import best_of


def _clear_caches() -> None:
    from assurance.compute import sd_quadrature as sq
    from assurance.endpoints import continuous

    sq._hermite_flat.cache_clear()
    sq._RATIO_TABLES.clear()
    sq._bulk_log_ratio.cache_clear()
    sq._nodes_for.cache_clear()
    continuous._critical_t_cached.cache_clear()


def _row(label: str, ours: float, peer_label: str, peer: float, target: str | None,
         met: bool = False) -> None:
    verdict = "no target (context)" if target is None else \
        f"target {target}: {'met' if met else 'not met'}"
    print(f"{label:<46} {ours * 1e3:8.3f} ms | {peer_label:<34} {peer * 1e3:8.3f} ms"
          f" | ratio {peer / ours:6.2f}x | {verdict}")


def main() -> None:
    from scipy import special, stats
    from statsmodels.stats.power import TTestIndPower

    import assurance as asr
    from assurance.compute.normal_outcome import EffectDraws, monte_carlo_success

    sigma, mean, sd = 10.0, 4.0, 3.0
    n_total = np.arange(20, 2020, 20)  # 100 sizes

    def design(analysis: str) -> asr.TrialDesign:
        return asr.TrialDesign(asr.ContinuousEndpoint(sigma=sigma, analysis=analysis),
                               asr.Normal(mean, sd), relevant_effect=3.0)

    t_design, z_design = design("t"), design("z")
    solver = TTestIndPower()

    def loop() -> None:
        for n in n_total:
            solver.power(effect_size=mean / sigma, nobs1=n // 2, alpha=0.025, ratio=1.0,
                         alternative="larger")

    peer = best_of(loop, repeat=3, number=3)
    asr.evaluate(t_design, n_total)
    warm = best_of(lambda: asr.evaluate(t_design, n_total))

    def cold() -> None:
        _clear_caches()
        asr.evaluate(design("t"), n_total)

    cold_t = best_of(cold, repeat=5, number=5)
    asr.evaluate(z_design, n_total)
    z_time = best_of(lambda: asr.evaluate(z_design, n_total))

    endpoint = t_design.endpoint
    n_t, n_c = endpoint.arm_sizes(n_total)
    calc = endpoint.calculator(asr.PointMass(mean), asr.Significance(0.025), draws=100, seed=1)
    power_t = best_of(lambda: endpoint.calculator(
        asr.PointMass(mean), asr.Significance(0.025), draws=100, seed=1).power(mean, n_t, n_c),
        number=50)
    df = (n_t + n_c - 2).astype(float)
    ncp = mean / (sigma * np.sqrt(1 / n_t + 1 / n_c))
    crit = stats.t.isf(0.025, df)
    bare = best_of(lambda: special.nctdtr(df, -ncp, -crit), number=50)
    assert np.allclose(calc.power(mean, n_t, n_c), special.nctdtr(df, -ncp, -crit), atol=1e-12)

    print("t analysis, 100 sizes (normal prior N(4, 3^2), SD 10, relevant effect 3)")
    _row("1. evaluate, t analysis, warm", warm, "statsmodels power loop", peer, ">= 5x",
         peer / warm >= 5)
    _row("2. evaluate, t analysis, cold", cold_t, "statsmodels power loop", peer, ">= 5x",
         peer / cold_t >= 5)
    _row("3. evaluate, z analysis (not t-specific part)", z_time, "statsmodels power loop",
         peer, None)
    _row("4. t power alone (calculator.power)", power_t, "statsmodels power loop", peer,
         ">= 5x", peer / power_t >= 5)
    _row("   t power alone (calculator.power)", power_t, "bare nctdtr, one call", bare, None)

    sizes = np.arange(40, 2040, 40)  # 50 sizes
    sd_design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=sigma), asr.Normal(mean, sd),
                                sigma_prior=asr.ScaledInvChiSquare(30, sigma),
                                relevant_effect=3.0)
    asr.evaluate(sd_design, sizes)
    quad = best_of(lambda: asr.evaluate(sd_design, sizes), repeat=5, number=5)

    def monte_carlo() -> None:
        draws = EffectDraws.draw(sd_design.benefit_prior, sd_design.sigma_prior, 20_000,
                                 seed=1)
        ep = sd_design.endpoint
        a, b = ep.arm_sizes(sizes)
        from assurance.compute.normal_outcome import Cut

        monte_carlo_success(draws, sd_design.benefit_rule, se_factor=ep.se_factor(a, b),
                            df=ep.degrees_of_freedom(a, b), analysis="t",
                            cuts=[Cut(0.0), Cut(3.0, inclusive=True)])

    mc = best_of(monte_carlo, repeat=2, number=1)
    print("uncertain SD, 50 sizes")
    _row("5. evaluate, SD prior, quadrature", quad, "Monte Carlo 20,000 draws (success)",
         mc, "< 20 ms", quad < 0.020)

    injection = asr.TrialDesign(
        asr.ContinuousEndpoint(sigma=12.0, analysis="t", better="lower"),
        asr.Normal(0.5, 1.5), rule=asr.Significance(alpha=0.025, margin=3.0),
        assumed_effect=0.0, relevant_effect=1.0, power_effects=(-1.0, 2.0),
        sigma_prior=asr.ScaledInvChiSquare(40.0, 12.0))
    grid = np.arange(20, 1020, 20)
    asr.evaluate(injection, grid)
    inj = best_of(lambda: asr.evaluate(injection, grid), repeat=5, number=5)

    def injection_mc() -> None:
        draws = EffectDraws.draw(injection.benefit_prior, injection.sigma_prior, 20_000,
                                 seed=1)
        ep = injection.endpoint
        a, b = ep.arm_sizes(grid)
        from assurance.compute.normal_outcome import Cut

        monte_carlo_success(draws, injection.benefit_rule, se_factor=ep.se_factor(a, b),
                            df=ep.degrees_of_freedom(a, b), analysis="t",
                            cuts=[Cut(0.0), Cut(-1.0, inclusive=True)])

    inj_mc = best_of(injection_mc, repeat=2, number=1)
    _row("6. evaluate, weekly injection design", inj, "Monte Carlo 20,000 draws (success)",
         inj_mc, "< 20 ms", inj < 0.020)


if __name__ == "__main__":
    main()
