"""Priors fitted to elicited judgements (assurance.priors.elicitation).

References: scipy.stats distributions built inside each test. Their quantiles are exact
statements, so the true parameters give a zero sum of squares and a correct fit must find
them (common practice: a least-squares fit to noise-free data recovers the generating
parameters). The two-quantile normal is solved on paper: ``sd = (x2 - x1) / (z2 - z1)``,
``mean = x1 - sd z1`` (common practice: the normal quantile function is linear in z).
Tolerances: closed forms agree to rounding (1e-12); least-squares recoveries are run to
xtol 1e-15 on a zero-residual problem and agree to 1e-6 relative (the conditioning of the
distribution function in the shape parameters, not the optimiser, limits the digits).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from assurance.errors import AssuranceInputError, AssuranceWarning
from assurance.priors import Mixture, Normal, StudentT
from assurance.priors.elicitation import (
    Beta,
    Gamma,
    Interval,
    PriorFit,
    Quantile,
    fit_prior,
    linear_pool,
)
from assurance.report import plot_fit

LEVELS = [0.05, 0.25, 0.5, 0.75, 0.95]


def _quantiles(dist, levels=LEVELS):
    return [Quantile(float(dist.ppf(p)), p) for p in levels]


# ------------------------------------------------------------------------------------------
# exact solutions
# ------------------------------------------------------------------------------------------
def test_normal_from_two_quantiles_is_the_exact_solution():
    # Common practice: x = mean + sd * z_p, two equations in two unknowns.
    x1, p1, x2, p2 = 1.5, 0.25, 4.0, 0.9
    z1, z2 = stats.norm.ppf(p1), stats.norm.ppf(p2)
    sd = (x2 - x1) / (z2 - z1)
    mean = x1 - sd * z1
    fit = fit_prior([Quantile(x2, p2), Quantile(x1, p1)], family="normal")
    assert fit.method == "closed form"
    assert isinstance(fit.prior, Normal)
    assert fit.prior.mean() == pytest.approx(mean, abs=1e-12)
    assert fit.prior.sd() == pytest.approx(sd, rel=1e-12)
    np.testing.assert_allclose(fit.fitted, fit.elicited, atol=1e-12)
    assert fit.sum_of_squares < 1e-24
    # the same two statements fitted by least squares (an interval beside a quantile) land
    # on the same normal: P(x1 < X <= x2) = p2 - p1 together with P(X <= x1) = p1
    ls = fit_prior([Quantile(x1, p1), Interval(x1, x2, p2 - p1)], family="normal")
    assert ls.method == "least squares"
    assert ls.prior.mean() == pytest.approx(mean, abs=1e-8)
    assert ls.prior.sd() == pytest.approx(sd, rel=1e-8)


def test_lognormal_from_median_and_upper_quantile():
    # "Median HR 0.8, 90% sure it is below 1.0": log HR ~ N(log 0.8, (log(1/0.8) / z_.9)^2)
    # (common practice: quantiles of a log-normal are exp of normal quantiles).
    fit = fit_prior({0.8: 0.5, 1.0: 0.9}, family="lognormal")
    assert fit.scale == "log" and fit.method == "closed form"
    assert fit.prior.mean() == pytest.approx(math.log(0.8), abs=1e-12)
    assert fit.prior.sd() == pytest.approx(math.log(1 / 0.8) / stats.norm.ppf(0.9), rel=1e-12)
    ref = stats.lognorm(fit.prior.sd(), scale=0.8)
    grid = np.linspace(0.3, 1.6, 27)
    np.testing.assert_allclose(fit.cdf(grid), ref.cdf(grid), atol=1e-12)
    assert fit.cdf(-1.0) == 0.0 and fit.ppf(0.9) == pytest.approx(1.0, rel=1e-12)


def test_t_with_fixed_df_from_two_quantiles():
    # Same algebra with Student t quantiles (scipy.stats.t.ppf).
    df = 4.0
    ref = stats.t(df, loc=-0.2, scale=0.3)
    fit = fit_prior([(float(ref.ppf(0.1)), 0.1), (float(ref.ppf(0.6)), 0.6)], family="t",
                    df=df)
    assert fit.method == "closed form" and isinstance(fit.prior, StudentT)
    assert fit.parameters["loc"] == pytest.approx(-0.2, abs=1e-12)
    assert fit.parameters["scale"] == pytest.approx(0.3, rel=1e-12)


# ------------------------------------------------------------------------------------------
# recovery of known distributions (scipy.stats) by least squares
# ------------------------------------------------------------------------------------------
RECOVERY = [
    pytest.param("normal", stats.norm(1.2, 0.7), {"mean": 1.2, "sd": 0.7}, id="normal"),
    pytest.param("t", stats.t(5, 0.2, 0.3), {"df": 5.0, "loc": 0.2, "scale": 0.3},
                 id="t-fitted-df"),
    pytest.param("lognormal", stats.lognorm(0.25, scale=0.8),
                 {"log_mean": math.log(0.8), "log_sd": 0.25}, id="lognormal"),
    pytest.param("beta", stats.beta(3, 12), {"a": 3.0, "b": 12.0}, id="beta"),
    pytest.param("gamma", stats.gamma(2.5, scale=1 / 4), {"shape": 2.5, "rate": 4.0},
                 id="gamma"),
]


@pytest.mark.parametrize(("family", "dist", "params"), RECOVERY)
def test_fit_recovers_scipy_parameters(family, dist, params):
    fit = fit_prior(_quantiles(dist), family=family)
    assert fit.method == "least squares"
    for name, value in params.items():
        assert fit.parameters[name] == pytest.approx(value, rel=1e-6, abs=1e-9), name
    # the fitted distribution function is the scipy one
    grid = dist.ppf(np.linspace(0.01, 0.99, 25))
    np.testing.assert_allclose(fit.cdf(grid), dist.cdf(grid), atol=1e-7)
    assert fit.sum_of_squares < 1e-14 and fit.acceptable


@pytest.mark.parametrize(("family", "dist", "params"), RECOVERY)
def test_best_family_is_the_generating_one(family, dist, params):
    # With five exact quantiles only the generating family reaches a zero sum of squares.
    fit = fit_prior(_quantiles(dist), family="best")
    assert fit.family == family
    assert fit.sum_of_squares == min(fit.alternatives.values())
    assert set(fit.alternatives) >= {family}


def test_beta_and_gamma_priors_match_scipy():
    grid = np.linspace(0.01, 0.99, 11)
    np.testing.assert_allclose(Beta(3, 12).cdf(grid), stats.beta(3, 12).cdf(grid), atol=1e-14)
    np.testing.assert_allclose(Gamma(2.5, 4).cdf(grid), stats.gamma(2.5, scale=0.25).cdf(grid),
                               atol=1e-14)
    assert Gamma(2.5, 4).var() == pytest.approx(2.5 / 16, rel=1e-12)
    # negation reflects the distribution: P(-X <= -x) = P(X >= x)
    assert float(Beta(3, 12).negated().cdf(-0.2)) == pytest.approx(stats.beta(3, 12).sf(0.2))


def test_interval_statements_recover_a_beta():
    ref = stats.beta(3, 12)
    stmts = [Interval(float(ref.ppf(0.1)), float(ref.ppf(0.8)), 0.7),
             Quantile(float(ref.ppf(0.5)), 0.5)]
    fit = fit_prior(stmts, family="beta")
    assert isinstance(fit.prior, Beta)
    assert fit.parameters["a"] == pytest.approx(3.0, rel=1e-6)
    assert fit.parameters["b"] == pytest.approx(12.0, rel=1e-6)


@settings(max_examples=30, deadline=None)
@given(mean=st.floats(-5, 5), sd=st.floats(0.05, 5),
       levels=st.lists(st.floats(0.02, 0.98), min_size=3, max_size=5, unique=True))
def test_property_normal_recovery(mean, sd, levels):
    # Any three or more distinct quantiles of N(mean, sd) recover it (scipy.stats.norm).
    levels = sorted(levels)
    if min(np.diff(levels)) < 1e-3:
        return
    fit = fit_prior(_quantiles(stats.norm(mean, sd), levels), family="normal")
    assert fit.prior.mean() == pytest.approx(mean, abs=1e-6 * max(1, sd))
    assert fit.prior.sd() == pytest.approx(sd, rel=1e-6)
    assert np.all((fit.fitted >= 0) & (fit.fitted <= 1))


# ------------------------------------------------------------------------------------------
# several experts
# ------------------------------------------------------------------------------------------
def test_linear_pool_cdf_is_the_weighted_cdf():
    # Stone 1961: the linear opinion pool's cdf is sum w_i F_i (checked with scipy.stats).
    a = fit_prior({0.8: 0.5, 1.0: 0.9}, family="lognormal")
    b = fit_prior({0.7: 0.5, 0.95: 0.9}, family="lognormal")
    pooled = linear_pool([a, b], [0.3, 0.7])
    assert isinstance(pooled, Mixture)
    ref_a = stats.norm(a.prior.mean(), a.prior.sd())
    ref_b = stats.norm(b.prior.mean(), b.prior.sd())
    grid = np.linspace(-1.0, 0.5, 31)
    np.testing.assert_allclose(pooled.cdf(grid), 0.3 * ref_a.cdf(grid) + 0.7 * ref_b.cdf(grid),
                               atol=1e-12)
    equal = linear_pool([Normal(0, 1), Normal(2, 1)])
    assert equal.weights == [0.5, 0.5]
    assert equal.mean() == pytest.approx(1.0)


# ------------------------------------------------------------------------------------------
# report and figure
# ------------------------------------------------------------------------------------------
def test_report_lists_each_statement():
    fit = fit_prior({2.0: 0.25, 3.0: 0.5, 4.5: 0.9}, family="normal")
    text = fit.report()
    for s in fit.statements:
        assert s.describe() in text
    assert "Sum of squared misses" in text
    d = fit.to_dict()
    assert d["family"] == "normal" and len(d["fitted"]) == 3 and d["acceptable"] is True


def test_plot_fit_draws_the_fitted_cdf_and_points():
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fit = fit_prior([Quantile(0.18, 0.5), Interval(0.08, 0.28, 0.7)], family="beta")
    ax = plot_fit(fit)
    assert isinstance(ax.figure.canvas, FigureCanvasAgg)
    curve = ax.get_lines()[0]
    np.testing.assert_allclose(curve.get_ydata(), fit.cdf(curve.get_xdata()), atol=1e-12)
    fig = Figure()
    FigureCanvasAgg(fig)
    own = fig.add_subplot()
    assert plot_fit(fit, ax=own) is own
    fig.canvas.draw()
    with pytest.raises(AssuranceInputError, match="'result' parameter of plot_fit"):
        plot_fit(Normal(0, 1))


# ------------------------------------------------------------------------------------------
# end to end: a fitted prior as a design prior
# ------------------------------------------------------------------------------------------
def test_fitted_prior_drives_a_design():
    import assurance as asr

    fit = fit_prior({2.0: 0.25, 3.0: 0.5, 4.5: 0.9}, family="normal")
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"), fit.prior)
    ds = asr.evaluate(design, [200])
    # O'Hagan et al. 2005: normal prior, z test -> Phi((m - c) / sqrt(v + se^2))
    se = 10.0 * math.sqrt(2 / 100)
    m, v = fit.prior.mean(), fit.prior.var()
    expected = stats.norm.sf(stats.norm.ppf(0.975) * se, m, math.sqrt(v + se**2))
    assert float(ds.assurance[0]) == pytest.approx(expected, abs=1e-9)


# ------------------------------------------------------------------------------------------
# bad input
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(("statements", "family", "match"), [
    ({0.5: 0.5, 0.4: 0.9}, "normal", "increase with their values"),
    ([(0.5, 0.5), (0.5, 0.9)], "normal", "increase with their values"),
    ([(0.5, 1.0), (0.8, 0.9)], "normal",
     r"'prob' parameter of Quantile must be a number in \(0, 1\)"),
    ([(0.5, 0.0), (0.8, 0.9)], "normal", r"'prob' parameter of Quantile"),
    ([(0.1, 0.3, 1.2)], "normal", r"'prob' parameter of Interval"),
    ([(0.3, 0.1, 0.5)], "normal", r"'upper' parameter of Interval"),
    ({0.5: 0.5}, "normal", "at least 2 statements"),
    ({0.5: 0.5, 0.8: 0.9}, "t", "at least 3 statements.*'df'"),
    ({0.5: 0.5, 1.2: 0.9}, "beta", r"P\(X <= 1.2\) = 0.9.*in \(0, 1\)"),
    ([(-0.1, 0.4, 0.5), (0.2, 0.5)], "beta", "beta prior"),
    ({0.0: 0.5, 1.2: 0.9}, "lognormal", r"P\(X <= 0\) = 0.5.*> 0"),
    ({-1.0: 0.5, 1.2: 0.9}, "gamma", "gamma prior"),
    ({0.5: 0.5, 0.8: 0.9}, "weibull", "'family' parameter of fit_prior must be one of"),
    ([], "normal", "at least one statement"),
    ("median 0.8", "normal", "'statements' parameter of fit_prior"),
    ([(1, 2, 3, 4)], "normal", "'statements' parameter of fit_prior"),
])
def test_bad_statements_are_refused(statements, family, match):
    with pytest.raises(AssuranceInputError, match=match):
        fit_prior(statements, family=family)


def test_a_family_that_cannot_match_names_the_statement_and_the_miss():
    # A symmetric normal cannot put 0.4 of its mass between 0 and 1 and only 0.4 above 1.1
    # with the median at 1: least squares leaves statement 1 missed by about 0.1.
    stmts = {0.0: 0.1, 1.0: 0.5, 1.1: 0.9}
    with pytest.raises(AssuranceInputError,
                       match=r"misses statement 1, P\(X <= 0\) = 0.1: it gives .*off by"):
        fit_prior(stmts, family="normal")
    with pytest.warns(AssuranceWarning, match="misses statement 1"):
        fit = fit_prior(stmts, family="normal", on_miss="warn")
    assert not fit.acceptable and "WARNING" in fit.report()
    assert abs(fit.misses[0]) > 0.05
    # a looser tolerance accepts it, silently
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert fit_prior(stmts, family="normal", tolerance=0.2).acceptable


@pytest.mark.parametrize(("kwargs", "match"), [
    ({"tolerance": 0.0}, "'tolerance' parameter of fit_prior"),
    ({"tolerance": 1.5}, "'tolerance' parameter of fit_prior"),
    ({"on_miss": "ignore"}, "'on_miss' parameter of fit_prior"),
    ({"df": -1.0, "family": "t"}, "'df' parameter of fit_prior"),
])
def test_bad_options(kwargs, match):
    kwargs.setdefault("family", "normal")
    with pytest.raises(AssuranceInputError, match=match):
        fit_prior({0.5: 0.5, 0.8: 0.9, 1.0: 0.95}, **kwargs)


def test_best_with_no_suitable_family():
    with pytest.raises(AssuranceInputError, match="at least one family"):
        fit_prior({0.5: 0.5}, family="best")


@pytest.mark.parametrize(("judgements", "weights", "match"), [
    ([Normal(0, 1), Normal(1, 1)], [0.5, 0.6], "must sum to 1"),
    ([Normal(0, 1), Normal(1, 1)], [1.0], "one weight per expert"),
    ([Normal(0, 1), Normal(1, 1)], [-0.5, 1.5], "'weights' parameter of linear_pool"),
    ([], None, "non-empty list"),
    ([Normal(0, 1), "expert"], None, "must hold priors or prior fits"),
])
def test_linear_pool_bad_input(judgements, weights, match):
    with pytest.raises(AssuranceInputError, match=match):
        linear_pool(judgements, weights)


def test_linear_pool_refuses_mixed_scales():
    log_fit = fit_prior({0.8: 0.5, 1.0: 0.9}, family="lognormal")
    nat_fit = fit_prior({0.8: 0.5, 1.0: 0.9}, family="normal")
    assert isinstance(log_fit, PriorFit)
    with pytest.raises(AssuranceInputError, match="one scale"):
        linear_pool([log_fit, nat_fit])
