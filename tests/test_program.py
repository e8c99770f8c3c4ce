"""The development program engine (phase 2, a go decision, then phase 3).

Checks against computations outside the package:

* the normal-normal case in closed form: with a normal design prior ``N(m, v)`` and z
  analyses, the two estimates are jointly normal given nothing, ``(d2, d3) ~ N((m, m),
  [[v + se2^2, v], [v, v + se3^2]])``, so P(go) is a normal tail (O'Hagan, Stevens & Campbell
  2005, Pharmaceutical Statistics 4:187-201, eq. for assurance) and the program's
  probability of success is a bivariate normal orthant, computed here with
  ``scipy.stats.multivariate_normal``;
* a point mass at no effect: each trial passes with its one-sided level, so P(go) is
  alpha2 and the program's success alpha2 * alpha3 (common practice: the level of a test);
* other priors by ``scipy.integrate.quad`` written in the test;
* whole programs simulated (by the package and, independently, by a few lines of numpy in
  the test), within a multiple of the Monte Carlo standard error;
* the re-planned phase 3 size against a brute-force search written with scipy.

A published worked example of phase 2 to phase 3 probability of success with numbers we
could verify was looked for (web pages and documentation); none could be verified in the
time available, so none is used here (and none is invented).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

import assurance as asr
from assurance.errors import AssuranceInputError
from assurance.program.development import (
    CHECK_LIMIT,
    ProgramDesign,
    Replanning,
    Surrogate,
    effect_curves,
    prior_nodes,
    program_grid,
    program_result,
    replan_table,
    simulate_program,
)

Z = stats.norm


def _z_design(sigma: float, prior, alpha: float = 0.025, **kwargs) -> asr.TrialDesign:
    return asr.TrialDesign(asr.ContinuousEndpoint(sigma=sigma, analysis="z"), prior,
                           rule=asr.Significance(alpha=alpha), **kwargs)


def _se(sigma: float, n: int) -> float:
    """SE of a two-arm difference at total n, arms n - n//2 and n//2 (written here)."""
    return sigma * math.sqrt(1 / (n - n // 2) + 1 / (n // 2))


# ------------------------------------------------------------------------------------------
# closed forms
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("m, s, n2, n3, a2", [(3.0, 2.0, 100, 400, 0.1),
                                             (1.0, 4.0, 60, 800, 0.2),
                                             (-1.0, 2.0, 200, 300, 0.05)])
def test_normal_prior_z_tests_match_the_bivariate_normal(m, s, n2, n3, a2):
    prior = asr.Normal(m, s)
    program = ProgramDesign(_z_design(10.0, prior, a2), _z_design(12.0, prior), n2=n2, n3=n3)
    r = program_result(program)
    se2, se3 = _se(10.0, n2), _se(12.0, n3)
    c2, c3 = Z.ppf(1 - a2) * se2, Z.ppf(0.975) * se3
    v = s * s
    # O'Hagan et al. (2005): P(d > c) = Phi((m - c) / sqrt(v + se^2))
    assert r.p_go == pytest.approx(Z.sf((c2 - m) / math.sqrt(v + se2**2)), abs=1e-7)
    assert r.phase3_alone == pytest.approx(Z.sf((c3 - m) / math.sqrt(v + se3**2)), abs=1e-7)
    cov = [[v + se2**2, v], [v, v + se3**2]]
    # P(d2 > c2, d3 > c3) = P(-d2 < -c2, -d3 < -c3); mvn cdf has error ~1e-6 (its abseps)
    both = stats.multivariate_normal(mean=[-m, -m], cov=cov).cdf([-c2, -c3])
    assert r.pos == pytest.approx(both, abs=2e-5)
    assert r.p_success_given_go == pytest.approx(both / r.p_go, abs=5e-5)
    # P(go and delta > 0): (d2, delta) jointly normal, cov v
    works = stats.multivariate_normal(mean=[-m, -m], cov=[[v + se2**2, v], [v, v]]).cdf(
        [-c2, 0.0])
    assert r.p_go_and_works == pytest.approx(works, abs=2e-5)
    assert r.expected_patients == pytest.approx(n2 + r.p_go * n3, rel=1e-12)


def test_surrogate_line_and_noise_match_the_bivariate_normal():
    prior = asr.Normal(10.0, 5.0)
    a, b, tau = 1.0, 0.6, 2.0
    program = ProgramDesign(_z_design(20.0, prior, 0.1), _z_design(25.0, prior), n2=150,
                            n3=500, surrogate=Surrogate(a, b, tau))
    r = program_result(program)
    se2, se3 = _se(20.0, 150), _se(25.0, 500)
    c2, c3 = Z.ppf(0.9) * se2, Z.ppf(0.975) * se3
    v = 25.0
    mean = [-(a + b * 10.0), -10.0]  # d2 = a + b delta + e + noise; d3 = delta + noise
    cov = [[b * b * v + tau**2 + se2**2, b * v], [b * v, v + se3**2]]
    assert r.p_go == pytest.approx(Z.sf((c2 + mean[0]) / math.sqrt(cov[0][0])), abs=1e-7)
    assert r.pos == pytest.approx(stats.multivariate_normal(mean, cov).cdf([-c2, -c3]),
                                  abs=2e-5)


def test_no_effect_passes_each_trial_at_its_level():
    # common practice: under the null a one-sided level-alpha test passes with probability
    # alpha; the trials are independent, so the program passes with alpha2 * alpha3
    null = asr.PointMass(0.0)
    program = ProgramDesign(_z_design(5.0, null, 0.1), _z_design(5.0, null, 0.025), n2=50,
                            n3=500)
    r = program_result(program)
    assert r.p_go == pytest.approx(0.1, abs=1e-12)
    assert r.pos == pytest.approx(0.1 * 0.025, abs=1e-12)
    assert r.false_go == pytest.approx(0.1, abs=1e-12)
    assert r.p_no_benefit == 1.0 and r.p_go_and_works == 0.0


def test_a_t_analysed_phase3_and_a_mixture_prior_match_scipy_quad():
    # the integrand written here: P(go | delta) as a normal tail, P(success | delta) from
    # the non-central t (scipy.stats.nct), the prior's density and its point mass
    prior = asr.Mixture([asr.PointMass(0.0), asr.Normal(15.0, 8.0)], [0.3, 0.7])
    p3 = asr.TrialDesign(asr.ContinuousEndpoint(sigma=50.0), prior,
                         rule=asr.Significance(alpha=0.05, sided="two"))
    program = ProgramDesign(_z_design(45.0, prior, 0.1), p3, n2=120, n3=400)
    r = program_result(program)
    se2 = _se(45.0, 120)
    c2 = Z.ppf(0.9) * se2
    df = 398
    tcrit = stats.t.ppf(0.975, df)

    def go(d):
        return Z.sf((c2 - d) / se2)

    def win(d):
        return stats.nct.sf(tcrit, df, d / _se(50.0, 400))

    dens = stats.norm(15.0, 8.0).pdf
    pos = 0.3 * go(0.0) * win(0.0) + 0.7 * integrate.quad(
        lambda d: go(d) * win(d) * dens(d), -np.inf, np.inf, epsabs=1e-11)[0]
    p_go = 0.3 * go(0.0) + 0.7 * integrate.quad(lambda d: go(d) * dens(d), -np.inf,
                                                np.inf, epsabs=1e-11)[0]
    none = 0.3 * go(0.0) + 0.7 * integrate.quad(lambda d: go(d) * dens(d), -np.inf, 0.0,
                                                epsabs=1e-11)[0]
    assert r.pos == pytest.approx(pos, abs=1e-7)
    assert r.p_go == pytest.approx(p_go, abs=1e-7)
    assert r.false_go == pytest.approx(none / (0.3 + 0.7 * stats.norm(15, 8).cdf(0)),
                                       abs=1e-7)


def test_prior_nodes_integrate_moments_of_a_student_t_prior():
    # scipy.stats.t moments: mean loc, variance scale^2 df / (df - 2)
    x, w = prior_nodes(asr.StudentT(5.0, 2.0, 1.5), breaks=[0.0])
    assert w.sum() == pytest.approx(1.0, abs=1e-9)
    assert (w * x).sum() == pytest.approx(2.0, abs=1e-6)
    assert (w * (x - 2.0) ** 2).sum() == pytest.approx(1.5**2 * 5 / 3, rel=1e-3)


# ------------------------------------------------------------------------------------------
# simulation
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_simulated_programs_agree_with_the_computed_figures(seed):
    prior = asr.Mixture([asr.PointMass(0.0), asr.Normal(4.0, 3.0)], [0.2, 0.8])
    p3 = asr.TrialDesign(asr.ContinuousEndpoint(sigma=15.0), prior)  # t analysis
    program = ProgramDesign(_z_design(12.0, prior, 0.15), p3, n2=80, n3=300,
                            surrogate=Surrogate(0.5, 0.9, 1.0))
    r = program_result(program)
    sim = simulate_program(program, programs=30_000, seed=seed)
    for name in ("p_go", "pos", "p_go_and_works", "expected_patients"):
        # CHECK_LIMIT (4) MC SE: a false alarm about once in 16,000 per figure
        assert abs(getattr(r, name) - sim[name]) <= CHECK_LIMIT * sim[name + "_mcse"], name


def test_a_simulation_written_here_agrees_with_the_computed_pos():
    # an independent simulation in plain numpy: effect, phase 2 z test, phase 3 z test
    rng = np.random.default_rng(11)
    m, s, n2, n3 = 2.0, 1.5, 100, 300
    prior = asr.Normal(m, s)
    program = ProgramDesign(_z_design(8.0, prior, 0.1), _z_design(8.0, prior), n2=n2, n3=n3,
                            go_threshold=1.0)
    k = 200_000
    delta = rng.normal(m, s, k)
    d2 = rng.normal(delta, _se(8.0, n2))
    d3 = rng.normal(delta, _se(8.0, n3))
    win = (d2 >= 1.0) & (d3 / _se(8.0, n3) > Z.ppf(0.975))
    mcse = win.std(ddof=1) / math.sqrt(k)
    assert abs(program_result(program).pos - win.mean()) <= 4 * mcse


# ------------------------------------------------------------------------------------------
# re-planning
# ------------------------------------------------------------------------------------------
def _replan_program(**kwargs):
    prior = asr.Normal(3.0, 2.0)
    return ProgramDesign(_z_design(10.0, prior, 0.1), _z_design(10.0, prior), n2=100, n3=400,
                         replan=Replanning(0.6, 60, 3000, shrinkage=0.9, power_weight=0.5,
                                           steps=25), **kwargs)


def test_replanned_sizes_match_a_brute_force_search():
    program = _replan_program()
    t = replan_table(program)
    se2 = _se(10.0, 100)
    assert t["lower"][0] == pytest.approx(Z.ppf(0.9) * se2, rel=1e-12)
    for k in (0, 5, 12, 24):
        # Kirby et al. (2012) discounting, written out: N(0.9 d2, se2^2 / 0.5)
        mean, sd = 0.9 * t["lower"][k], se2 / math.sqrt(0.5)
        per_arm = np.arange(30, 1501)
        se3 = 10.0 * np.sqrt(2.0 / per_arm)
        assurance = Z.sf((Z.ppf(0.975) * se3 - mean) / np.sqrt(sd**2 + se3**2))
        ok = np.flatnonzero(assurance >= 0.6)
        expected = 3000 if ok.size == 0 else min(max(2 * int(per_arm[ok[0]]), 60), 3000)
        assert int(t["n3"][k]) == expected
        assert t["prior_mean"][k] == pytest.approx(mean) and t["prior_sd"][k] == \
            pytest.approx(sd)


def test_replanned_program_agrees_with_simulation():
    program = _replan_program(surrogate=Surrogate(0.0, 1.0, 0.5))
    r = program_result(program)
    assert r.replanned and r.expected_phase3_n != program.n3
    sim = simulate_program(program, programs=30_000, seed=5)
    for name in ("p_go", "pos", "expected_patients"):
        assert abs(getattr(r, name) - sim[name]) <= CHECK_LIMIT * sim[name + "_mcse"], name
    # P(go) does not depend on how phase 3 is sized
    assert r.p_go == pytest.approx(program_result(program, replanned=False).p_go, abs=1e-9)


def test_replanning_needs_a_normal_phase2_estimate():
    prior = asr.Normal(3.0, 2.0)
    t_phase2 = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), prior)
    with pytest.raises(AssuranceInputError, match="'replan' parameter of ProgramDesign"):
        ProgramDesign(t_phase2, _z_design(10.0, prior), n2=50, n3=100,
                      replan=Replanning(0.6, 60, 3000))


# ------------------------------------------------------------------------------------------
# grid, curves, invariants, inputs
# ------------------------------------------------------------------------------------------
def test_grid_moves_the_right_way():
    prior = asr.Normal(3.0, 2.0)
    program = ProgramDesign(_z_design(10.0, prior, 0.1), _z_design(10.0, prior), n2=100,
                            n3=400)
    g = program_grid(program, [50, 100, 400], [0.0, 2.0, 4.0])
    assert [str(x) for x in g.go_rule.values] == ["as designed", "0", "2", "4"]
    go = g.p_go.sel(go_rule=["0", "2", "4"]).values
    assert (np.diff(go, axis=1) < 0).all()  # a higher threshold: fewer go decisions
    assert (np.diff(g.expected_patients.values, axis=0) > 0).all()  # more phase 2 patients
    # the "as designed" column equals the program's own result
    r = program_result(program)
    assert float(g.pos.sel(phase2_n=100, go_rule="as designed")) == pytest.approx(r.pos)


def test_effect_curves_are_products():
    prior = asr.Normal(3.0, 2.0)
    program = ProgramDesign(_z_design(10.0, prior, 0.1), _z_design(10.0, prior), n2=100,
                            n3=400)
    c = effect_curves(program, points=31)
    assert np.allclose(c["both"], c["go"] * c["success"])
    at = np.flatnonzero(c["x"] == 0.0)
    assert at.size == 1 and c["go"][at[0]] == pytest.approx(0.1, abs=1e-12)


@settings(max_examples=15, deadline=None)
@given(m=st.floats(-3, 6), s=st.floats(0.3, 5), n2=st.integers(10, 400),
       n3=st.integers(10, 2000), a2=st.floats(0.01, 0.4), g=st.floats(-2, 5))
def test_probabilities_are_ordered(m, s, n2, n3, a2, g):
    prior = asr.Normal(m, s)
    program = ProgramDesign(_z_design(10.0, prior, a2), _z_design(10.0, prior), n2=n2, n3=n3)
    for threshold in (None, g):
        r = program_result(program, go_threshold=threshold)
        assert 0.0 <= r.pos <= r.p_go <= 1.0
        assert r.pos <= r.phase3_alone + 1e-12  # P(go and success) <= P(success)
        assert r.p_go_and_works <= r.p_go + 1e-12
        assert 0.0 <= r.false_go <= 1.0
        assert n2 <= r.expected_patients <= n2 + n3 + 1e-9


@pytest.mark.parametrize("kwargs, name", [({"n2": 0}, "n2"), ({"n3": 1.5}, "n3"),
                                          ({"months_gap": -1.0}, "months_gap"),
                                          ({"surrogate": 3}, "surrogate")])
def test_bad_inputs_name_the_parameter(kwargs, name):
    prior = asr.Normal(3.0, 2.0)
    args = {"n2": 100, "n3": 400} | kwargs
    with pytest.raises(AssuranceInputError, match=f"'{name}' parameter of ProgramDesign"):
        ProgramDesign(_z_design(10.0, prior), _z_design(10.0, prior), **args)


def test_surrogate_slope_zero_is_refused():
    with pytest.raises(AssuranceInputError, match="'slope' parameter of Surrogate"):
        Surrogate(0.0, 0.0, 1.0)


def test_simulation_is_repeatable_with_its_seed():
    program = _replan_program()
    a = simulate_program(program, programs=2000, seed=9)
    assert a == simulate_program(program, programs=2000, seed=9)
    assert a != simulate_program(program, programs=2000, seed=10)


def test_other_endpoints_use_their_own_power_and_refuse_what_they_cannot_do():
    # a binary phase 2 (exact test) before a time-to-event phase 3; the phase 2 response
    # difference follows -0.3 x the log hazard ratio
    surv = asr.SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
                                assumed_hazard_ratio=0.75)
    prior = asr.Normal(math.log(0.75), 0.1)
    p2 = asr.TrialDesign(asr.BinaryEndpoint(control_rate=0.3), asr.Normal(0.1, 0.05),
                         rule=asr.Significance(alpha=0.1))
    program = ProgramDesign(p2, asr.TrialDesign(surv, prior), n2=40, n3=600,
                            surrogate=Surrogate(0.0, -0.3, 0.0))
    r = program_result(program)
    assert 0 < r.pos < r.p_go < 1
    # no effect: P(go) is the pooled two-proportion z test's rejection rate at 0.3 vs 0.3
    # with 20 patients an arm, enumerated here with scipy.stats.binom (the z test is the
    # endpoint's default test; identical rates give no test statistic and no go)
    null = replace_prior(program, asr.PointMass(0.0))
    x = np.arange(21)
    xt, xc = np.meshgrid(x, x, indexing="ij")
    pooled = (xt + xc) / 40
    with np.errstate(divide="ignore", invalid="ignore"):
        z = (xt / 20 - xc / 20) / np.sqrt(pooled * (1 - pooled) * (2 / 20))
    reject = np.nan_to_num(z, nan=-np.inf) > Z.ppf(0.9)
    pmf = stats.binom.pmf(x, 20, 0.3)
    level = float((np.outer(pmf, pmf) * reject).sum())
    assert program_result(null).p_go == pytest.approx(level, abs=1e-9)
    with pytest.raises(AssuranceInputError, match="'go_threshold' parameter"):
        program_result(program, go_threshold=0.05)
    wide = replace_prior(program, asr.Normal(0.0, 2.0))  # rates far outside [0, 1]
    with pytest.raises(AssuranceInputError, match="prior probability"):
        program_result(wide)


def replace_prior(program, prior):
    from dataclasses import replace

    return replace(program, phase3=replace(program.phase3, design_prior=prior))


# ------------------------------------------------------------------------------------------
# the simulated check for binary, time-to-event and count endpoints
# ------------------------------------------------------------------------------------------
from assurance.program.development import simulation_gap  # noqa: E402

_SURVIVAL = asr.SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
                                 assumed_hazard_ratio=0.75, dropout_per_year=0.05)


def _binary_phase2(test: str = "z", alpha: float = 0.1) -> asr.TrialDesign:
    return asr.TrialDesign(asr.BinaryEndpoint(control_rate=0.3, test=test),
                           asr.Normal(0.1, 0.05), rule=asr.Significance(alpha=alpha))


def _agree(program, programs, seed, names=("p_go", "pos", "p_go_and_works",
                                           "expected_patients")):
    r = program_result(program)
    sim = simulate_program(program, programs=programs, seed=seed)
    for name in names:
        # CHECK_LIMIT (4) MC SE: a false alarm about once in 16,000 per figure
        assert abs(getattr(r, name) - sim[name]) <= CHECK_LIMIT * sim[name + "_mcse"], (
            name, getattr(r, name), sim[name], sim[name + "_mcse"])
    return r, sim


@pytest.mark.parametrize("seed", [1, 2])
def test_binary_phase2_then_time_to_event_phase3_agrees_with_simulated_programs(seed):
    # phase 2: pooled z test on 40 patients, exact enumeration in the engine, binomial draws
    # decided by the test's region in the simulation; phase 3: Schoenfeld's approximation
    # in the engine (events at the planning hazard ratio), patient-level trials with the
    # log-rank test in the simulation. The prior has a point mass at no effect.
    prior = asr.Mixture([asr.PointMass(0.0), asr.Normal(math.log(0.7), 0.12)], [0.3, 0.7])
    program = ProgramDesign(_binary_phase2(), asr.TrialDesign(_SURVIVAL, prior), n2=40,
                            n3=500, surrogate=Surrogate(0.0, -0.3, 0.0))
    assert simulation_gap(program) is None
    r, _ = _agree(program, 20_000, seed)
    assert 0 < r.pos < r.p_go < 1


@pytest.mark.parametrize("seed", [3, 4])
def test_fisher_phase2_then_count_phase3_agrees_with_simulated_programs(seed):
    # phase 2 decided by Fisher's exact test; phase 3 negative binomial counts, analysed per
    # simulated trial by maximum likelihood (dispersion estimated) and the Wald test
    counts = asr.CountEndpoint(control_rate=0.8, follow_up=1.0, overdispersion=0.4)
    program = ProgramDesign(_binary_phase2("fisher_exact"),
                            asr.TrialDesign(counts, asr.Normal(math.log(0.7), 0.15)),
                            n2=60, n3=400, surrogate=Surrogate(0.0, -0.4, 0.02))
    _agree(program, 10_000, seed)


def test_time_to_event_phase2_then_exact_count_phase3_agrees_with_simulated_programs():
    # phase 2 by log-rank (events at the true hazard ratio in the engine), phase 3 by the
    # conditional exact test for two Poisson rates
    surv2 = asr.SurvivalEndpoint(control_median=6.0, accrual_time=12.0, follow_up_time=6.0,
                                 assumed_hazard_ratio=0.7, events_follow_true_effect=True)
    prior = asr.Normal(math.log(0.75), 0.15)
    counts = asr.CountEndpoint(control_rate=0.5, follow_up=1.0, test="exact_conditional")
    program = ProgramDesign(asr.TrialDesign(surv2, prior, rule=asr.Significance(alpha=0.1)),
                            asr.TrialDesign(counts, prior), n2=150, n3=300)
    _agree(program, 20_000, 5)


def test_replanned_time_to_event_phase3_agrees_with_simulated_programs():
    # phase 3 re-planned from a normal phase 2 estimate: the simulated programs draw each
    # phase 3 at its own re-planned size, patient by patient
    p2 = asr.TrialDesign(asr.ContinuousEndpoint(sigma=1.0, analysis="z"), asr.Normal(0.3, 0.1),
                         rule=asr.Significance(alpha=0.1))
    program = ProgramDesign(p2, asr.TrialDesign(_SURVIVAL, asr.Normal(math.log(0.75), 0.12)),
                            n2=100, n3=500, surrogate=Surrogate(0.0, -1.0, 0.0),
                            replan=Replanning(0.7, 200, 1500, shrinkage=0.9, steps=25),
                            recruitment_phase3=30.0, follow_up_phase3=12.0)
    r, _ = _agree(program, 20_000, 6, names=("p_go", "pos", "expected_patients",
                                             "expected_months"))
    assert r.replanned and r.expected_phase3_n != program.n3


def test_a_simulation_written_here_checks_fisher_then_poisson_counts():
    # independent of the package's simulators and regions: Fisher's one-sided test from
    # scipy.stats.fisher_exact on every phase 2 table (20 patients an arm), and the Poisson
    # Wald test on the arms' event totals (the sufficient statistic: with equal follow-up
    # the total of an arm is Poisson(n rate T)), written here with numpy
    n_arm2, n_arm3, rate, alpha2 = 20, 150, 0.8, 0.1
    go_table = np.zeros((n_arm2 + 1, n_arm2 + 1), dtype=bool)
    for xt in range(n_arm2 + 1):
        for xc in range(n_arm2 + 1):
            p = stats.fisher_exact([[xt, n_arm2 - xt], [xc, n_arm2 - xc]],
                                   alternative="greater").pvalue
            go_table[xt, xc] = p <= alpha2
    counts = asr.CountEndpoint(control_rate=rate, follow_up=1.0)
    prior = asr.Normal(math.log(0.7), 0.15)
    program = ProgramDesign(_binary_phase2("fisher_exact", alpha2),
                            asr.TrialDesign(counts, prior), n2=2 * n_arm2, n3=2 * n_arm3,
                            surrogate=Surrogate(0.0, -0.4, 0.0))
    rng = np.random.default_rng(2026)
    k = 100_000
    log_rr = rng.normal(math.log(0.7), 0.15, k)
    p_t = np.clip(0.3 - 0.4 * log_rr, 0.0, 1.0)
    go = go_table[rng.binomial(n_arm2, p_t), rng.binomial(n_arm2, 0.3, k)]
    y_t = rng.poisson(n_arm3 * rate * np.exp(log_rr))
    y_c = rng.poisson(n_arm3 * rate, k)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.log(y_t / y_c) / np.sqrt(1 / y_t + 1 / y_c)
    win = go & (y_t > 0) & (y_c > 0) & (z < Z.ppf(0.025))  # lower rates are better
    r = program_result(program)
    for value, sims in ((r.p_go, go), (r.pos, win)):
        mcse = sims.std(ddof=1) / math.sqrt(k)
        assert abs(value - sims.mean()) <= 4 * mcse


def test_simulation_gap_names_what_cannot_be_simulated():
    # a non-inferiority margin makes the binary region a general one (not a staircase); at
    # 13,000 patients it has about 42 million tables, beyond what the check looks up
    margin = asr.TrialDesign(asr.BinaryEndpoint(control_rate=0.3), asr.Normal(0.0, 0.02),
                             rule=asr.Significance(alpha=0.025, margin=0.02))
    program = ProgramDesign(_binary_phase2(), margin, n2=40, n3=13_000)
    gap = simulation_gap(program)
    assert gap is not None and "phase 3" in gap and "outcome tables" in gap
    with pytest.raises(AssuranceInputError, match="cannot be simulated"):
        simulate_program(program, programs=100)


# ------------------------------------------------------------------------------------------
# durations that follow the size
# ------------------------------------------------------------------------------------------
def test_expected_months_follow_the_sizes():
    prior = asr.Normal(3.0, 2.0)
    program = ProgramDesign(_z_design(10.0, prior, 0.1), _z_design(10.0, prior), n2=100,
                            n3=400, months_gap=4.0, recruitment_phase2=20.0,
                            follow_up_phase2=3.0, recruitment_phase3=25.0,
                            follow_up_phase3=6.0)
    r = program_result(program)
    # written out: 100/20 + 3 months of phase 2, then after a go 4 + 400/25 + 6 months
    assert r.expected_months == pytest.approx(5.0 + 3.0 + r.p_go * (4.0 + 16.0 + 6.0),
                                              rel=1e-12)
    assert r.expected_phase3_months == pytest.approx(22.0, rel=1e-12)
    g = program_grid(program, [50, 100, 200])
    months = g.expected_months.sel(go_rule="as designed").values
    go = g.p_go.sel(go_rule="as designed").values
    assert months == pytest.approx([n / 20 + 3 + p * 26 for n, p in zip([50, 100, 200], go,
                                                                          strict=True)])


def test_replanned_phase3_months_follow_the_replanned_size():
    fixed = _replan_program(months_gap=2.0, months_phase3=24.0)
    sized = _replan_program(months_gap=2.0, recruitment_phase3=50.0, follow_up_phase3=6.0)
    a, b = program_result(fixed), program_result(sized)
    assert a.expected_phase3_months == pytest.approx(24.0)  # fixed, whatever the size
    # the mean re-planned size after a go, recruited at 50 a month, plus 6 months
    assert b.expected_phase3_months == pytest.approx(b.expected_phase3_n / 50 + 6, rel=1e-9)
    sim = simulate_program(sized, programs=20_000, seed=8)
    assert abs(b.expected_months - sim["expected_months"]) <= 4 * sim["expected_months_mcse"]


@pytest.mark.parametrize("kwargs, name", [
    ({"recruitment_phase3": 20.0, "months_phase3": 24.0}, "months_phase3"),
    ({"follow_up_phase2": 3.0}, "follow_up_phase2"),
    ({"recruitment_phase2": 0.0}, "recruitment_phase2"),
    ({"recruitment_phase3": 10.0, "follow_up_phase3": -1.0}, "follow_up_phase3")])
def test_bad_durations_name_the_parameter(kwargs, name):
    prior = asr.Normal(3.0, 2.0)
    with pytest.raises(AssuranceInputError, match=f"'{name}' parameter of ProgramDesign"):
        ProgramDesign(_z_design(10.0, prior), _z_design(10.0, prior), n2=100, n3=400,
                      **kwargs)
