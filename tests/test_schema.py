"""The design-file schema: one source for the reader, the messages, the record and the docs.

Checks that the generated reference page and JSON Schema are current; that the JSON Schema
(checked with the ``jsonschema`` reference validator from the package registry) accepts every
case study and rejects typical mistakes; that the schema's defaults are the Python classes'
defaults; that every problem of a file is reported at once, in the file's own words; that
``check`` and ``plan`` accept and refuse exactly the same files; and that the normalised
``design.toml`` reads back to the same record.
"""

from __future__ import annotations

import dataclasses
import inspect
import json
import re
import tomllib
from pathlib import Path

import jsonschema
import pytest

from assurance.cli import main
from assurance.design_file import parse_design, read_design_file
from assurance.design_file.record import design_toml
from assurance.design_file.reference import (
    PAGE_FILE,
    SCHEMA_FILE,
    json_schema,
    reference_markdown,
)
from assurance.design_file.schema import (
    ENDPOINT_TABLES,
    PRIOR_TABLES,
    RULE_TABLES,
    DesignFileModel,
    MonteCarloTable,
    PrecisionTable,
    ZonesTable,
)
from assurance.errors import DesignFileError

ROOT = Path(__file__).resolve().parents[1]
CASES = sorted((ROOT / "case_studies").glob("*/design.toml"))

GOOD = {
    "title": "Schema test design (invented)",
    "endpoint": {"type": "continuous", "sd": 10.0, "analysis": "z"},
    "success": {"alpha": 0.025},
    "effect": {"assumed": 4.0, "relevant": 3.0},
    "design_prior": {"family": "normal", "mean": 4.0, "sd": 2.0},
    "sizes": {"list": [50, 100, 200]},
    "targets": {"assurance": 0.6},
}


def _with(**changes):
    raw = json.loads(json.dumps(GOOD))
    for dotted, value in changes.items():
        table, _, key = dotted.partition("__")
        if key:
            raw.setdefault(table, {})[key] = value
        else:
            raw[table] = value
    return raw


# ---- generated documents --------------------------------------------------------------------
def test_reference_page_is_generated_from_the_schema():
    page = (ROOT / "docs" / PAGE_FILE).read_text(encoding="utf-8")
    assert page == reference_markdown(), (
        "docs/design-file.md differs from the schema: run `make reference`")


def test_json_schema_file_is_generated_from_the_schema():
    shipped = json.loads((ROOT / "docs" / SCHEMA_FILE).read_text(encoding="utf-8"))
    assert shipped == json_schema(), (
        "docs/design-file.schema.json differs from the schema: run `make reference`")


def test_reference_page_lists_every_key_and_every_choice():
    page = reference_markdown()
    for model in [*ENDPOINT_TABLES.values(), *PRIOR_TABLES.values(), *RULE_TABLES.values(),
                  DesignFileModel, ZonesTable, PrecisionTable, MonteCarloTable]:
        for name, f in model.model_fields.items():
            assert f"`{f.alias or name}`" in page, (model.__name__, name)
    # the allowed values of a choice key, e.g. the ratio scales of a binary endpoint
    assert '"difference", "risk_ratio", "odds_ratio"' in page
    assert '"z", "unpooled_z", "chi_square", "fisher_exact", "exact_binomial"' in page


def test_every_key_has_one_sentence_of_help():
    for model in [*ENDPOINT_TABLES.values(), *PRIOR_TABLES.values(), *RULE_TABLES.values(),
                  DesignFileModel, ZonesTable, PrecisionTable, MonteCarloTable]:
        for name, f in model.model_fields.items():
            assert f.description and f.description.strip(), (model.__name__, name)


# ---- the JSON Schema, checked by the reference validator -----------------------------------
@pytest.mark.parametrize("path", CASES, ids=lambda p: p.parent.name)
def test_json_schema_accepts_every_case_study(path):
    # jsonschema (PyPI) is an independent implementation of JSON Schema 2020-12
    validator = jsonschema.Draft202012Validator(json_schema())
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    assert not list(validator.iter_errors(raw))


@pytest.mark.parametrize("raw", [
    _with(endpoint__alocation=2.0),                      # misspelt key
    _with(endpoint__sd="10"),                            # number as text
    _with(endpoint__sd=-1.0),                            # out of range
    _with(design_prior={"family": "normel", "mean": 1.0, "sd": 1.0}),
    _with(success__sided="both"),                        # not an allowed choice
    _with(targets__power=1.5),
    {k: v for k, v in GOOD.items() if k != "design_prior"},   # required table missing
    _with(title="Trial \u001b[31m red"),                     # a control character
    _with(title="x" * 201),                                  # too long
    _with(design_prior={"family": "scipy", "name": "levy_stable",     # slow functions
                        "parameters": {"alpha": 1.5, "beta": 0.0}}),
])
def test_json_schema_rejects_typical_mistakes(raw):
    validator = jsonschema.Draft202012Validator(json_schema())
    assert list(validator.iter_errors(raw))
    with pytest.raises(DesignFileError):  # and so does the reader
        parse_design(raw)


# ---- one source of defaults ---------------------------------------------------------------
def _python_defaults(cls):
    if dataclasses.is_dataclass(cls):
        return {f.name: f.default for f in dataclasses.fields(cls)
                if f.default is not dataclasses.MISSING}
    return {name: p.default for name, p in inspect.signature(cls).parameters.items()
            if p.default is not inspect.Parameter.empty}


@pytest.mark.parametrize(("table", "cls_path", "renamed"), [
    ("ContinuousTable", "assurance.endpoints.continuous:ContinuousEndpoint", {}),
    ("BinaryTable", "assurance.endpoints.binary:BinaryEndpoint", {}),
    ("TimeToEventTable", "assurance.endpoints.survival:SurvivalEndpoint", {}),
    ("CountsTable", "assurance.endpoints.counts:CountEndpoint", {}),
    ("SignificanceTable", "assurance.rules:Significance", {}),
    ("PosteriorProbabilityTable", "assurance.rules.posterior:PosteriorProbability", {}),
    ("ZonesTable", "assurance.rules.zones:GoConsiderStop", {}),
    ("PrecisionTable", "assurance.precision.for_design:PrecisionPlan", {}),
    ("StudentTPrior", "assurance.priors:StudentT", {"location": "loc"}),
])
def test_schema_defaults_are_the_python_defaults(table, cls_path, renamed):
    import importlib

    from assurance.design_file import schema

    module, name = cls_path.split(":")
    cls = getattr(importlib.import_module(module), name)
    python = _python_defaults(cls)
    model = getattr(schema, table)
    compared = 0
    for key, f in model.model_fields.items():
        param = renamed.get(key, key)
        if param not in python or f.is_required() or f.default is None:
            continue
        given = python[param]
        expected = list(given) if isinstance(given, tuple) else given
        assert f.default == expected, (table, key, f.default, given)
        compared += 1
    assert compared >= 1


def test_monte_carlo_defaults_are_the_plan_defaults():
    from assurance.planner import plan

    params = inspect.signature(plan).parameters
    assert MonteCarloTable().draws == params["draws"].default
    assert MonteCarloTable().seed == params["seed"].default


# ---- every problem at once, in the file's words ------------------------------------------
def test_five_mistakes_give_five_messages(tmp_path, capsys):
    text = """\
title = "Five mistakes (invented)"
[endpoint]
type = "continuous"
sd = -4.0                 # 1: not > 0
alocation = 2.0           # 2: misspelt key
[success]
alpha = "0.05"            # 3: a number written as text
[design_prior]
family = "normel"         # 4: unknown family
mean = 1.0
sd = 1.0
[targets]
power = 1.5               # 5: not a probability
"""
    path = tmp_path / "five.toml"
    path.write_text(text)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "5 problems" in err
    for words in ["'endpoint.sd' must be a number > 0. Got -4.0.",
                  "unknown key 'alocation' in [endpoint]. Did you mean 'allocation'?",
                  "'success.alpha' must be a number. Got '0.05'.",
                  "'design_prior.family' must be one of", "Did you mean 'normal'?",
                  "'targets.power' must be a number > 0 and < 1. Got 1.5."]:
        assert words in err
    assert "Traceback" not in err


def test_problems_in_mixture_parts_name_the_part():
    raw = _with(design_prior={"family": "mixture", "parts": [
        {"weight": 0.5, "family": "point_mass", "value": 0.0},
        {"weight": -0.5, "family": "normal", "mean": 1.0, "sdd": 2.0}]})
    with pytest.raises(DesignFileError) as info:
        parse_design(raw, source="f.toml")
    text = str(info.value)
    assert "'design_prior.parts[1].weight' must be a number > 0" in text
    assert "unknown key 'sdd' in [design_prior.parts[1]]. Did you mean 'sd'?" in text
    assert "'design_prior.parts[1].sd' is required" in text
    assert len(info.value.problems) == 3


def test_domain_messages_speak_of_file_keys():
    raw = _with(effect__relevant=40.0)  # no prior mass beyond the relevant effect
    with pytest.raises(DesignFileError, match="'effect.relevant' must leave a prior"):
        parse_design(raw)
    raw = _with(endpoint={"type": "time_to_event", "accrual_time": 12.0,
                          "control_median": 10.0},
                design_prior={"family": "log_normal", "median": 0.8, "log_sd": 0.2},
                effect={"assumed": 0.8, "relevant": -1.0})
    with pytest.raises(DesignFileError) as info:
        parse_design(raw)
    assert "'effect.relevant' must be a number > 0" in str(info.value)
    assert "hazard ratios, no effect = 1" in str(info.value)  # the scale is said
    assert "TrialDesign" not in str(info.value) and "Endpoint" not in str(info.value)


def test_a_log_normal_effect_prior_needs_a_ratio_endpoint():
    raw = _with(design_prior={"family": "log_normal", "median": 0.8, "log_sd": 0.2})
    with pytest.raises(DesignFileError, match="'design_prior.family' = 'log_normal' is for "
                                              "ratio endpoints"):
        parse_design(raw)


@pytest.mark.parametrize(("endpoint", "better", "effect", "margin", "warned"), [
    ({"type": "continuous", "sd": 10.0}, "higher", -2.0, 0.0, True),
    ({"type": "continuous", "sd": 10.0}, "lower", -2.0, 0.0, False),
    ({"type": "continuous", "sd": 10.0}, "lower", 1.0, 3.0, False),  # within the margin
    ({"type": "continuous", "sd": 10.0}, "lower", 4.0, 3.0, True),   # beyond it
    ({"type": "time_to_event", "accrual_time": 12.0, "control_median": 10.0}, "lower",
     1.2, 0.0, True),
    ({"type": "time_to_event", "accrual_time": 12.0, "control_median": 10.0}, "lower",
     0.8, 0.0, False),
])
def test_harmful_side_effects_are_noted(endpoint, better, effect, margin, warned):
    ratio = endpoint["type"] != "continuous"
    prior = ({"family": "log_normal", "median": 0.8, "log_sd": 0.3} if ratio
             else {"family": "normal", "mean": 0.0, "sd": 3.0})
    raw = {"endpoint": {**endpoint, "better": better}, "design_prior": prior,
           "effect": {"assumed": effect}, "success": {"margin": margin}}
    notes = parse_design(raw).notes
    assert bool(notes) == warned, notes
    if warned:
        assert "'effect.assumed'" in notes[0] and "harmful side" in notes[0]


def test_check_prints_the_notes(tmp_path, capsys):
    path = tmp_path / "harm.toml"
    path.write_text('[endpoint]\nsd = 10.0\n[effect]\nassumed = -3.0\n'
                    '[design_prior]\nfamily = "normal"\nmean = 1.0\nsd = 2.0\n')
    assert main(["check", str(path)]) == 0
    captured = capsys.readouterr()
    assert "harmful side" in captured.err and "ok" in captured.out


# ---- check and plan refuse the same files --------------------------------------------------
CATALOGUE = {
    "unknown key": _with(endpoint__sdd=1.0),
    "wrong type": _with(endpoint__allocation="1:1"),
    "bad choice": _with(endpoint__analysis="wilcoxon"),
    "no prior family": _with(design_prior={"mean": 1.0, "sd": 1.0}),
    "sd prior on binary": _with(endpoint={"type": "binary", "control_rate": 0.3},
                                effect={"assumed": 0.1},
                                design_prior={"family": "normal", "mean": 0.1, "sd": 0.05},
                                sd_prior={"family": "scaled_inv_chi_square", "df": 10,
                                          "scale": 1.0}),
    "size below the smallest": _with(sizes={"list": [1, 100]}),
    "size above the largest": _with(sizes={"list": [100, 10**16]}),
    "too few draws": _with(monte_carlo={"draws": 10}),
    "conditional target without relevant": _with(
        effect={"assumed": 4.0}, targets={"conditional_assurance": 0.8}),
    "zones in the wrong direction": _with(zones={"min_acceptable": 4.0, "target": 2.0}),
    "posterior rule with a minimum estimate on a binary endpoint": _with(
        endpoint={"type": "binary", "control_rate": 0.3}, effect={"assumed": 0.1},
        design_prior={"family": "beta_rates", "control": [30, 70], "treatment": [40, 60]},
        success={"rule": "posterior_probability", "min_estimate": 0.05}),
    "precision for a binary design with an effect prior": _with(
        endpoint={"type": "binary", "control_rate": 0.3}, effect={"assumed": 0.1},
        design_prior={"family": "normal", "mean": 0.1, "sd": 0.05},
        precision={"length": 0.2}),
    "precision with a t analysis prior": _with(
        analysis_prior={"family": "student_t", "df": 3.0}, precision={"length": 4.0},
        success={"rule": "posterior_probability"}),
    "mixture beta analysis prior": _with(
        endpoint={"type": "binary", "control_rate": 0.3}, effect={"assumed": 0.1},
        design_prior={"family": "beta_rates", "control": [30, 70], "treatment": [40, 60]},
        analysis_prior={"family": "mixture", "parts": [
            {"weight": 0.5, "family": "normal", "mean": 0.0, "sd": 1.0},
            {"weight": 0.5, "family": "point_mass", "value": 0.0}]},
        success={"rule": "posterior_probability"}),
    "beta rates on a continuous endpoint": _with(
        design_prior={"family": "beta_rates", "control": [3, 7], "treatment": [4, 6]}),
    "hazard ratio of zero (the planning ratio comes from [effect])": _with(
        endpoint={"type": "time_to_event", "accrual_time": 12.0, "control_median": 10.0},
        design_prior={"family": "log_normal", "median": 0.8, "log_sd": 0.2},
        effect={"assumed": 0.0}),
    "relevant effect beyond the prior": _with(effect__relevant=50.0),
}


def _toml(raw: dict) -> str:
    import tomli_w

    return tomli_w.dumps(raw)


@pytest.mark.parametrize("name", sorted(CATALOGUE))
def test_check_and_plan_refuse_the_same_files(name, tmp_path, capsys):
    path = tmp_path / "design.toml"
    path.write_text(_toml(CATALOGUE[name]))
    assert main(["check", str(path)]) == 2
    from_check = capsys.readouterr().err
    out = tmp_path / "out"
    assert main(["plan", str(path), "--out", str(out), "--quiet"]) == 2
    from_plan = capsys.readouterr().err
    assert from_check == from_plan  # the same message, from the same checks
    assert "Traceback" not in from_check and not out.exists()
    for python_name in ("TrialDesign", "PrecisionPlan", "BinaryEndpoint", "BetaRates",
                        "Significance", "PosteriorProbability", "None", "sigma"):
        assert python_name not in from_check, python_name


def test_a_borrowed_planning_ratio_is_named_as_written():
    raw = CATALOGUE["hazard ratio of zero (the planning ratio comes from [effect])"]
    with pytest.raises(DesignFileError, match="'effect.assumed' must be a number > 0"):
        parse_design(raw)


def test_the_good_design_passes_both(tmp_path, capsys):
    path = tmp_path / "design.toml"
    path.write_text(_toml(GOOD))
    assert main(["check", str(path)]) == 0
    assert main(["plan", str(path), "--out", str(tmp_path / "out"), "--quiet"]) == 0


# ---- the normalised record --------------------------------------------------------------------
@pytest.mark.parametrize("path", CASES, ids=lambda p: p.parent.name)
def test_normalised_record_reads_back_to_itself(path):
    spec = read_design_file(path)
    text = design_toml(spec.record, source=str(path))
    again = parse_design(tomllib.loads(text), source="design.toml")
    assert again.record == spec.record
    assert again.design.describe() == spec.design.describe() if hasattr(
        spec.design, "describe") else True
    # every key the file gave is in the record with the same value
    given = tomllib.loads(path.read_text(encoding="utf-8"))
    for table, values in given.items():
        if isinstance(values, dict):
            for k, v in values.items():
                if not isinstance(v, dict | list):
                    assert spec.record[table][k] == v, (table, k)


def test_record_keeps_a_title_with_quotes_tabs_and_accents():
    # control characters are refused (tests/test_hostile_inputs.py); everything else a title
    # may hold survives the written record
    raw = _with(title="Trial\t\"quoted\" 'single' \\ back, Zürich – 試験 ☕")
    spec = parse_design(raw)
    again = parse_design(tomllib.loads(design_toml(spec.record)))
    assert again.design.title == raw["title"]


def test_record_fills_in_what_the_file_left_to_defaults():
    spec = parse_design({"endpoint": {"type": "time_to_event", "accrual_time": 12.0,
                                      "control_median": 10.0},
                         "effect": {"assumed": 0.75},
                         "design_prior": {"family": "log_normal", "median": 0.8,
                                          "log_sd": 0.2}}, source="trial.toml")
    assert spec.record["endpoint"]["assumed_hazard_ratio"] == 0.75
    assert spec.record["success"] == {"rule": "significance", "alpha": 0.025, "sided": "one",
                                      "margin": 0.0}
    assert spec.record["title"] == "trial"


# ---- text ---------------------------------------------------------------------------------
def test_the_schema_and_trial_design_refuse_the_same_title_characters():
    from assurance import ContinuousEndpoint, Normal, TrialDesign
    from assurance.design import MAX_TITLE as PYTHON_MAX
    from assurance.design_file.schema import MAX_TITLE as FILE_MAX
    from assurance.errors import AssuranceInputError

    assert FILE_MAX == PYTHON_MAX == 200
    design = (ContinuousEndpoint(10.0), Normal(4.0, 2.0))
    differ = []
    for code in [*range(0x00, 0x100), 0x2028, 0x202E, 0xFEFF]:
        title = f"Trial {chr(code)} one"
        try:
            parse_design(_with(title=title))
            file_ok = True
        except DesignFileError:
            file_ok = False
        try:
            TrialDesign(*design, title=title)
            python_ok = True
        except AssuranceInputError:
            python_ok = False
        if file_ok != python_ok:
            differ.append(hex(code))
    assert differ == []
    refused = [c for c in range(0x100) if c != 9 and (c < 0x20 or 0x7F <= c <= 0x9F)]
    for code in refused:  # C0 but tab, DEL, C1
        with pytest.raises(DesignFileError, match="without control characters"):
            parse_design(_with(title=f"a{chr(code)}b"))


def test_the_reference_page_lists_the_allowed_scipy_distributions():
    from assurance.priors.families import FAST_SCIPY_DISTRIBUTIONS

    page = reference_markdown()
    line = next(t for t in page.splitlines() if t.startswith("Allowed `name` values:"))
    listed = set(re.findall(r"`(\w+)`", line.split(":", 1)[1]))
    assert listed == FAST_SCIPY_DISTRIBUTIONS
    assert json_schema()["$defs"]["ScipyPrior"]["properties"]["name"]["enum"] == sorted(
        FAST_SCIPY_DISTRIBUTIONS)
