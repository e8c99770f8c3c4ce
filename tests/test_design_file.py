"""Design file reading: every documented example parses; every family builds the right prior."""

from __future__ import annotations

import math
import re
import textwrap
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

import assurance.design_file as design_file
import assurance.design_file.reader as design_reader
from assurance import priors
from assurance.design_file import parse_design, prior_from_table, read_design_file
from assurance.errors import DesignFileError

ROOT = Path(__file__).resolve().parents[1]


def _module_example() -> str:
    doc = design_reader.__doc__
    block = doc.split("A complete example::", 1)[1].split("Every unknown key", 1)[0]
    return textwrap.dedent(block)


def _readme_example() -> str:
    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```toml\n(.*?)```", text, flags=re.S)
    assert blocks, "README has a TOML example"
    return blocks[0]


@pytest.mark.parametrize("text_source", [_module_example, _readme_example])
def test_documented_examples_parse(text_source):
    spec = parse_design(tomllib.loads(text_source()), source="example")
    assert spec.design.endpoint.sigma == 10.0
    assert spec.design.relevant_effect == 3.0


@pytest.mark.parametrize("path", sorted((ROOT / "case_studies").glob("*/design.toml")))
def test_case_studies_parse(path):
    spec = read_design_file(path)
    assert "nvented" in spec.design.title  # case studies say they are invented


@pytest.mark.parametrize(
    ("table", "expected"),
    [
        ({"family": "normal", "mean": 1.0, "sd": 2.0}, stats.norm(1.0, 2.0)),
        ({"family": "student_t", "df": 4, "location": 1.0, "scale": 2.0}, stats.t(4, 1.0, 2.0)),
        ({"family": "uniform", "lower": -1.0, "upper": 3.0}, stats.uniform(-1.0, 4.0)),
        ({"family": "truncated_normal", "mean": 1.0, "sd": 2.0, "lower": 0.0},
         stats.truncnorm(-0.5, np.inf, 1.0, 2.0)),
        ({"family": "scipy", "name": "logistic", "parameters": {"loc": 1.0, "scale": 0.5}},
         stats.logistic(1.0, 0.5)),
    ],
)
def test_prior_tables_match_scipy(table, expected):
    prior = prior_from_table(table, "design_prior")
    x = np.linspace(-3, 5, 17)
    # reference: the scipy.stats distribution with the same parameters
    np.testing.assert_allclose(prior.cdf(x), expected.cdf(x), rtol=1e-12, atol=1e-15)


def test_mixture_table():
    prior = prior_from_table(
        {"family": "mixture", "parts": [
            {"weight": 0.25, "family": "point_mass", "value": 0.0},
            {"weight": 0.75, "family": "normal", "mean": 2.0, "sd": 1.0},
        ]},
        "design_prior",
    )
    assert isinstance(prior, priors.Mixture)
    # P(X > 0) = 0.75 * P(N(2,1) > 0); scipy.stats.norm as the reference
    assert prior.prob_above(0.0) == pytest.approx(0.75 * stats.norm(2, 1).sf(0), rel=1e-12)


@pytest.mark.parametrize(
    ("table", "words"),
    [
        ({"family": "normal", "mean": 1.0}, ["'design_prior.sd' is required"]),
        ({"family": "normal", "mean": 1.0, "sd": 2.0, "sdd": 1}, ["'sdd'", "Did you mean"]),
        ({"family": "normal", "mean": "one", "sd": 2.0}, ["design_prior.mean", "'one'"]),
        ({"family": "scipy", "name": "poisson", "parameters": {"mu": 1}}, ["continuous"]),
        ({"family": "scipy", "name": "gamma", "parameters": {"b": 1}},
         ["'design_prior.parameters.b' is not a parameter", "'design_prior.parameters.a' "
          "is required", "takes a, loc, scale"]),
        ({"family": "mixture", "parts": []}, ["'design_prior.parts'", "at least 1"]),
        ({"mean": 1.0}, ["family", "required"]),
    ],
)
def test_bad_prior_tables(table, words):
    with pytest.raises(DesignFileError) as info:
        prior_from_table(table, "design_prior")
    for word in words:
        assert word in str(info.value)


def test_sizes_forms():
    base = tomllib.loads(_module_example())
    spec = parse_design(base)
    np.testing.assert_array_equal(spec.sizes, np.arange(20, 601, 20))
    base["sizes"] = {"list": [30, 10, 20]}
    np.testing.assert_array_equal(parse_design(base).sizes, [30, 10, 20])
    base["sizes"] = {"list": [30], "from": 3}
    with pytest.raises(DesignFileError, match="either 'list'"):
        parse_design(base)
    base["sizes"] = {"from": 10, "to": 10**7, "step": 1}
    with pytest.raises(DesignFileError, match="at most 5000"):
        parse_design(base)


def test_missing_tables():
    with pytest.raises(DesignFileError, match=r"\[design_prior\] table is missing"):
        parse_design({"endpoint": {"sd": 1.0}})
    with pytest.raises(DesignFileError, match="endpoint.sd"):
        parse_design({"endpoint": {}, "design_prior": {"family": "point_mass", "value": 1.0}})


def test_conditional_target_needs_relevant_effect():
    raw = tomllib.loads(_module_example())
    del raw["effect"]["relevant"]
    with pytest.raises(DesignFileError, match="effect.relevant"):
        parse_design(raw)


# ---- priors built from evidence in design files -----------------------------------------
def test_elicited_prior_table_matches_the_exact_normal():
    # two quantiles determine a normal exactly (common practice): median 2, 90th centile 5
    prior, fit = design_file.prior_with_origin(
        {"family": "elicited", "fit": "normal", "quantiles": [[2.0, 0.5], [5.0, 0.9]]},
        "design_prior")
    assert prior.mean() == pytest.approx(2.0, abs=1e-9)
    assert prior.sd() == pytest.approx(3.0 / stats.norm.ppf(0.9), rel=1e-9)
    assert "elicited" in fit.report()


def test_earlier_trial_prior_table_applies_the_discounts():
    # shrink the estimate, divide its information by the power weight, add a vague part
    # (Kirby et al. 2012; Ibrahim & Chen 2000; Schmidli et al. 2014): computed directly here
    prior, origin = design_file.prior_with_origin(
        {"family": "earlier_trial", "estimate": 22.0, "se": 9.0, "shrinkage": 0.8,
         "power_weight": 0.5, "robust_weight": 0.8, "vague_sd": 40.0}, "design_prior")
    assert isinstance(prior, priors.Mixture)
    informative = [c for c in prior.components if c.sigma < 20][0]
    assert informative.mu == pytest.approx(17.6, abs=1e-12)
    assert informative.sigma == pytest.approx(9.0 / math.sqrt(0.5), rel=1e-12)
    assert prior.weights == pytest.approx([0.8, 0.2])
    assert "earlier trial" in origin.report() and "shrunk by 0.8" in origin.report()
    assert origin.shrinkage == 0.8 and origin.prior().mean() == pytest.approx(prior.mean())


def test_earlier_trial_ratio_form_is_on_the_log_scale():
    prior, _ = design_file.prior_with_origin(
        {"family": "earlier_trial", "ratio": 0.75, "log_se": 0.15}, "design_prior", ratio=True)
    assert prior.mean() == pytest.approx(math.log(0.75), abs=1e-12)
    with pytest.raises(DesignFileError, match="'lognormal'"):
        design_file.prior_with_origin({"family": "elicited", "fit": "normal",
                                       "quantiles": [[0.8, 0.5], [1.0, 0.9]]},
                                      "design_prior", ratio=True)


def test_meta_analysis_prior_table_uses_the_between_study_variance():
    # eight schools (Rubin 1981; /work/shared/references.md): DerSimonian-Laird tau^2 = 0,
    # so the predictive prior is the fixed-effect estimate 7.69 with SE 4.07 (printed to 2
    # decimals; allow 0.01)
    y = [28.0, 8.0, -3.0, 7.0, -1.0, 1.0, 18.0, 12.0]
    s = [15.0, 10.0, 16.0, 11.0, 9.0, 11.0, 10.0, 18.0]
    prior, result = design_file.prior_with_origin(
        {"family": "meta_analysis", "estimates": y, "ses": s, "method": "dersimonian_laird"},
        "design_prior")
    assert prior.mean() == pytest.approx(7.69, abs=0.01)
    assert prior.sd() == pytest.approx(4.07, abs=0.01)
    assert result.tau == pytest.approx(0.0, abs=1e-12)


def test_phase2_case_study_writes_the_origin_into_the_memo(tmp_path):
    from assurance.cli import main

    out = tmp_path / "plan"
    assert main(["plan", str(ROOT / "case_studies" / "phase2_to_phase3" / "design.toml"),
                 "--out", str(out), "--quiet"]) == 0
    memo = (out / "memo.html").read_text()
    assert "Where the design prior comes from" in memo
    assert "Go, consider or stop" in memo


def test_elicited_design_writes_the_fit_figure(tmp_path):
    from assurance.cli import main

    text = _module_example().replace(
        'family = "normal"\nmean = 4.0\nsd = 2.5',
        'family = "elicited"\nfit = "normal"\nquantiles = [[4.0, 0.5], [7.0, 0.9]]')
    assert "elicited" in text
    path = tmp_path / "d.toml"
    path.write_text(text)
    out = tmp_path / "plan"
    assert main(["plan", str(path), "--out", str(out), "--quiet"]) == 0
    assert (out / "figures" / "prior_fit.png").stat().st_size > 0
    assert "elicited judgements" in (out / "memo.html").read_text()


def test_a_byte_order_mark_is_read_and_kept_in_the_copy(tmp_path):
    text = 'title = "With a mark"\n[endpoint]\nsd = 10\n[design_prior]\nfamily = "normal"\n' \
           'mean = 4\nsd = 2\n'
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode())
    spec = read_design_file(path)
    assert spec.design.title == "With a mark"
    assert spec.content == b"\xef\xbb\xbf" + text.encode()  # the copy is byte for byte


def test_a_title_taken_from_the_file_name_is_made_safe(tmp_path):
    text = '[endpoint]\nsd = 10\n[design_prior]\nfamily = "normal"\nmean = 4\nsd = 2\n'
    path = tmp_path / ("x" * 240 + ".toml")
    path.write_text(text)
    assert read_design_file(path).design.title == "x" * 200
    path = tmp_path / "tab\there\x07.toml"
    path.write_text(text)
    assert read_design_file(path).design.title == "tab\\there\\x07"


@pytest.mark.parametrize(("parameters", "words"), [
    ({"a": 2.0, "scale": -0.5}, ["'design_prior.parameters.scale' must be a finite number > 0",
                                 "Got -0.5"]),
    ({"a": 2.0, "sclae": 0.5}, ["'design_prior.parameters.sclae' is not a parameter",
                                "Did you mean 'scale'?", "takes a, loc, scale"]),
    ({"a": 2.0, "loc": 1e308, "scale": 1e308}, ["'design_prior.parameters' of scipy.stats.gamma",
                                                "quantiles"]),
])
def test_scipy_prior_tables_name_the_parameter(parameters, words):
    with pytest.raises(DesignFileError) as info:
        prior_from_table({"family": "scipy", "name": "gamma", "parameters": parameters},
                         "design_prior")
    for word in words:
        assert word in str(info.value), (word, str(info.value))
