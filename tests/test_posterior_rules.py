"""Posterior-probability rules, analysis priors and go/consider/stop zones."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

import assurance as asr
from assurance.design_file import parse_design
from assurance.errors import AssuranceInputError, DesignFileError
from assurance.rules.posterior import posterior_prob_above

SIZES = [20, 60, 150, 400, 1000]


# ---- conjugate updating against a published worked example ------------------------------
def test_posterior_matches_spiegelhalter_thrombolysis_example():
    # Spiegelhalter, Abrams & Myles 2004, ch. 3 (recomputed in /work/shared/references.md):
    # on the log odds ratio scale with sigma = 2, a prior of mean -0.255 worth 236.7 events
    # and data -0.736 worth 30.5 events give a posterior mean -0.309 (SE 0.122). The
    # posterior median is its mean, so P(delta > -0.309 | d) = 1/2. Inputs and output are
    # printed to 3 decimals: up to about 0.001 in the mean, 0.008 in z, 0.0033 in
    # probability; allow 0.004.
    prior = asr.Normal(-0.255, 2 / math.sqrt(236.7))
    se = 2 / math.sqrt(30.5)
    p = float(posterior_prob_above(prior, -0.736, se, -0.309))
    assert p == pytest.approx(0.5, abs=0.004)
    # one posterior SD above the mean: P = Phi(-1) (common practice), same rounding
    p_sd = float(posterior_prob_above(prior, -0.736, se, -0.309 + 0.122))
    assert p_sd == pytest.approx(stats.norm.sf(1.0), abs=0.006)


def test_posterior_matches_sceptical_prior_variant():
    # Same source: sceptical prior N(0, 0.35^2) gives posterior mean -0.36, SE 0.25 (printed
    # to 2 decimals: allow 0.005/0.25 in z, about 0.008 in probability).
    p = float(posterior_prob_above(asr.Normal(0.0, 0.35), -0.736, 0.362, -0.36))
    assert p == pytest.approx(0.5, abs=0.01)


@pytest.mark.parametrize("prior", [
    None,
    asr.Normal(1.0, 2.0),
    asr.Mixture([asr.Normal(0.5, 0.3), asr.Normal(0.0, 5.0)], [0.7, 0.3]),
    asr.Mixture([asr.PointMass(0.0), asr.Normal(1.0, 1.0)], [0.4, 0.6]),
])
def test_posterior_probability_against_numerical_integration(prior):
    # independent: posterior by Bayes' theorem with scipy.integrate.quad over a grid of the
    # prior's parts (point masses handled as weights times likelihood)
    d, se, b = 0.8, 0.4, 0.3
    if prior is None:
        ref = stats.norm.sf(b, d, se)
    else:
        num = den = 0.0
        for w, part in prior.parts():
            if isinstance(part, asr.PointMass):
                like = stats.norm.pdf(d, part.value, se)
                den += w * like
                num += w * like * (part.value > b)
            else:
                f = lambda x, p=part: stats.norm.pdf(d, x, se) * p.pdf(x)  # noqa: E731
                den += w * integrate.quad(f, -np.inf, np.inf, epsabs=1e-13)[0]
                num += w * integrate.quad(f, b, np.inf, epsabs=1e-13)[0]
        ref = num / den
    assert float(posterior_prob_above(prior, d, se, b)) == pytest.approx(ref, abs=1e-8)


@pytest.mark.parametrize("prior", [None, asr.Normal(0.0, 1.0),
                                   asr.Mixture([asr.Normal(0.5, 0.3), asr.Normal(0.0, 5.0)],
                                               [0.5, 0.5])])
@pytest.mark.parametrize("level", [0.8, 0.975])
def test_threshold_is_where_the_posterior_reaches_the_level(prior, level):
    rule = asr.PosteriorProbability(level, beyond=0.2, analysis_prior=prior)
    se = np.array([0.05, 0.3, 1.0])
    c = rule.threshold(se, rule.critical_z())
    # definition of the threshold (the posterior probability is increasing in d)
    np.testing.assert_allclose(posterior_prob_above(prior, c, se, 0.2), level, atol=1e-9)


# ---- frequentist operating characteristics --------------------------------------------
@pytest.mark.parametrize("analysis", ["z", "t"])
@pytest.mark.parametrize("alpha", [0.025, 0.05])
def test_flat_prior_rule_matches_significance(analysis, alpha):
    # Common practice: P(delta > 0 | data) >= 1 - alpha under a flat prior has the operating
    # characteristics of the one-sided test at alpha (exactly, for z and t analyses).
    ep = asr.ContinuousEndpoint(sigma=8.0, analysis=analysis)
    prior = asr.Mixture([asr.PointMass(0.0), asr.Normal(3.0, 2.0)], [0.2, 0.8])
    bayes = asr.TrialDesign(ep, prior, rule=asr.PosteriorProbability(1 - alpha),
                            relevant_effect=2.0)
    freq = asr.TrialDesign(ep, prior, rule=asr.Significance(alpha), relevant_effect=2.0)
    a, b = asr.evaluate(bayes, SIZES), asr.evaluate(freq, SIZES)
    for name in ("power", "assurance", "type_one_error", "conditional_assurance"):
        np.testing.assert_allclose(a[name].values, b[name].values, atol=1e-12)
    np.testing.assert_allclose(a.type_one_error.values, alpha, atol=1e-9)
    assert bayes.ceiling() == pytest.approx(freq.ceiling(), abs=1e-12)


def test_sceptical_analysis_prior_lowers_type_one_error_and_assurance():
    ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    flat = asr.TrialDesign(ep, asr.Normal(4.0, 2.0), rule=asr.PosteriorProbability(0.975))
    sceptic = asr.TrialDesign(ep, asr.Normal(4.0, 2.0), rule=asr.PosteriorProbability(0.975),
                              analysis_prior=asr.Normal(0.0, 2.0))
    a, b = asr.evaluate(flat, SIZES), asr.evaluate(sceptic, SIZES)
    assert np.all(b.type_one_error.values < a.type_one_error.values)
    assert np.all(b.assurance.values < a.assurance.values)
    # independent check of the sceptical type I error at n = 400 (z, sigma 10):
    # success iff posterior mean / posterior sd > z_0.975 (Spiegelhalter et al. 2004, ch. 3)
    se = 10 * math.sqrt(2 / 200)
    v1 = 1 / (1 / 4 + 1 / se**2)
    c = se**2 * stats.norm.isf(0.025) * math.sqrt(v1) / v1
    assert float(b.type_one_error.sel(n=400)) == pytest.approx(stats.norm.sf(c / se), abs=1e-12)


def test_design_prior_and_analysis_prior_play_different_parts():
    # Changing the analysis prior changes the rule, not the truth: the ceiling (prior
    # probability of the passable region, from the design prior) is unchanged.
    ep = asr.ContinuousEndpoint(sigma=10.0)
    base = asr.TrialDesign(ep, asr.Normal(4.0, 2.0), rule=asr.PosteriorProbability(0.9))
    other = asr.TrialDesign(ep, asr.Normal(4.0, 2.0), rule=asr.PosteriorProbability(0.9),
                            analysis_prior=asr.Normal(-1.0, 1.0))
    assert other.ceiling() == pytest.approx(base.ceiling(), abs=1e-15)
    assert float(asr.evaluate(other, [200]).assurance[0]) < float(
        asr.evaluate(base, [200]).assurance[0])


def test_lower_is_better_mirror():
    up = asr.TrialDesign(asr.ContinuousEndpoint(5.0, analysis="z"), asr.Normal(2.0, 1.0),
                         rule=asr.PosteriorProbability(0.95, beyond=0.5),
                         analysis_prior=asr.Normal(0.5, 2.0))
    down = asr.TrialDesign(asr.ContinuousEndpoint(5.0, analysis="z", better="lower"),
                           asr.Normal(-2.0, 1.0), rule=asr.PosteriorProbability(0.95, -0.5),
                           analysis_prior=asr.Normal(-0.5, 2.0))
    np.testing.assert_allclose(asr.evaluate(up, SIZES).assurance.values,
                               asr.evaluate(down, SIZES).assurance.values, atol=1e-12)


# ---- go / consider / stop --------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(mean=st.floats(-2, 6), sd=st.floats(0.1, 4), mav=st.floats(-1, 3),
       gap=st.floats(0.1, 3), p_go=st.floats(0.55, 0.99), p_target=st.floats(0.2, 0.8),
       p_stop=st.floats(0.01, 0.19), analysis=st.sampled_from(["z", "t"]))
def test_zone_probabilities_sum_to_one(mean, sd, mav, gap, p_go, p_target, p_stop, analysis):
    design = asr.TrialDesign(asr.ContinuousEndpoint(4.0, analysis=analysis),
                             asr.Normal(mean, sd))
    zones = asr.GoConsiderStop(mav, mav + gap, go_min_prob=p_go, go_target_prob=p_target,
                               stop_target_prob=p_stop)
    ds = asr.evaluate_zones(design, zones, [10, 40, 200, 2000])
    total = ds.prob_go + ds.prob_consider + ds.prob_stop
    np.testing.assert_allclose(total.values, 1.0, atol=1e-12)
    oc_total = ds.oc_go + ds.oc_consider + ds.oc_stop
    np.testing.assert_allclose(oc_total.values, 1.0, atol=1e-12)
    for name in ("prob_go", "prob_consider", "prob_stop"):
        assert np.all((ds[name].values >= 0) & (ds[name].values <= 1))


@pytest.mark.parametrize("effect", [0.0, 2.0, 3.5])
def test_point_mass_zones_equal_operating_characteristics(effect):
    design = asr.TrialDesign(asr.ContinuousEndpoint(6.0), asr.PointMass(effect))
    zones = asr.GoConsiderStop(1.5, 3.0)
    ds = asr.evaluate_zones(design, zones, SIZES, effects=[effect])
    for zone in ("go", "consider", "stop"):
        np.testing.assert_allclose(ds[f"prob_{zone}"].values, ds[f"oc_{zone}"].values[0],
                                   atol=1e-12)


def test_zone_probabilities_against_direct_formula():
    # flat analysis prior, z analysis: go iff d > max(mav + z_0.9 se, tv), stop iff
    # d < tv + z_0.1 se (one-sided bounds; common practice); normal design prior gives
    # d ~ N(m, v + se^2) (O'Hagan, Stevens & Campbell 2005).
    m, v, sigma, mav, tv = 3.0, 1.5**2, 8.0, 1.0, 3.0
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma, analysis="z"), asr.Normal(m, 1.5))
    ds = asr.evaluate_zones(design, asr.GoConsiderStop(mav, tv), SIZES)
    for n in SIZES:
        se = sigma * math.sqrt(4 / n)
        tau = math.sqrt(v + se**2)
        c_go = max(mav + stats.norm.ppf(0.9) * se, tv)
        c_stop = tv + stats.norm.ppf(0.1) * se
        go = stats.norm.sf(c_go, m, tau)
        stop = stats.norm.cdf(min(c_stop, c_go), m, tau)
        assert float(ds.prob_go.sel(n=n)) == pytest.approx(go, abs=1e-12)
        assert float(ds.prob_stop.sel(n=n)) == pytest.approx(stop, abs=1e-12)


def test_zone_inputs_are_checked():
    with pytest.raises(AssuranceInputError, match="'stop_target_prob'"):
        asr.GoConsiderStop(1.0, 2.0, go_target_prob=0.3, stop_target_prob=0.4)
    with pytest.raises(AssuranceInputError, match="'go_min_prob'"):
        asr.GoConsiderStop(1.0, 2.0, go_min_prob=1.0)
    design = asr.TrialDesign(asr.ContinuousEndpoint(5.0), asr.Normal(1.0, 1.0))
    with pytest.raises(AssuranceInputError, match="'target'.*above min_acceptable"):
        asr.evaluate_zones(design, asr.GoConsiderStop(2.0, 1.0), SIZES)
    with pytest.raises(AssuranceInputError, match="'level'"):
        asr.PosteriorProbability(1.2)
    with pytest.raises(AssuranceInputError, match="'analysis_prior'"):
        asr.TrialDesign(design.endpoint, asr.Normal(1.0, 1.0),
                        rule=asr.PosteriorProbability(0.9), analysis_prior=asr.Uniform(0, 1))


def test_design_file_with_posterior_rule_analysis_prior_and_zones():
    raw = {
        "title": "Invented",
        "endpoint": {"sd": 10.0},
        "success": {"rule": "posterior_probability", "level": 0.95, "min_estimate": 2.0},
        "analysis_prior": {"family": "normal", "mean": 0.0, "sd": 5.0},
        "design_prior": {"family": "normal", "mean": 4.0, "sd": 2.0},
        "zones": {"min_acceptable": 2.0, "target": 4.0},
    }
    spec = parse_design(raw)
    assert isinstance(spec.design.rule, asr.AllOf)
    assert spec.design.analysis_prior.describe() == "normal(mean=0, sd=5)"
    assert spec.zones.target == 4.0
    raw["success"]["alpha"] = 0.05
    with pytest.raises(DesignFileError, match="unknown key 'alpha'"):
        parse_design(raw)
    del raw["success"]["alpha"]
    raw["zones"]["target"] = 1.0
    with pytest.raises(DesignFileError, match="'zones.target'"):
        parse_design(raw)
