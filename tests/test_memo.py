"""The decision memo of every case study: decision first, plain words, the plan's numbers.

Numbers in the memo are checked against the plan's own results (the memo computes nothing
new) with the rounding the memo promises, written out here independently of the package
(``_shown``). Quantiles in the plain-words priors are checked against scipy.stats.
"""

from __future__ import annotations

import hashlib
import math
import re
from dataclasses import replace
from html.parser import HTMLParser

import numpy as np
import pytest
from _memo_plans import CASE_STUDIES, ROOT, case_plan
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats

import assurance as asr
from assurance.report import wording as wd
from assurance.report.memo import DEFAULT_CAUTIONS, ZONES_SOURCE, plan_memo_html

DATE = "2026-01-05"
VERSIONS = "python 3.x\nassurance test-build"


# ------------------------------------------------------------------------------------------
# reading a memo
# ------------------------------------------------------------------------------------------
class _Page(HTMLParser):
    """Sections in order, the decision box's values by key, table rows by variation, text."""

    def __init__(self) -> None:
        super().__init__()
        self.sections: list[str] = []
        self.values: dict[str, str] = {}
        self.leads: list[str] = []
        self.variations: dict[str, list[str]] = {}
        self.order: list[str] = []  # h1 and section ids, in order
        self.text: list[str] = []
        self._key: str | None = None
        self._lead = False
        self._variation: str | None = None
        self._cell: list[str] | None = None
        self._skip = 0

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag in ("style", "title"):
            self._skip += 1
        if tag == "h1":
            self.order.append("h1")
        if tag == "section":
            self.order.append(a.get("id") or a.get("class") or "")
        if "data-key" in a:
            self._key = a["data-key"]
            self.values[self._key] = ""
            self._lead = a["data-key"] == "unreachable"
            if self._lead:
                self.leads.append("")
        if tag == "tr" and "data-variation" in a:
            self._variation = a["data-variation"]
            self.variations[self._variation] = []
        if tag == "td" and self._variation is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("style", "title"):
            self._skip -= 1
        if tag in ("div", "p"):
            self._key, self._lead = None, False
        if tag == "td" and self._cell is not None:
            self.variations[self._variation].append("".join(self._cell).strip())
            self._cell = None
        if tag == "tr":
            self._variation = None

    def handle_data(self, data):
        if self._skip:
            return
        self.text.append(data)
        if self._key is not None:
            self.values[self._key] += data.strip()
            if self._lead:
                self.leads[-1] += data
        if self._cell is not None:
            self._cell.append(data)


def _read(page: str) -> _Page:
    parsed = _Page()
    parsed.feed(page)
    parsed.plain = re.sub(r"\s+", " ", " ".join(parsed.text))
    return parsed


def _shown(p: float, decimals: int = 0) -> str:
    """The memo's percentage, written out independently: whole percent (or ``decimals``),
    one decimal where that would read 0% or 100%, then <0.1% / >99.9%."""
    if p <= 0:
        return "0%"
    if p >= 1:
        return "100%"
    for d in sorted({decimals, max(decimals, 1)}):
        text = f"{100 * p:.{d}f}"
        if float(text) not in (0.0, 100.0):
            return text + "%"
    return "<0.1%" if p < 0.5 else ">99.9%"


@pytest.fixture(scope="module", params=CASE_STUDIES)
def case(request):
    plan = case_plan(request.param)
    page = plan_memo_html(plan, figures=False, date=DATE, versions=VERSIONS)
    return request.param, plan, page, _read(page)


def _at(plan, name):
    return float(plan.results[name].sel(n=plan.planned_n))


# ------------------------------------------------------------------------------------------
# every case study
# ------------------------------------------------------------------------------------------
def test_the_decision_box_comes_first_after_the_title(case):
    _, _, _, page = case
    assert page.order[:2] == ["h1", "decision"]


def test_the_decision_box_shows_the_plans_numbers(case):
    name, plan, _, page = case
    ds = plan.results
    values = page.values
    assurance, power = _at(plan, "assurance"), _at(plan, "power")
    assert values["assurance"] == _shown(assurance)
    assert values["power"] == _shown(power)
    assert values["ceiling"] == _shown(float(ds.ceiling))
    gap = round(100 * (power - assurance))
    assert values["gap"] in (f"{gap} points", "less than 1 point") if abs(gap) < 1 else \
        values["gap"] == f"{gap} points"
    if "prob_success_and_relevant" in ds:
        assert values["success_and_relevant"] == _shown(_at(plan, "prob_success_and_relevant"))
    if float(getattr(plan.design.rule, "margin", 0.0)) == 0:
        # share of successes with a treatment not truly better: 1 - P(success, better) / P(success)
        share = 1 - _at(plan, "prob_success_and_benefit") / assurance
        assert values["false_positives"] == _shown(share)
    n = plan.planned_n
    arms = (f"{int(ds.n_treatment.sel(n=n))} on treatment, "
            f"{int(ds.n_control.sel(n=n))} on control")
    assert f"Planned size: {n} patients ({arms}), {plan.planned_reason}." in page.plain


def test_no_code_or_error_text_reaches_a_reader(case):
    _, _, _, page = case
    text = page.plain
    for banned in ("normal(", "Normal(", "Mixture(", "mixture(", "point_mass(", "scipy(",
                   "Traceback", "Error:", "beta_rates(", "scaled_inv_chi_square("):
        assert banned not in text, banned
    assert not re.search(r"\b(nan|inf)\b", text)


def test_the_sensitivity_table_matches_the_plan(case):
    _, plan, _, page = case
    ds = plan.results
    elicited = page.variations["elicited"]
    planned = int(ds.sensitivity_planned_n)
    assert planned == plan.planned_n
    # the elicited prior's row is the plan's assurance at the planned size
    assert elicited[1] == _shown(_at(plan, "assurance"), 1)
    assert elicited[2] == _shown(float(ds.ceiling), 1)
    # the point prior's row is classical power (all belief on the assumed effect)
    point = page.variations["point_prior"]
    assert point[1] == _shown(_at(plan, "power"), 1)


def test_sections_come_in_the_promised_order(case):
    _, _, _, page = case
    promised = ["decision", "assumed", "figure", "candidates", "sensitivity", "zones",
                "precision", "type-one-error", "origin", "provenance", "cautions"]
    present = [s for s in page.order if s in promised]
    assert present == sorted(present, key=promised.index)
    assert {"decision", "assumed", "candidates", "sensitivity", "provenance",
            "cautions"} <= set(present)


def test_every_memo_keeps_the_cautions(case):
    _, _, raw, page = case
    for sentence in DEFAULT_CAUTIONS:
        assert sentence in page.plain
    for words in ("qualified statistician", "regulatory guidance", "ethics committee"):
        assert words in page.plain


def test_provenance_names_the_file_its_hash_the_call_and_the_seed(case):
    name, plan, _, page = case
    content = (ROOT / "case_studies" / name / "design.toml").read_bytes()
    assert hashlib.sha256(content).hexdigest() in page.plain  # hashlib, not the package
    assert f"case_studies/{name}/design.toml" in page.plain.replace("\\", "/")
    assert f"tests: case study {name}" in page.plain
    assert plan.created in page.plain
    assert f"Seed {plan.settings.seed}" in page.plain
    assert "assurance test-build" in page.plain


# ------------------------------------------------------------------------------------------
# particular case studies
# ------------------------------------------------------------------------------------------
def _case_page(name, **kwargs):
    plan = case_plan(name)
    kwargs.setdefault("figures", False)
    page = plan_memo_html(plan, date=DATE, versions=VERSIONS, **kwargs)
    return plan, _read(page)


def test_phase2_to_phase3_reconciles_go_with_the_probability_of_success():
    plan, page = _case_page("phase2_to_phase3")
    go, success = _at(plan, "prob_go"), _at(plan, "assurance")
    assert abs(go - success) > 0.1  # the two differ in this case study
    sentence = (f"At {plan.planned_n} patients the chance of a go decision is {_shown(go)}, "
                f"lower than the {_shown(success)} probability of success: they are different "
                "rules on different quantities.")
    assert sentence in page.plain
    assert "minimum acceptable" in page.plain and "target effect" in page.plain
    # the source cited in assurance/rules/zones.py
    assert "Lalonde et al. (2007" in ZONES_SOURCE and ZONES_SOURCE in page.plain


def test_event_driven_shows_the_expected_events_and_the_study_duration():
    plan, page = _case_page("event_driven")
    events = float(plan.results.expected_events.sel(n=plan.planned_n))
    assert page.values["events"] == f"{events:,.0f}"
    assert "study duration 42 months" in page.plain  # 24 months accrual + 18 follow-up
    assert "hazard ratio 0.75" in page.plain
    assert "log-normal on the hazard ratio: median 0.80, 95% between 0.60 and 1.07" in \
        page.plain


def test_relapse_counts_shows_patient_time():
    plan, page = _case_page("relapse_counts")
    time = float(plan.results.patient_time.sel(n=plan.planned_n))
    assert page.values["patient_time"] == f"{time:,.0f}"


def test_weekly_injection_names_the_margin_and_does_not_call_non_inferiority_false():
    plan, page = _case_page("weekly_injection")
    assert "Non-inferiority margin" in page.plain
    assert "false_positives" not in page.values
    assert "non-inferiority, not superiority" in page.plain


def test_an_exact_binary_test_above_its_level_is_flagged_with_its_range_and_worst_value():
    plan, page = _case_page("response_rate")
    ds = plan.results
    t1 = ds.type_one_error.values
    over = t1 > 0.025 * (1 + 1e-6)
    assert over.any()
    worst = int(np.argmax(t1))
    assert f"the worst is {100 * t1[worst]:.2f}% at {int(ds.n[worst])} patients" in page.plain
    assert f"between {int(ds.n.values[over].min())} and {int(ds.n.values[over].max())}" in \
        page.plain
    assert "saw-tooth" in page.plain


def test_a_continuous_test_at_its_level_is_not_flagged():
    _, page = _case_page("knee_pain")
    assert "exceeds the nominal" not in page.plain


def test_precision_comes_after_the_main_figure_and_hides_exception_text():
    plan = case_plan("knee_pain")
    broken = replace(plan, precision=(*plan.precision,
                                      "The 'criterion' parameter of solve_precision_n: WOC "
                                      "is not available by simulation. Got 'WOC' instead."))
    page = _read(plan_memo_html(broken, figures=True, date=DATE, versions=VERSIONS))
    assert page.order.index("figure") < page.order.index("precision")
    assert "The worst-case length (WOC) criterion cannot be computed" in page.plain
    assert "parameter of" not in page.plain and "Got 'WOC'" not in page.plain
    assert "treat the SD as known" in page.plain  # t analysis, known-SD widths


def test_a_plan_without_sensitivity_says_the_section_was_turned_off():
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0), title="No sensitivity")
    plan = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200], sensitivity=False)
    page = _read(plan_memo_html(plan, figures=False, date=DATE, versions=VERSIONS))
    assert "The sensitivity section was turned off for this plan." in page.plain


def test_an_unreachable_target_leads_the_decision_box_with_the_ceiling():
    # half the prior on no effect: the ceiling is P(effect > 0) + alpha * P(effect = 0)
    # = 0.5 * Phi(4 / 2) + 0.5 * 0.025 (scipy.stats.norm), far below the 80% target
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Mixture([asr.PointMass(0.0), asr.Normal(4.0, 2.0)], [0.5, 0.5]),
                             title="Unreachable")
    ceiling = 0.5 * stats.norm.cdf(2.0) + 0.5 * 0.025
    plan = asr.plan(design, targets={"assurance": 0.8}, sizes=[100, 200, 400],
                    sensitivity=False)
    raw = plan_memo_html(plan, figures=False, date=DATE, versions=VERSIONS)
    page = _read(raw)
    assert page.leads and page.leads[0].strip() == (
        f"No size reaches 80% assurance: even a very large trial succeeds with probability "
        f"at most {_shown(ceiling)}.")
    box = raw[raw.index('id="decision"'):]
    assert box.index('data-key="unreachable"') < box.index('data-key="assurance"')


def test_the_title_is_escaped():
    title = '<script>alert("x")</script> R&D $1.2M $\\frac{$'
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0), title=title)
    plan = asr.plan(design, targets={"assurance": 0.6}, sizes=[100, 200], sensitivity=False)
    raw = plan_memo_html(plan, figures=False, date=DATE, versions=VERSIONS)
    assert "<script" not in raw.lower()
    assert "&lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt; R&amp;D $1.2M $\\frac{$" in raw
    assert raw.count("&lt;script&gt;alert") >= 2  # the window title, the heading, the record
    assert _read(raw).plain.count(title) == 1  # the heading reads as written


# ------------------------------------------------------------------------------------------
# wording: plain-words priors against scipy.stats quantiles
# ------------------------------------------------------------------------------------------
def _survival():
    return asr.SurvivalEndpoint(control_median=14.0, accrual_time=24.0, follow_up_time=18.0,
                                assumed_hazard_ratio=0.75, better="lower")


def test_log_normal_prior_on_the_hazard_ratio_against_scipy():
    mu, sd = math.log(0.8), 0.15
    lo, hi = stats.lognorm(s=sd, scale=0.8).ppf([0.025, 0.975])  # scipy.stats.lognorm
    assert lo == pytest.approx(math.exp(mu - 1.959964 * sd), rel=1e-6)
    text = wd.prior_text(asr.Normal(mu, sd), _survival())
    assert text == (f"log-normal on the hazard ratio: median 0.80, 95% between {lo:.2f} and "
                    f"{hi:.2f}")


def test_normal_prior_with_a_unit_against_scipy():
    ep = asr.ContinuousEndpoint(sigma=60.0, unit="metres")
    lo, hi = stats.norm(17.6, 12.7279).ppf([0.025, 0.975])  # scipy.stats.norm
    assert wd.prior_text(asr.Normal(17.6, 12.7279), ep) == (
        f"normal: mean 17.6 metres, 95% between {lo:.1f} and {hi:.1f}")


def test_a_mixture_is_written_as_weighted_parts_with_the_vague_part_named():
    ep = asr.ContinuousEndpoint(sigma=60.0, unit="metres")
    prior = asr.Mixture([asr.Normal(17.6, 12.7279), asr.Normal(17.6, 40.0)], [0.8, 0.2])
    lo, hi = stats.norm(17.6, 40.0).ppf([0.025, 0.975])  # scipy.stats.norm
    text = wd.prior_text(prior, ep)
    first, second = text.split("; ")
    assert first.startswith("80%: normal: mean 17.6 metres")
    assert second == f"20%: vague normal: mean 17.6 metres, 95% between {lo:.1f} and {hi:.0f}"


def test_a_point_mass_on_a_ratio_is_no_effect():
    prior = asr.Mixture([asr.PointMass(0.0), asr.Normal(math.log(0.8), 0.15)], [0.3, 0.7])
    assert wd.prior_text(prior, _survival()).startswith(
        "30%: no effect (hazard ratio exactly 1); 70%: log-normal on the hazard ratio")


def test_beta_rates_against_scipy():
    ep = asr.BinaryEndpoint(0.3)
    text = wd.prior_text(asr.BetaRates(control=(36, 84), treatment=(9, 11)), ep)
    lo, hi = stats.beta(36, 84).ppf([0.025, 0.975])  # scipy.stats.beta
    assert f"mean 30.0%, 95% between {100 * lo:.1f}% and {100 * hi:.1f}%" in text
    assert "percentage points" in text


def test_sd_prior_against_scipy_chi_square():
    # sigma^2 = df s^2 / X with X ~ chi2(df): the q quantile of sigma is
    # s sqrt(df / chi2.ppf(1 - q, df)) (scipy.stats.chi2)
    df, s = 40, 12.0
    q = {p: s * math.sqrt(df / stats.chi2.ppf(1 - p, df)) for p in (0.025, 0.5, 0.975)}
    text = wd.sd_prior_text(asr.ScaledInvChiSquare(df, s), "mmHg")
    assert text.endswith(f"median {q[0.5]:.1f} mmHg, 95% between {q[0.025]:.1f} and "
                         f"{q[0.975]:.1f}")


def test_effects_are_named_or_carry_their_unit():
    assert wd.effect_text(_survival(), 0.75) == "hazard ratio 0.75"
    assert wd.effect_text(asr.BinaryEndpoint(0.3), 0.15) == "15 percentage points"
    assert wd.effect_text(asr.ContinuousEndpoint(sigma=1.0, unit="mmHg"), -3.0) == "-3 mmHg"
    assert wd.effect_text(asr.ContinuousEndpoint(sigma=1.0), 22.0) == "22"


def test_numbers_are_rounded_for_reading():
    # common practice: 3 significant figures, whole numbers kept whole
    assert [wd.number(x) for x in (0.0144123, 17.6, 1234.4, -0.5)] == \
        ["0.0144", "17.6", "1,234", "-0.5"]
    assert wd.points(0.2963) == "30 percentage points"
    assert wd.percent(0.996) == "99.6%" and wd.percent(0.004) == "0.4%"


@given(st.floats(min_value=1e-9, max_value=1 - 1e-9))
def test_a_percentage_never_reads_as_certain_or_impossible(p):
    text = wd.percent(p)
    assert text not in ("0%", "100%")
    if text[0] not in "<>":
        assert abs(float(text.rstrip("%")) - 100 * p) <= 0.5 + 1e-9
