"""Bad inputs raise AssuranceInputError naming the parameter and the value received.

Every case checks the exception class (a ValueError subclass, so callers can catch either)
and that the message holds the parameter's name in quotes and the offending value.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from scipy import stats

from assurance import (
    ContinuousEndpoint,
    FromScipy,
    GammaPrecision,
    Mixture,
    Normal,
    PointMass,
    ScaledInvChiSquare,
    Significance,
    StudentT,
    TrialDesign,
    TruncatedNormal,
    Uniform,
    evaluate,
    solve_sample_size,
)
from assurance.errors import AssuranceInputError

NAN, INF = float("nan"), float("inf")


def _design(**kw):
    return TrialDesign(ContinuousEndpoint(1.0), Normal(0.3, 0.1), **kw)


CASES = [
    # (id, call, parameter name, value as it appears in the message)
    ("sigma-zero", lambda: ContinuousEndpoint(0.0), "sigma", "0.0"),
    ("sigma-negative", lambda: ContinuousEndpoint(-1.0), "sigma", "-1.0"),
    ("sigma-nan", lambda: ContinuousEndpoint(NAN), "sigma", "nan"),
    ("sigma-inf", lambda: ContinuousEndpoint(INF), "sigma", "inf"),
    ("sigma-bool", lambda: ContinuousEndpoint(True), "sigma", "True"),
    ("sigma-string", lambda: ContinuousEndpoint("1"), "sigma", "'1'"),
    ("sigma-none", lambda: ContinuousEndpoint(None), "sigma", "None"),
    ("allocation-zero", lambda: ContinuousEndpoint(1.0, allocation=0.0), "allocation", "0.0"),
    ("allocation-negative", lambda: ContinuousEndpoint(1.0, allocation=-2), "allocation", "-2"),
    ("allocation-nan", lambda: ContinuousEndpoint(1.0, allocation=NAN), "allocation", "nan"),
    ("allocation-inf", lambda: ContinuousEndpoint(1.0, allocation=INF), "allocation", "inf"),
    ("layout", lambda: ContinuousEndpoint(1.0, layout="crossover"), "layout", "'crossover'"),
    ("analysis", lambda: ContinuousEndpoint(1.0, analysis="wald"), "analysis", "'wald'"),
    ("better", lambda: ContinuousEndpoint(1.0, better="up"), "better", "'up'"),
    # rule
    ("alpha-zero", lambda: Significance(alpha=0.0), "alpha", "0.0"),
    ("alpha-one-sided-above-half", lambda: Significance(alpha=0.6), "alpha", "0.6"),
    ("alpha-two-sided-one", lambda: Significance(alpha=1.0, sided="two"), "alpha", "1.0"),
    ("alpha-negative", lambda: Significance(alpha=-0.05), "alpha", "-0.05"),
    ("alpha-nan", lambda: Significance(alpha=NAN), "alpha", "nan"),
    ("alpha-bool", lambda: Significance(alpha=True), "alpha", "True"),
    ("sided", lambda: Significance(sided="both"), "sided", "'both'"),
    ("margin-negative", lambda: Significance(margin=-0.1), "margin", "-0.1"),
    ("margin-inf", lambda: Significance(margin=INF), "margin", "inf"),
    ("min-estimate-nan", lambda: Significance(min_estimate=NAN), "min_estimate", "nan"),
    ("min-estimate-inf", lambda: Significance(min_estimate=-INF), "min_estimate", "-inf"),
    # priors
    ("normal-sd-zero", lambda: Normal(0.0, 0.0), "sd", "0.0"),
    ("normal-sd-negative", lambda: Normal(0.0, -1.0), "sd", "-1.0"),
    ("normal-mean-nan", lambda: Normal(NAN, 1.0), "mean", "nan"),
    ("normal-mean-bool", lambda: Normal(False, 1.0), "mean", "False"),
    ("student-df", lambda: StudentT(0.0), "df", "0.0"),
    ("student-scale", lambda: StudentT(3.0, scale=-1.0), "scale", "-1.0"),
    ("uniform-order", lambda: Uniform(1.0, 1.0), "upper", "1.0"),
    ("uniform-inf", lambda: Uniform(0.0, INF), "upper", "inf"),
    ("truncnorm-upper", lambda: TruncatedNormal(0.0, 1.0, lower=1.0, upper=0.5), "upper", "0.5"),
    ("truncnorm-upper-nan", lambda: TruncatedNormal(0.0, 1.0, upper=NAN), "upper", "nan"),
    ("truncnorm-lower-inf", lambda: TruncatedNormal(0.0, 1.0, lower=INF), "lower", "inf"),
    ("point-mass-inf", lambda: PointMass(INF), "value", "inf"),
    ("point-mass-nan", lambda: PointMass(NAN), "value", "nan"),
    ("weights-sum", lambda: Mixture([Normal(0, 1), PointMass(0)], [0.5, 0.6]), "weights",
     "[0.5, 0.6]"),
    ("weights-negative", lambda: Mixture([Normal(0, 1), PointMass(0)], [1.5, -0.5]), "weights",
     "1.5"),
    ("weights-count", lambda: Mixture([Normal(0, 1), PointMass(0)], [1.0]), "weights", "1"),
    ("weights-bool", lambda: Mixture([Normal(0, 1)], [True]), "weights", "True"),
    ("components-empty", lambda: Mixture([], []), "components", "[]"),
    ("components-not-prior", lambda: Mixture([1.0], [1.0]), "components", "[1.0]"),
    ("from-scipy-discrete", lambda: FromScipy(stats.poisson(3)), "dist", "rv_discrete_frozen"),
    ("from-scipy-string", lambda: FromScipy("logistic"), "dist", "'logistic'"),
    ("sic-df", lambda: ScaledInvChiSquare(0.0, 1.0), "df", "0.0"),
    ("sic-scale", lambda: ScaledInvChiSquare(5.0, -1.0), "scale", "-1.0"),
    ("gamma-shape", lambda: GammaPrecision(0.0, 1.0), "shape", "0.0"),
    ("gamma-rate", lambda: GammaPrecision(1.0, NAN), "rate", "nan"),
    ("ppf-q-zero", lambda: Normal(0, 1).ppf(0.0), "q", "0.0"),
    ("ppf-q-mixture", lambda: Mixture([Normal(0, 1), PointMass(0)], [0.5, 0.5]).ppf(1.0), "q",
     "1.0"),
    ("prob-between", lambda: Normal(0, 1).prob_between(1.0, 0.0), "upper", "0.0"),
    # design
    ("endpoint", lambda: TrialDesign("ep", Normal(0, 1)), "endpoint", "'ep'"),
    ("rule", lambda: TrialDesign(ContinuousEndpoint(1.0), Normal(0, 1), rule=0.05), "rule",
     "0.05"),
    ("design-prior-string", lambda: TrialDesign(ContinuousEndpoint(1.0), "normal"),
     "design_prior", "'normal'"),
    ("design-prior-bool", lambda: TrialDesign(ContinuousEndpoint(1.0), True), "design_prior",
     "True"),
    ("assumed-nan", lambda: _design(assumed_effect=NAN), "assumed_effect", "nan"),
    ("assumed-bool", lambda: _design(assumed_effect=True), "assumed_effect", "True"),
    ("relevant-no-mass", lambda: TrialDesign(ContinuousEndpoint(1.0), Uniform(0.0, 1.0),
                                             relevant_effect=2.0), "relevant_effect", "2"),
    ("relevant-no-mass-lower", lambda: TrialDesign(ContinuousEndpoint(1.0, better="lower"),
                                                   Uniform(0.0, 1.0), relevant_effect=-1.0),
     "relevant_effect", "-1"),
    ("relevant-inf", lambda: _design(relevant_effect=INF), "relevant_effect", "inf"),
    ("sigma-prior-normal", lambda: _design(sigma_prior=Normal(1.0, 1.0)), "sigma_prior",
     "normal(mean=1, sd=1)"),
    ("sigma-prior-zero-atom", lambda: _design(sigma_prior=PointMass(0.0)), "sigma_prior",
     "point_mass(value=0)"),
    ("sigma-prior-negative-atom",
     lambda: _design(sigma_prior=Mixture([PointMass(1.0), PointMass(-1.0)], [0.5, 0.5])),
     "sigma_prior", "point_mass(value=-1)"),
    ("sigma-prior-string", lambda: _design(sigma_prior="8"), "sigma_prior", "'8'"),
    ("power-effects-nan", lambda: _design(power_effects=(1.0, NAN)), "power_effects", "nan"),
    ("title-empty", lambda: _design(title="  "), "title", "'  '"),
    # evaluate
    ("evaluate-design", lambda: evaluate("design", [10]), "design", "'design'"),
    ("sizes-below-minimum-t", lambda: evaluate(_design(), [2]), "sizes", "2"),
    ("sizes-below-minimum-single", lambda: evaluate(
        TrialDesign(ContinuousEndpoint(1.0, layout="single_arm"), Normal(0.3, 0.1)), [1]),
     "sizes", "1"),
    ("sizes-below-minimum-z", lambda: evaluate(
        TrialDesign(ContinuousEndpoint(1.0, analysis="z"), Normal(0.3, 0.1)), [1]), "sizes",
     "1"),
    ("sizes-fraction", lambda: evaluate(_design(), [10.5]), "sizes", "10.5"),
    ("sizes-nan", lambda: evaluate(_design(), [10, NAN]), "sizes", "nan"),
    ("sizes-empty", lambda: evaluate(_design(), []), "sizes", "[]"),
    ("sizes-bool", lambda: evaluate(_design(), [True]), "sizes", "True"),
    ("sizes-string", lambda: evaluate(_design(), "100"), "sizes", "'100'"),
    ("draws-small", lambda: evaluate(_design(), [10], draws=10), "draws", "10"),
    ("draws-bool", lambda: evaluate(_design(), [10], draws=True), "draws", "True"),
    ("seed-negative", lambda: evaluate(_design(), [10], seed=-1), "seed", "-1"),
    ("seed-fraction", lambda: evaluate(_design(), [10], seed=1.5), "seed", "1.5"),
    # solve
    ("solve-design", lambda: solve_sample_size(None, 0.8), "design", "None"),
    ("target-zero", lambda: solve_sample_size(_design(), 0.0), "target", "0.0"),
    ("target-one", lambda: solve_sample_size(_design(), 1.0), "target", "1.0"),
    ("target-percent", lambda: solve_sample_size(_design(), 80), "target", "80"),
    ("target-nan", lambda: solve_sample_size(_design(), NAN), "target", "nan"),
    ("target-bool", lambda: solve_sample_size(_design(), True), "target", "True"),
    ("quantity", lambda: solve_sample_size(_design(), 0.8, quantity="Power"), "quantity",
     "'Power'"),
    ("max-total", lambda: solve_sample_size(_design(), 0.8, max_total=2), "max_total", "2"),
    ("solve-draws", lambda: solve_sample_size(_design(), 0.8, draws=5), "draws", "5"),
]


@pytest.mark.parametrize(("call", "name", "value"), [pytest.param(c, n, v, id=i)
                                                     for i, c, n, v in CASES])
def test_bad_input_names_parameter_and_value(call, name, value):
    with pytest.raises(AssuranceInputError) as info:
        call()
    message = str(info.value)
    assert f"'{name}'" in message
    assert value in message
    assert isinstance(info.value, ValueError)


def test_truncated_normal_without_mass_names_bounds():
    with pytest.raises(AssuranceInputError, match=re.escape("[50, inf]")):
        TruncatedNormal(0.0, 1.0, lower=50.0)


def test_moment_errors_say_what_to_use():
    with pytest.raises(AssuranceInputError, match="df > 1"):
        TrialDesign(ContinuousEndpoint(1.0), StudentT(1.0))
    # with an explicit assumed effect a Cauchy-like prior is fine
    d = TrialDesign(ContinuousEndpoint(1.0), StudentT(1.0, 0.5, 0.2), assumed_effect=0.5)
    assert 0.0 < float(evaluate(d, [100]).assurance[0]) < 1.0


def test_valid_edge_values_are_accepted():
    # the open/closed ends of the documented intervals
    assert Significance(alpha=0.5).alpha == 0.5  # one-sided alpha in (0, 0.5]
    assert Significance(alpha=0.99, sided="two").one_sided_alpha == pytest.approx(0.495)
    assert Significance(margin=0.0).margin == 0.0
    assert ContinuousEndpoint(np.float32(2.0)).sigma == 2.0
    assert ContinuousEndpoint(np.int64(3)).sigma == 3.0
    ds = evaluate(_design(), np.array([3, 4]))
    assert list(ds.n.values) == [3, 4]
    ds = evaluate(_design(), [10.0, 10, 20])  # whole floats are fine, duplicates collapse
    assert list(ds.n.values) == [10, 20]
    # max_total at the smallest size the analysis allows is accepted (and answers plainly)
    ans = solve_sample_size(_design(), 0.9, max_total=3)
    assert not ans.reached and "3" in ans.message


# ------------------------------------------------------------------------------------------
# known gaps (core bugs)
# ------------------------------------------------------------------------------------------
def test_prior_without_mean_needs_an_assumed_effect():
    with pytest.raises(AssuranceInputError, match="assumed_effect|design_prior"):
        TrialDesign(ContinuousEndpoint(1.0), FromScipy(stats.cauchy(1.0, 1.0)))


def test_huge_sizes_are_rejected_or_exact():
    try:
        ds = evaluate(_design(), [1e20])
    except AssuranceInputError as err:
        assert "'sizes'" in str(err)
        return
    assert int(ds.n[0]) > 0
    assert float(ds.assurance[0]) == pytest.approx(stats.norm.sf(0.0, 0.3, 0.1), abs=1e-6)


def test_huge_max_total():
    design = TrialDesign(ContinuousEndpoint(1.0), PointMass(1e-9))
    try:
        ans = solve_sample_size(design, 0.9, quantity="power", max_total=10**30)
    except AssuranceInputError as err:
        assert "'max_total'" in str(err)
        return
    assert not ans.reached or ans.achieved >= 0.9


@pytest.mark.parametrize("prior", [PointMass(1.0), ScaledInvChiSquare(5.0, 1.0)],
                         ids=["point_mass", "scaled_inv_chi_square"])
def test_ppf_validates_q_for_every_family(prior):
    with pytest.raises(AssuranceInputError, match="'q'"):
        prior.ppf(1.5)


def test_truncated_normal_bounds_follow_check_real():
    with pytest.raises(AssuranceInputError, match="'lower'"):
        TruncatedNormal(0.0, 1.0, lower=True)
    assert TruncatedNormal(0.0, 1.0, lower=np.float32(0.0)).lower == 0.0


@pytest.mark.parametrize("size", [-1, 2.5, True])
def test_sample_size_is_validated(size):
    with pytest.raises(AssuranceInputError, match="'size'"):
        Normal(0.0, 1.0).sample(size)


def test_power_effects_scalar():
    try:
        d = _design(power_effects=1.0)
    except AssuranceInputError as err:
        assert "'power_effects'" in str(err)
        return
    assert 1.0 in d.curve_effects()


def test_nan_never_reaches_results():
    # a sweep of ordinary designs: every figure finite (design doc: no silent NaN)
    for prior in (Normal(0.3, 0.1), Mixture([PointMass(0.0), Normal(0.5, 0.2)], [0.3, 0.7]),
                  StudentT(3.0, 0.2, 0.3)):
        for analysis in ("z", "t"):
            d = TrialDesign(ContinuousEndpoint(1.0, analysis=analysis), prior,
                            relevant_effect=0.2)
            ds = evaluate(d, [4, 40, 400, 4000])
            for name, var in ds.data_vars.items():
                assert np.all(np.isfinite(var.values)), name
    assert math.isfinite(d.ceiling())
