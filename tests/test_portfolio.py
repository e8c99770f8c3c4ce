"""The portfolio arithmetic (assurance.program.portfolio): the number of successes, the
expected net value of a trial, the size worth paying for and the curves over sizes.

References used here, each computed inside the test:
- the Poisson-binomial distribution by brute-force enumeration of every outcome of the K
  trials (its definition), by scipy.stats.poisson_binom (scipy >= 1.15), and by
  scipy.stats.binom when every probability is the same;
- assurance of a z test under a normal prior, Phi((m - z se) / sqrt(v + se^2)) (O'Hagan,
  Stevens & Campbell 2005, Pharmaceutical Statistics 4:187-201, eq. for the normal case),
  written here with scipy.stats.norm, and its net value maximised by scipy.optimize;
- discounting (1 + r)^-t: common practice.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

import assurance as asr
from assurance.errors import AssuranceInputError
from assurance.program.portfolio import (
    ValueInputs,
    best_sizes_under,
    interval,
    net_value,
    poisson_binomial,
    size_worth_paying,
    success_curves,
    value_grid,
)

probabilities = st.lists(st.floats(0.0, 1.0, allow_nan=False), min_size=1, max_size=7)


def _brute_force(p: list[float]) -> np.ndarray:
    """P(k successes) by summing over all 2^K outcomes (the definition)."""
    out = np.zeros(len(p) + 1)
    for outcome in itertools.product((0, 1), repeat=len(p)):
        prob = math.prod(pk if o else 1 - pk for pk, o in zip(p, outcome, strict=True))
        out[sum(outcome)] += prob
    return out


# ------------------------------------------------------------------------------------------
# the number of successes
# ------------------------------------------------------------------------------------------
@settings(max_examples=60, deadline=None)
@given(probabilities)
def test_poisson_binomial_equals_brute_force_enumeration(p):
    # reference: enumeration of every outcome (definition); sums of at most 128 products,
    # so agreement to 1e-12 leaves room only for rounding
    np.testing.assert_allclose(poisson_binomial(p), _brute_force(p), atol=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.one_of(st.sampled_from([0.0, 1.0]), st.floats(1e-12, 1.0 - 1e-12)),
       st.integers(1, 40))
def test_equal_probabilities_give_the_binomial(p, k):
    # reference: scipy.stats.binom.pmf (the Poisson-binomial with equal p is binomial);
    # p within 1e-12 of 0 or 1 but not on them is left out: scipy's binomial raises an
    # overflow error in its incomplete beta derivative at p near 2e-308
    np.testing.assert_allclose(poisson_binomial([p] * k), stats.binom.pmf(np.arange(k + 1), k, p),
                               atol=1e-12)


def test_agrees_with_scipy_poisson_binom_for_many_trials():
    poisson_binom = getattr(stats, "poisson_binom", None)
    if poisson_binom is None:
        pytest.skip("scipy.stats.poisson_binom needs scipy >= 1.15")
    rng = np.random.default_rng(7)
    p = rng.uniform(0, 1, 60)
    # reference: scipy.stats.poisson_binom.pmf; 1e-12 absolute (both exact to rounding)
    np.testing.assert_allclose(poisson_binomial(p), poisson_binom.pmf(np.arange(61), p),
                               atol=1e-12)


@settings(max_examples=60, deadline=None)
@given(probabilities)
def test_distribution_sums_to_one_with_the_right_mean_and_variance(p):
    q = poisson_binomial(p)
    k = np.arange(q.size)
    assert q.sum() == pytest.approx(1.0, abs=1e-12)
    assert (q >= 0).all()
    # mean sum p and variance sum p(1 - p): the sum of independent Bernoulli variables
    assert (k * q).sum() == pytest.approx(sum(p), abs=1e-10)
    mean = (k * q).sum()
    assert ((k - mean) ** 2 * q).sum() == pytest.approx(sum(x * (1 - x) for x in p), abs=1e-9)


def test_poisson_binomial_refuses_bad_probabilities():
    with pytest.raises(AssuranceInputError, match="'p' parameter of poisson_binomial"):
        poisson_binomial([0.5, 1.2])
    with pytest.raises(AssuranceInputError, match="'p'"):
        poisson_binomial([float("nan")])


# ------------------------------------------------------------------------------------------
# net value and the size worth paying for
# ------------------------------------------------------------------------------------------
def test_net_value_is_the_formula_with_discounting():
    v = ValueInputs(250.0, cost_per_patient=0.04, fixed_cost=7.0, years_to_readout=3.0,
                    discount_rate=0.08)
    # reference: the formula written out; (1.08)^-3 by hand (common practice)
    assert v.discount_factor == pytest.approx(1 / 1.08 ** 3, rel=1e-14)
    got = net_value([0.3, 0.6], [100, 400], v)
    want = [250 / 1.08 ** 3 * 0.3 - 4.0 - 7.0, 250 / 1.08 ** 3 * 0.6 - 16.0 - 7.0]
    np.testing.assert_allclose(got, want, rtol=1e-14)


@pytest.mark.parametrize(("name", "value"), [
    ("value_of_success", 0.0), ("cost_per_patient", -1.0), ("fixed_cost", float("inf")),
    ("years_to_readout", -2.0), ("discount_rate", 1.0)])
def test_value_inputs_are_checked(name, value):
    kwargs = {"value_of_success": 10.0, name: value}
    with pytest.raises(AssuranceInputError, match=f"'{name}' parameter of ValueInputs"):
        ValueInputs(**kwargs)


def _normal_z_assurance(n, m=4.0, s=2.0, sigma=10.0, alpha=0.025):
    """O'Hagan, Stevens & Campbell (2005): assurance of a one-sided z test, normal prior."""
    se = sigma * np.sqrt(4.0 / np.asarray(n, dtype=float))
    return stats.norm.cdf((m - stats.norm.ppf(1 - alpha) * se) / np.sqrt(s ** 2 + se ** 2))


def test_package_assurance_curve_matches_the_formula():
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0))
    n = np.arange(20, 2001, 36)  # even sizes: equal arms, as the formula assumes
    (pos, se), = success_curves([design], [n])
    assert se is None
    # reference: the closed form above with scipy.stats.norm; both exact, 1e-10 for rounding
    np.testing.assert_allclose(pos, _normal_z_assurance(n), atol=1e-10)


def test_best_size_agrees_with_scipy_optimize_on_a_smooth_case():
    values = ValueInputs(300.0, cost_per_patient=0.05, fixed_cost=10.0, years_to_readout=2.0,
                         discount_rate=0.1)

    def minus_net(n):  # the net value of the closed form, as a smooth function of n
        return -(values.present_value * _normal_z_assurance(n) - 0.05 * n - 10.0)

    # reference: scipy.optimize.minimize_scalar (bounded) on the continuous curve
    ref = optimize.minimize_scalar(minus_net, bounds=(20, 4000), method="bounded",
                                   options={"xatol": 1e-6})
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0))
    n = value_grid(20, 4000)
    (pos, _), = success_curves([design], [n])
    best = size_worth_paying(n, pos, values)
    step = float(np.max(np.diff(n)))
    # the grid maximiser is within one grid step of the true one, and its value within the
    # curve's change over one step (the optimum is flat: second-order in the distance)
    assert abs(best.n_best - ref.x) <= step
    assert best.value_best == pytest.approx(-ref.fun, abs=1e-3 * abs(ref.fun))
    assert best.value_best <= -ref.fun + 1e-9
    assert best.worth_paying and best.at_edge == ""


@settings(max_examples=50, deadline=None)
@given(st.floats(0.01, 0.5), st.floats(0.001, 0.2), st.floats(50, 5000),
       st.floats(0.01, 0.3))
def test_flat_range_holds_exactly_the_sizes_near_the_best(scale, cost, value, share):
    n = np.arange(10, 3001, 10)
    pos = 0.9 * (1 - np.exp(-scale * n / 100))
    v = ValueInputs(value, cost_per_patient=cost)
    best = size_worth_paying(n, pos, v, share=share)
    net = net_value(pos, n, v)
    floor = best.value_best - share * abs(best.value_best)
    assert best.value_best == pytest.approx(net.max())
    inside = (n >= best.n_low) & (n <= best.n_high)
    assert (net[inside] >= floor - 1e-12).all()
    assert best.n_low <= best.n_best <= best.n_high
    # the run stops where the value first drops below the floor (or at the grid's end)
    lo, hi = np.flatnonzero(n == best.n_low)[0], np.flatnonzero(n == best.n_high)[0]
    assert lo == 0 or net[lo - 1] < floor
    assert hi == n.size - 1 or net[hi + 1] < floor
    assert best.worth_paying == (net.max() > 0)


def test_an_unaffordable_trial_is_not_worth_paying_for():
    n = np.arange(100, 1001, 100)
    best = size_worth_paying(n, np.full(n.size, 0.5), ValueInputs(10.0, cost_per_patient=1.0))
    assert not best.worth_paying
    assert best.n_best == 100 and best.at_edge == "smallest"


def test_a_larger_value_of_success_never_asks_for_fewer_patients():
    n = np.arange(20, 3001, 20)
    pos = _normal_z_assurance(n)
    sizes = [b.n_best for b in best_sizes_under(n, pos, ValueInputs(100.0, 0.05),
                                                [0.5, 1.0, 2.0, 4.0])]
    assert sizes == sorted(sizes) and sizes[0] < sizes[-1]


def test_interval_is_two_mc_se_clipped_or_zero_width():
    assert interval(0.4, 0.02) == pytest.approx((0.36, 0.44))
    assert interval(0.99, 0.02) == pytest.approx((0.95, 1.0))
    assert interval(0.7, None) == (0.7, 0.7)


# ------------------------------------------------------------------------------------------
# curves: Monte Carlo designs and the same numbers on a Dask cluster
# ------------------------------------------------------------------------------------------
def _monte_carlo_design():
    from pathlib import Path

    from assurance.design_file import read_design_file

    spec = read_design_file(Path(__file__).resolve().parents[1] / "case_studies" /
                            "relapse_counts" / "design.toml")
    return spec.design


def test_monte_carlo_curves_carry_their_standard_error():
    design = _monte_carlo_design()
    (pos, se), = success_curves([design], [[300, 600]], draws=4000, seeds=11)
    assert se is not None and (se > 0).all()
    # reference: the package's evaluate at the same draws and seed (the curve is that
    # evaluation, task by task); a different seed moves it by a few MC SE at most
    ds = asr.evaluate(design, [300, 600], draws=4000, seed=11)
    np.testing.assert_array_equal(pos, ds.assurance.values)
    (other, _), = success_curves([design], [[300, 600]], draws=4000, seeds=12)
    assert (np.abs(other - pos) <= 5 * np.sqrt(2) * se).all()


def test_curves_on_a_dask_cluster_equal_the_in_process_ones():
    distributed = pytest.importorskip("distributed")
    designs = [asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                               asr.Normal(m, 2.0)) for m in (3.0, 4.0)] + [_monte_carlo_design()]
    grids = [[100, 200, 400], [50, 150], [300, 500]]
    here = success_curves(designs, grids, draws=2000, seeds=5)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster, set_as_default=False) as client:
        there = success_curves(designs, grids, draws=2000, seeds=5, executor=client)
    for (p1, s1), (p2, s2) in zip(here, there, strict=True):
        np.testing.assert_array_equal(p1, p2)
        assert (s1 is None) == (s2 is None)


def test_success_curves_checks_its_inputs():
    d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"), asr.Normal(4.0, 2.0))
    with pytest.raises(AssuranceInputError, match="'grids' parameter of success_curves"):
        success_curves([d], [[100], [200]])
    with pytest.raises(AssuranceInputError, match="'executor' parameter of map_chunks"):
        success_curves([d], [[100]], executor="thread")
