"""Prior sensitivity: varied design priors, the map over centre and spread, the centre shift.

Sources of the reference values are named beside each check.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

import assurance as asr
from assurance import ContinuousEndpoint, Mixture, Normal, PointMass, TrialDesign
from assurance.design_file.reader import read_design_file
from assurance.errors import AssuranceInputError
from assurance.sensitivity import (
    PriorVariation,
    SensitivitySettings,
    prior_sensitivity,
    prior_variations,
)

CASES = sorted(Path(__file__).resolve().parents[1].glob("case_studies/*/design.toml"))
SMALL_MAP = SensitivitySettings(map_centres=3, map_spreads=2)


def _run(spec, n, grid=SMALL_MAP):
    return prior_sensitivity(spec.design, n, spec.targets, grid, origin=spec.prior_origin,
                             draws=spec.draws, seed=spec.seed)


@pytest.mark.parametrize("path", CASES, ids=[p.parent.name for p in CASES])
def test_elicited_row_is_evaluate_and_point_prior_row_is_classical_power(path):
    # the two bars of the issue: the elicited row is the plan's own assurance (same
    # method, draws and seed), and a point mass at the assumed effect gives classical power
    # (power at the assumed effect with nuisance values at their planning values: the
    # textbook definition, common practice)
    spec = read_design_file(path)
    n = 400
    ds = _run(spec, n)
    ref = asr.evaluate(spec.design, [n], draws=spec.draws, seed=spec.seed)
    assert float(ds.sensitivity_assurance.sel(variation="elicited")) == \
        float(ref.assurance.values[0])
    assert float(ds.sensitivity_assurance.sel(variation="point_prior")) == \
        pytest.approx(float(ref.power.values[0]), rel=0, abs=1e-9)
    assert float(ds.sensitivity_ceiling.sel(variation="elicited")) == float(ref.ceiling)
    # never NaN; only the new dimensions and sensitivity_ names
    for name, var in ds.data_vars.items():
        assert name.startswith("sensitivity_")
        assert np.isfinite(np.asarray(var.values, dtype=float)).all(), name
    assert set(ds.dims) <= {"variation", "sensitivity_target", "map_centre", "map_spread"}
    assert ds.sensitivity_n.dtype.kind == "i"
    assert list(ds.sensitivity_target.values) == [
        k for k in spec.targets if k in ("assurance", "conditional_assurance")]
    assert isinstance(ds.attrs["sensitivity_sentence"], str)


def test_sizes_match_the_solver():
    # the elicited row's sizes are solve_sample_size's answers on the design itself
    spec = read_design_file(CASES[[p.parent.name for p in CASES].index("knee_pain")])
    ds = _run(spec, 300)
    for key, target in spec.targets.items():
        if key == "power":
            continue
        ans = asr.solve_sample_size(spec.design, target, quantity=key)
        assert int(ds.sensitivity_n.sel(variation="elicited", sensitivity_target=key)) == \
            ans.n_total


def _closed_form(m, s, n, sigma, alpha):
    """O'Hagan, Stevens & Campbell (2005), Pharmaceutical Statistics 4:187-201, eq. for a
    normal prior N(m, s^2) and a one-sided z test: assurance =
    Phi((m - z_{1-alpha} se) / sqrt(se^2 + s^2)), se = sigma sqrt(2 / (n / 2)) for two equal
    arms; Phi and its quantile from scipy.stats.norm."""
    se = sigma * math.sqrt(2.0 / (n / 2))
    z = stats.norm.ppf(1 - alpha)
    return stats.norm.cdf((m - z * se) / math.sqrt(se**2 + s**2))


def test_normal_prior_z_map_matches_closed_form():
    design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    ds = prior_sensitivity(design, 200, {"assurance": 0.6})
    assert ds.sensitivity_map.shape == (21, 15)
    want = np.array([[_closed_form(c, s, 200, 10.0, 0.025) for s in ds.map_spread.values]
                     for c in ds.map_centre.values])
    np.testing.assert_allclose(ds.sensitivity_map.values, want, rtol=0, atol=1e-12)
    # the axes: elicited centre -/+ 2 SDs, spreads 0.25 to 4 times the elicited SD
    assert ds.map_centre.values[[0, -1]] == pytest.approx([0.0, 8.0])
    assert ds.map_spread.values[[0, -1]] == pytest.approx([0.5, 8.0])
    for name, m in (("centre_down", 3.0), ("centre_up", 5.0), ("elicited", 4.0)):
        assert float(ds.sensitivity_assurance.sel(variation=name)) == pytest.approx(
            _closed_form(m, 2.0, 200, 10.0, 0.025), abs=1e-12)
    for name, s in (("spread_x0.5", 1.0), ("spread_x2", 4.0)):
        assert float(ds.sensitivity_assurance.sel(variation=name)) == pytest.approx(
            _closed_form(4.0, s, 200, 10.0, 0.025), abs=1e-12)
        # the ceiling of a normal prior: P(effect > 0) = Phi(m / s) (common practice)
        assert float(ds.sensitivity_ceiling.sel(variation=name)) == pytest.approx(
            stats.norm.cdf(4.0 / s), abs=1e-12)
    assert float(ds.sensitivity_prior_spread.sel(variation="spread_x2")) == pytest.approx(4.0)


@settings(max_examples=25, deadline=None)
@given(m=st.floats(-5, 8), s=st.floats(0.3, 5), n=st.integers(20, 2000),
       lower=st.booleans())
def test_monotone_in_centre_and_spread_towards_one_half(m, s, n, lower):
    # larger is better on the benefit scale: moving the centre towards benefit raises
    # assurance; for a normal prior and z test, assurance is Phi(x / sqrt(se^2 + s^2)), so a
    # wider prior pulls assurance towards 1/2 and a narrower one away from it
    better = "lower" if lower else "higher"
    sign = -1.0 if lower else 1.0
    design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z", better=better),
                         Normal(sign * m, s))
    ds = prior_sensitivity(design, n, {}, SMALL_MAP)
    a = {v: float(ds.sensitivity_assurance.sel(variation=v)) for v in ds.variation.values}
    toward, away = ("centre_down", "centre_up") if lower else ("centre_up", "centre_down")
    assert a[toward] >= a["elicited"] >= a[away]
    assert abs(a["spread_x2"] - 0.5) <= abs(a["elicited"] - 0.5) + 1e-12
    assert abs(a["elicited"] - 0.5) <= abs(a["spread_x0.5"] - 0.5) + 1e-12
    c = {v: float(ds.sensitivity_ceiling.sel(variation=v)) for v in ds.variation.values}
    assert c[toward] >= c["elicited"] >= c[away]
    grid = ds.sensitivity_map.values
    diffs = np.diff(grid, axis=0) * (-1 if lower else 1)
    assert (diffs >= -1e-12).all()
    assert ((0 <= grid) & (grid <= 1)).all()


@pytest.mark.parametrize("prior, n", [
    (Normal(4.0, 2.0), 300),
    (Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.2, 0.8]), 300),
    (Normal(4.0, 2.0), 60),   # below the target: the centre must move up to reach it
])
def test_centre_shift_reaches_the_target(prior, n):
    design = TrialDesign(ContinuousEndpoint(sigma=10.0), prior)
    ds = prior_sensitivity(design, n, {"assurance": 0.6}, SMALL_MAP)
    shift = float(ds.sensitivity_centre_shift)
    moved = prior_variations(design)[0].prior  # the elicited prior
    parts = [(w, Normal(p.mu + shift, p.sigma) if isinstance(p, Normal) else p)
             for w, p in moved.parts()]
    varied = parts[0][1] if len(parts) == 1 else Mixture([p for _, p in parts],
                                                         [w for w, _ in parts])
    got = asr.evaluate(dataclasses.replace(design, design_prior=varied), [n])
    assert float(got.assurance.values[0]) == pytest.approx(0.6, abs=1e-6)
    before = float(ds.sensitivity_assurance.sel(variation="elicited"))
    assert (shift < 0) == (before > 0.6)
    assert "60% target" in ds.attrs["sensitivity_sentence"]


def test_no_assurance_target_and_unreachable_shift_say_so():
    design = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
    ds = prior_sensitivity(design, 300, {"power": 0.9}, SMALL_MAP)
    assert "sensitivity_centre_shift" not in ds
    assert "No assurance target" in ds.attrs["sensitivity_sentence"]
    assert ds.sensitivity_n.shape == (len(ds.variation), 0)
    # a 99.9% target above the ceiling of every centre within 20 prior SDs? No: the ceiling
    # of N(m, 2) tends to 1 as m grows. A point mass at no effect with weight 0.5 caps the
    # ceiling at about 0.5, so a 0.9 target is never reached.
    capped = TrialDesign(ContinuousEndpoint(sigma=10.0),
                         Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.5, 0.5]))
    ds = prior_sensitivity(capped, 300, {"assurance": 0.9}, SMALL_MAP)
    assert "sensitivity_centre_shift" not in ds
    assert "stays below" in ds.attrs["sensitivity_sentence"]
    assert (ds.sensitivity_n.sel(sensitivity_target="assurance").values[:-1] == -1).all()


def test_mixture_rows_keep_point_masses_and_move_weights():
    design = TrialDesign(ContinuousEndpoint(sigma=10.0),
                         Mixture([PointMass(0.0), Normal(4.0, 2.0)], [0.2, 0.8]))
    rows = {v.name: v for v in prior_variations(design)}
    assert all(isinstance(v, PriorVariation) for v in rows.values())
    up = rows["centre_up"].prior
    assert up.atoms() == [(0.0, pytest.approx(0.2))]
    assert up.mean() == pytest.approx(0.8 * 5.0)
    assert rows["weight_down"].prior.atoms()[0][1] == pytest.approx(0.1)
    assert rows["weight_up"].prior.atoms()[0][1] == pytest.approx(0.3)
    assert rows["point_prior"].prior.atoms() == [(4.0 * 0.8, 1.0)]  # assumed: prior mean


def test_earlier_trial_rows_follow_the_recipe():
    spec = read_design_file(CASES[[p.parent.name for p in CASES].index("phase2_to_phase3")])
    origin = spec.prior_origin
    rows = {v.name: v for v in prior_variations(spec.design, origin=origin)}
    assert {"shrinkage_down", "shrinkage_up", "power_weight_down", "power_weight_up",
            "robust_weight_down", "robust_weight_up"} <= set(rows)
    want = origin.replace(shrinkage=origin.shrinkage + 0.1).prior()
    assert rows["shrinkage_up"].prior.mean() == pytest.approx(want.mean())
    # centre moves touch only the informative part; the vague part stays put
    informative = origin.replace(robust_weight=1.0).prior()
    parts = rows["centre_down"].prior.parts()
    moved = [p for _, p in parts if p.sigma == pytest.approx(informative.sigma)]
    vague = [p for _, p in parts if p.sigma == pytest.approx(origin.vague_sd)]
    assert moved[0].mu == pytest.approx(informative.mu - 0.5 * informative.sigma)
    assert vague[0].mu == pytest.approx(informative.mu)
    # a power weight of 1 cannot double: no "up" row then
    whole = origin.replace(power_weight=1.0)
    names = [v.name for v in prior_variations(dataclasses.replace(
        spec.design, design_prior=whole.prior()), origin=whole)]
    assert "power_weight_up" not in names and "power_weight_down" in names


def test_beta_rates_move_the_treatment_beta():
    spec = read_design_file(CASES[[p.parent.name for p in CASES].index("response_rate")])
    prior = spec.design.design_prior
    rows = {v.name: v.prior for v in prior_variations(spec.design)}
    m, s = prior.mean(), prior.sd()
    assert rows["centre_up"].mean() == pytest.approx(m + 0.5 * s, abs=1e-8)
    assert rows["centre_up"].sd() == pytest.approx(s, abs=1e-8)
    assert rows["spread_x0.5"].sd() == pytest.approx(0.5 * s, abs=1e-8)
    assert rows["spread_x0.5"].control == prior.control


@pytest.mark.parametrize("scale", ["difference", "risk_ratio", "odds_ratio"])
def test_beta_rates_map_points_have_the_mean_and_sd_asked_for(scale):
    # the treatment beta is found in closed form on the difference scale (mean and variance
    # of a beta: common practice) and by a root finder on the log scales; either way the
    # prior built has the effect mean and SD asked for, by its own moments
    from assurance.endpoints.binary import BetaRates
    from assurance.sensitivity import _beta_with

    prior = BetaRates((36.0, 84.0), (9.0, 11.0), scale)
    m, s = prior.mean(), prior.sd()
    found = 0
    for shift in (-1.0, 0.0, 0.5, 2.0):
        for factor in (0.3, 0.6, 1.0, 1.5, 3.0):
            moved = _beta_with(prior, m + shift * s, factor * s)
            if moved is None:
                continue
            found += 1
            assert moved.control == prior.control
            assert moved.mean() == pytest.approx(m + shift * s, abs=1e-9 * s)
            assert moved.sd() == pytest.approx(factor * s, rel=1e-9)
    assert found >= 12


def test_beta_rates_wide_map_points_exist_when_a_beta_gives_them():
    # difference scale: a treatment beta with mean 0.45 and variance 0.098 - 0.0017 exists
    # (a + b = 0.45 * 0.55 / 0.0962 - 1 = 1.57); the map must not leave the point empty
    from assurance.endpoints.binary import BetaRates
    from assurance.sensitivity import _beta_with

    prior = BetaRates((36.0, 84.0), (9.0, 11.0), "difference")
    moved = _beta_with(prior, 0.15, 0.313005)
    assert moved is not None
    arm = moved.treatment_arm
    assert arm.a + arm.b == pytest.approx(0.45 * 0.55 / (0.313005**2 - 0.3 * 0.7 / 121) - 1,
                                          rel=1e-12)
    # no beta has a variance at or above mean * (1 - mean): None, not an error
    assert _beta_with(prior, 0.15, 0.6) is None


def test_other_families_move_by_an_affine_map():
    for prior in (asr.StudentT(5, 2.0, 1.0), asr.Uniform(0.0, 4.0),
                  asr.TruncatedNormal(2.0, 1.5, lower=-1.0),
                  asr.FromScipy(stats.logistic(loc=2.0, scale=0.8))):
        design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), prior)
        rows = {v.name: v.prior for v in prior_variations(design)}
        s = prior.sd()
        assert rows["centre_up"].mean() == pytest.approx(prior.mean() + 0.5 * s, rel=1e-9)
        assert rows["spread_x2"].sd() == pytest.approx(2 * s, rel=1e-9)
        assert rows["spread_x2"].mean() == pytest.approx(prior.mean(), rel=1e-9, abs=1e-12)


def test_point_mass_prior_gives_only_the_rows_that_make_sense():
    design = TrialDesign(ContinuousEndpoint(sigma=10.0), PointMass(4.0))
    ds = prior_sensitivity(design, 200, {"assurance": 0.8})
    assert list(ds.variation.values) == ["elicited", "point_prior"]
    assert ds.sensitivity_map.size == 0
    assert "cannot be varied" in ds.attrs["sensitivity_sentence"]


@pytest.mark.parametrize("kwargs, text", [
    ({"centre_shift": -1.0}, "The 'centre_shift' parameter of SensitivitySettings"),
    ({"spread_factors": (1.0,)}, "other than 1"),
    ({"spread_factors": "wide"}, "The 'spread_factors' parameter"),
    ({"weight_change": 1.5}, "The 'weight_change' parameter of SensitivitySettings"),
    ({"map_centres": 1}, "The 'map_centres' parameter"),
    ({"map_spread_range": (2.0, 1.0)}, "The 'map_spread_range' parameter"),
    ({"map_spread_range": (1.0,)}, "pair (low, high)"),
])
def test_settings_are_checked(kwargs, text):
    with pytest.raises(AssuranceInputError, match=text.replace("(", r"\(").replace(")", r"\)")):
        SensitivitySettings(**kwargs)


def test_inputs_are_checked():
    design = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
    with pytest.raises(AssuranceInputError, match="'planned_n' parameter of prior_sensitivity"):
        prior_sensitivity(design, 1, {})
    with pytest.raises(AssuranceInputError, match="'targets' parameter"):
        prior_sensitivity(design, 100, [0.8])
    with pytest.raises(AssuranceInputError, match=r"targets\['assurance'\]"):
        prior_sensitivity(design, 100, {"assurance": 1.5})
    with pytest.raises(AssuranceInputError, match="'settings' parameter"):
        prior_variations(design, {"centre_shift": 1})


def test_a_plan_without_margin_says_what_a_less_favourable_prior_means():
    # at the smallest size reaching the target the centre shift is tiny and says nothing;
    # the sentence gives the less favourable centre row instead (its numbers, rounded)
    design = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    n = asr.solve_sample_size(design, 0.6).n_total
    ds = prior_sensitivity(design, n, {"assurance": 0.6})
    sentence = ds.attrs["sensitivity_sentence"]
    down = ds.sel(variation="centre_down")
    assert "smallest size reaching the 60% assurance target" in sentence
    assert f"{float(down.sensitivity_assurance):.0%}" in sentence
    assert f"{int(down.sensitivity_n.sel(sensitivity_target='assurance')):,} patients" \
        in sentence
    # with room to spare the sentence gives the shift itself
    roomy = prior_sensitivity(design, 3 * n, {"assurance": 0.6})
    assert "falls below the 60% target if the prior's centre moves down" in \
        roomy.attrs["sensitivity_sentence"]
