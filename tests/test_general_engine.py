"""simulate_general: the simulation path against closed forms and exact enumeration; seeds,
executors and stored results.

Monte Carlo checks use a multiple of the Monte Carlo SE the run reports. The PyMC models are
compiled once per size per process (the engine's cache), so the sizes repeat across tests.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import xarray as xr
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats

import assurance as asr
from assurance.errors import AssuranceInputError, AssuranceWarning
from assurance.general import GeneralModel, decides, simulate_general, solve_general_n
from assurance.general import engine as engine_module

pytest.importorskip("pymc")

from _general_models import (  # noqa: E402
    DESIGN_A,
    DESIGN_B,
    SIGMA,
    A,
    B,
    binomial_model,
    normal_model,
)

SIZES = [20, 60, 120]


@pytest.fixture(scope="module")
def normal_run() -> xr.Dataset:
    return simulate_general(normal_model(), SIZES, rule=asr.PosteriorProbability(0.975),
                            trials=800, nuts_check=0, chunk=200, seed=11, progress=False)


def test_normal_model_matches_the_closed_form(normal_run):
    # Closed form: assurance of a z analysis under a normal design prior (O'Hagan, Stevens &
    # Campbell 2005), computed by assurance.evaluate. With vague analysis priors (SD 100 and
    # 1000 against a standard error of about 0.4) the posterior probability rule is the
    # one-sided z test at 0.025 (common practice), the rule the closed form applies.
    design = asr.TrialDesign(asr.ContinuousEndpoint(SIGMA, analysis="z"), asr.Normal(0.5, 0.5),
                             rule=asr.PosteriorProbability(0.975))
    exact = asr.evaluate(design, SIZES)
    for q in ("assurance", "power"):
        gap = np.abs(normal_run[q].values - exact[q].values)
        assert np.all(gap <= 3 * normal_run[f"{q}_mcse"].values), (q, gap)
    # the normal-approximation interval is exact here: 2 z_0.975 sigma sqrt(1/n_t + 1/n_c)
    n_t, n_c = normal_run.n_treatment.values, normal_run.n_control.values
    width = 2 * stats.norm.ppf(0.975) * SIGMA * np.sqrt(1 / n_t + 1 / n_c)
    np.testing.assert_allclose(normal_run.width_mean.values, width, rtol=1e-3)
    assert normal_run.attrs["trials"] == 800
    assert (normal_run.not_converged.values == 0).all()


def _exact_binomial(n: int, p0: float, level: float) -> tuple[float, float]:
    """Assurance by exact enumeration over the number of responders x (scipy.stats):
    sum_x betabinom(n, a_d, b_d).pmf(x) * 1[P(p > p0 | x) >= level], with the exact Beta
    posterior, and with the Laplace (normal) approximation of that posterior on the
    log-odds scale written out here (mode p* = (A + x) / (A + B + n), SD of p by the delta
    method sqrt(p* (1 - p*) / (A + B + n)); Tierney & Kadane 1986)."""
    x = np.arange(n + 1)
    pmf = stats.betabinom.pmf(x, n, DESIGN_A, DESIGN_B)
    exact = stats.beta.sf(p0, A + x, B + n - x) >= level
    mode = (A + x) / (A + B + n)
    sd = np.sqrt(mode * (1 - mode) / (A + B + n))
    laplace = stats.norm.sf((p0 - mode) / sd) >= level
    return float(pmf @ exact), float(pmf @ laplace)


def test_binomial_model_against_exact_enumeration():
    # The Laplace path is a normal approximation: the simulated assurance is compared with
    # the exact enumeration of the approximate rule (3 MC SE), and the approximation's own
    # error, measured against the exact Beta posterior by enumeration, is added to the
    # tolerance against the exact assurance (and must itself stay small: under 0.06).
    sizes, p0, level = [20, 60], 0.5, 0.9
    ds = simulate_general(binomial_model(), sizes, rule=asr.PosteriorProbability(level, p0),
                          trials=800, nuts_check=0, chunk=400, power=False, seed=5,
                          progress=False)
    for i, n in enumerate(sizes):
        exact, laplace = _exact_binomial(n, p0, level)
        sim, se = float(ds.assurance[i]), float(ds.assurance_mcse[i])
        assert abs(sim - laplace) <= 3 * se, (n, sim, laplace, se)
        assert abs(laplace - exact) < 0.06, (n, laplace, exact)
        assert abs(sim - exact) <= 3 * se + abs(laplace - exact)
    assert np.isnan(ds.power).all()


def test_same_seed_same_numbers_whatever_the_executor():
    kwargs = dict(rule=asr.PosteriorProbability(0.975), trials=40, chunk=10, nuts_check=1,
                  seed=3, progress=False, nuts_draws=50, nuts_tune=50)
    first = simulate_general(normal_model(), [20], **kwargs)
    again = simulate_general(normal_model(), [20], **kwargs)
    xr.testing.assert_identical(first, again)
    spread = simulate_general(normal_model(), [20], executor=2, **kwargs)
    xr.testing.assert_identical(first, spread)
    other = simulate_general(normal_model(), [20], **{**kwargs, "seed": 4})
    assert float(other.width_mean[0]) == pytest.approx(float(first.width_mean[0]))
    assert (other.assurance.values != first.assurance.values).any() or \
        (other.power.values != first.power.values).any()


def test_a_size_does_not_depend_on_the_rest_of_the_grid(normal_run, monkeypatch):
    # compiled afresh at n = 60 (the grid's run compiled at n = 20 and reused it)
    monkeypatch.setattr(engine_module, "_COMPILED", {})
    alone = simulate_general(normal_model(), [60], rule=asr.PosteriorProbability(0.975),
                             trials=800, nuts_check=0, chunk=200, seed=11, progress=False)
    xr.testing.assert_identical(alone.drop_attrs(), normal_run.sel(n=[60]).drop_attrs())


def test_an_interrupted_run_resumes_with_the_same_numbers(tmp_path, monkeypatch):
    kwargs = dict(rule=asr.PosteriorProbability(0.975), trials=60, chunk=30, nuts_check=0,
                  seed=8, progress=False)
    whole = simulate_general(normal_model(), [20, 60], **kwargs)
    store = tmp_path / "store"
    simulate_general(normal_model(), [20], store=store, **kwargs)  # stopped after n = 20
    computed = []
    real = engine_module.run_chunk

    def counting(spec):
        computed.append(spec.n_total)
        return real(spec)

    monkeypatch.setattr(engine_module, "run_chunk", counting)
    resumed = simulate_general(normal_model(), [20, 60], store=store, **kwargs)
    xr.testing.assert_identical(whole, resumed)
    assert set(computed) == {60}  # n = 20 was read from the store
    with pytest.raises(AssuranceInputError, match="other settings.*trials"):
        simulate_general(normal_model(), [20], store=store, **{**kwargs, "trials": 61})


def test_nuts_disagreement_warns():
    # a made-up stored group where NUTS succeeds on every checked trial and Laplace on none
    group = {k: np.zeros(0) for k in engine_module._ARRAYS}
    group.update(success=np.ones(10, bool), width=np.ones(10), converged=np.ones(10, bool),
                 nuts_success=np.ones(10, bool), laplace_on_nuts=np.zeros(10, bool))
    settings = {"trials": 10, "seed": 0, "chunk": 10, "coverage": 0.95, "nuts_check": 10,
                "nuts_every": False}
    with pytest.warns(AssuranceWarning, match="disagree by more than 3"):
        ds = engine_module._dataset(normal_model(), asr.PosteriorProbability(0.975), [20],
                                    {(20, "prior"): group}, ["prior"], settings)
    assert math.isinf(float(ds.nuts_agreement[0]))
    assert "disagree" in ds.attrs["warning"]


def test_paired_agreement_in_standard_errors():
    # d = (1, 1, 0, 0, -1, 0, 1, 0): mean 0.25, SD (ddof 1) 0.7071, SE 0.25 -> 1.0 (by hand)
    d = np.array([1, 1, 0, 0, -1, 0, 1, 0], float)
    assert engine_module._paired_z(d) == pytest.approx(1.0)
    assert engine_module._paired_z(np.zeros(5)) == 0.0


# -- rules on the posterior -----------------------------------------------------------------
def test_posterior_probability_on_normal_and_draws():
    rng = np.random.default_rng(0)
    mean, sd = rng.normal(0.3, 1, 200), rng.uniform(0.2, 2, 200)
    rule = asr.PosteriorProbability(0.9, beyond=0.1)
    want = stats.norm.sf(0.1, mean, sd) >= 0.9  # scipy.stats.norm
    assert (decides(rule, "higher", mean, sd) == want).all()
    draws = np.array([[0.0, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0],
                      [0.0, 0.05, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0]])
    # shares beyond 0.1 by counting: 9/10 and 8/10
    assert decides(rule, "higher", draws.mean(1), draws.std(1), draws).tolist() == [True, False]


def test_significance_is_the_wald_test():
    # two-sided 0.05 -> one-sided z_0.975 = 1.959964 (scipy.stats.norm.ppf)
    rule = asr.Significance(0.05, sided="two", margin=0.5)
    z = stats.norm.ppf(0.975)
    mean = np.array([z * 1.0 - 0.5 + 1e-6, z * 1.0 - 0.5 - 1e-6])
    assert decides(rule, "higher", mean, [1.0, 1.0]).tolist() == [True, False]
    both = asr.AllOf((asr.Significance(0.025), asr.MinimumEstimate(3.0)))
    assert decides(both, "higher", [2.5, 3.5], [0.5, 0.5]).tolist() == [False, True]


@given(st.floats(-5, 5), st.floats(0.05, 5), st.floats(-2, 2), st.floats(0.55, 0.995))
def test_lower_is_better_mirrors_higher(mean, sd, beyond, level):
    low = decides(asr.PosteriorProbability(level, beyond), "lower", [mean], [sd])
    high = decides(asr.PosteriorProbability(level, -beyond), "higher", [-mean], [sd])
    assert low.tolist() == high.tolist()


def test_refused_rules_and_models():
    with pytest.raises(AssuranceInputError, match="'rule' parameter.*must be"):
        decides(asr.GoConsiderStop(min_acceptable=0.0, target=1.0), "higher", [0.0], [1.0])
    with pytest.raises(AssuranceInputError, match="analysis prior"):
        decides(asr.PosteriorProbability(0.9, analysis_prior=asr.Normal(0, 1)), "higher",
                [0.0], [1.0])
    model = normal_model()
    with pytest.raises(AssuranceInputError, match="'design_prior'.*'effect'"):
        GeneralModel("x", model.simulate, model.build, design_prior={"mu": asr.Normal(0, 1)},
                     assumed={"mu": 0.0})
    with pytest.raises(AssuranceInputError, match="'assumed'"):
        GeneralModel("x", model.simulate, model.build, design_prior=model.design_prior,
                     assumed={"effect": 0.5})
    with pytest.raises(AssuranceInputError, match="'build'.*function"):
        GeneralModel("x", model.simulate, 3, design_prior=model.design_prior,
                     assumed=model.assumed)
    with pytest.raises(AssuranceInputError, match="'sizes'"):
        simulate_general(model, [2], rule=asr.PosteriorProbability(0.975))


def test_arm_sizes_follow_the_endpoints():
    # the same rounding as the built-in endpoints (Endpoint.arm_sizes)
    endpoint = asr.ContinuousEndpoint(1.0, allocation=2.0)
    model = GeneralModel("x", normal_model().simulate, normal_model().build,
                         design_prior={"effect": asr.Normal(0, 1)}, assumed={"effect": 0.0},
                         allocation=2.0)
    for n in (4, 7, 30, 31, 100):
        n_t, n_c = endpoint.arm_sizes(np.array([n]))
        assert model.arm_sizes(n) == (int(n_t[0]), int(n_c[0]))


def test_solve_reads_the_first_size_reaching_the_target(normal_run):
    values = normal_run.assurance.values
    target = float(values[1]) - 1e-9
    answer = solve_general_n(normal_run, target)
    assert answer.n == 60 and answer.value == pytest.approx(values[1])
    assert "above 20" in answer.note
    none = solve_general_n(normal_run, 0.99)
    assert none.n is None and "extend the grid" in none.note
    # widths: the exact 95% interval width 2 z sigma sqrt(4 / n) is 1.753 at n = 80 (by hand)
    alc = solve_general_n(normal_run, 1.753, "width_mean")
    assert alc.n == 120 and alc.value <= 1.753
    with pytest.raises(AssuranceInputError, match="'quantity'"):
        solve_general_n(normal_run, 0.8, "ceiling")


def test_nuts_on_every_trial_reports_nuts():
    ds = simulate_general(normal_model(), [20], rule=asr.PosteriorProbability(0.975),
                          trials=3, chunk=3, nuts_every=True, power=False, seed=2,
                          nuts_draws=50, nuts_tune=50, progress=False)
    assert ds.attrs["method"] == "NUTS on every trial"
    assert int(ds.nuts_trials[0]) == 3
    assert float(ds.assurance[0]) == float(ds.nuts_assurance_subset[0])
    # NUTS widths (arviz.hdi of 100 draws) near the exact 2 z_0.975 sigma sqrt(1/10 + 1/10)
    exact = 2 * stats.norm.ppf(0.975) * SIGMA * math.sqrt(0.2)
    assert abs(float(ds.width_mean[0]) / exact - 1) < 0.35


def test_every_size_sees_the_same_truths():
    # common random numbers: the k-th trial of each size draws the same true values (so the
    # curves over sizes are smooth); other chunks, scenarios and seeds draw other ones
    from assurance.general.engine import ChunkSpec, run_chunk

    model = normal_model()
    rule = asr.PosteriorProbability(0.975)

    def truths(n: int, key: tuple, seed: int = 11) -> np.ndarray:
        spec = ChunkSpec(model, rule, n, 8, (seed, (n, *key)), "prior", 0, 0.95)
        return run_chunk(spec).truth_effect

    first = truths(20, (0, 0))
    assert np.array_equal(first, truths(120, (0, 0)))
    assert not np.array_equal(first, truths(20, (0, 1)))
    assert not np.array_equal(first, truths(20, (0, 0), seed=12))
    # and the draws are the design prior's: N(0.5, 0.5) (a loose check on 8 values)
    assert abs(first.mean() - 0.5) < 4 * 0.5 / math.sqrt(8)
