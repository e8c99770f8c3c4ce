"""Design file reading: every documented example parses; every family builds the right prior."""

from __future__ import annotations

import re
import textwrap
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

import assurance.design_file as design_file
from assurance import priors
from assurance.design_file import parse_design, prior_from_table, read_design_file
from assurance.errors import DesignFileError

ROOT = Path(__file__).resolve().parents[1]


def _module_example() -> str:
    doc = design_file.__doc__
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
        ({"family": "normal", "mean": 1.0}, ["needs", "'sd'"]),
        ({"family": "normal", "mean": 1.0, "sd": 2.0, "sdd": 1}, ["'sdd'", "Did you mean"]),
        ({"family": "normal", "mean": "one", "sd": 2.0}, ["design_prior.mean", "'one'"]),
        ({"family": "scipy", "name": "poisson", "parameters": {"mu": 1}}, ["continuous"]),
        ({"family": "scipy", "name": "gamma", "parameters": {"b": 1}}, ["do not fit"]),
        ({"family": "mixture", "parts": []}, ["non-empty"]),
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
