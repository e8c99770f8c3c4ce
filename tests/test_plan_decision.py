"""What a plan decides at: the planned size, units, provenance and the written tables.

The planned size is the one the memo's decision box reports: given in the design file
(``[sizes] planned``) or in Python (``plan(planned=...)``), else the smallest size reaching
the assurance target (then conditional assurance, then power), else the largest size
evaluated. The numbers at it are checked against the closed form for a normal prior and a
z test (O'Hagan, Stevens & Campbell 2005, eq. for assurance with known variance), computed
here with scipy.
"""

from __future__ import annotations

import csv
import datetime as dt
import math
from pathlib import Path

import pytest
from scipy import stats

import assurance as asr
from assurance.cli import main
from assurance.errors import AssuranceInputError, DesignFileError

ROOT = Path(__file__).resolve().parents[1]

SMALL = """title = "Invented: planned-size checks"
[endpoint]
type = "continuous"
sd = 10.0
analysis = "z"
unit = "mmHg"
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[targets]
assurance = 0.6
"""


def _closed_form_assurance(n_total: int, sigma: float, mean: float, sd: float,
                           alpha: float = 0.025) -> float:
    # O'Hagan, Stevens & Campbell (2005): assurance of a one-sided z test with a normal
    # prior N(mean, sd^2) on the effect is Phi((mean - z_{1-alpha} se) / sqrt(se^2 + sd^2)).
    se = sigma * math.sqrt(4.0 / n_total)
    return float(stats.norm.cdf((mean - stats.norm.isf(alpha) * se)
                                / math.sqrt(se**2 + sd**2)))


def _design(**kwargs) -> asr.TrialDesign:
    return asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z", **kwargs),
                           asr.Normal(4.0, 2.0), title="Invented: planned size")


# ------------------------------------------------------------------------------------------
# choosing the planned size
# ------------------------------------------------------------------------------------------
def test_planned_size_defaults_to_the_assurance_target_size():
    p = asr.plan(_design(), targets={"power": 0.9, "assurance": 0.6}, sizes=[100, 300],
                 sensitivity=False)
    answer = next(a for a in p.sample_sizes if a.quantity == "assurance")
    assert p.planned_n == answer.n_total
    assert "assurance target of 60%" in p.planned_reason
    assert p.planned_n in p.results.n.values


def test_a_given_planned_size_is_evaluated_and_matches_the_closed_form():
    p = asr.plan(_design(), targets={"assurance": 0.6}, sizes=[100, 300], planned=250,
                 sensitivity=False)
    assert p.planned_n == 250 and p.planned_reason == "as set by the planner"
    got = float(p.results.assurance.sel(n=250))
    assert got == pytest.approx(_closed_form_assurance(250, 10.0, 4.0, 2.0), abs=1e-12)


def test_unreachable_assurance_falls_back_to_the_power_target():
    # ceiling: P(effect > 0) = Phi(4 / 10) = 0.655 < 0.8, so the assurance target is out of
    # reach; the power target (at the assumed effect 4) is reachable.
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 10.0))
    p = asr.plan(design, targets={"assurance": 0.8, "power": 0.8}, sensitivity=False)
    assurance = next(a for a in p.sample_sizes if a.quantity == "assurance")
    power = next(a for a in p.sample_sizes if a.quantity == "power")
    assert not assurance.reached and power.reached
    assert p.planned_n == power.n_total and "power" in p.planned_reason


def test_no_target_means_the_largest_size():
    p = asr.plan(_design(), sizes=[100, 300], sensitivity=False)
    assert p.planned_n == 300 and "no target was set" in p.planned_reason


@pytest.mark.parametrize("bad", [0, -5, 2.5, "300", True, 10**16])
def test_planned_must_be_an_allowed_whole_number(bad):
    with pytest.raises(AssuranceInputError, match="'planned' parameter of plan"):
        asr.plan(_design(), sizes=[100], planned=bad, sensitivity=False)


def test_sensitivity_must_be_settings_or_a_boolean():
    with pytest.raises(AssuranceInputError, match="'sensitivity' parameter of plan"):
        asr.plan(_design(), sizes=[100], sensitivity="yes")


# ------------------------------------------------------------------------------------------
# the design file's keys
# ------------------------------------------------------------------------------------------
def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "trial.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_planned_alone_in_sizes_keeps_the_automatic_grid(tmp_path):
    path = _write(tmp_path, SMALL + "[sizes]\nplanned = 222\n[sensitivity]\nshow = false\n")
    p = asr.Plan.from_file(path)
    assert p.planned_n == 222 and p.settings.planned == 222
    assert p.results.sizes["n"] > 10  # the automatic grid, plus 222
    assert 222 in p.results.n.values
    assert p.design.endpoint.unit == "mmHg"
    assert p.sensitivity is None


def test_planned_below_the_smallest_size_is_refused_with_its_key(tmp_path):
    path = _write(tmp_path, SMALL + "[sizes]\nplanned = 1\n")
    with pytest.raises(DesignFileError, match=r"sizes\.planned"):
        asr.read_design(path)


@pytest.mark.parametrize("unit, words", [
    ('"m\\u001b[31m"', "control characters"),
    ('"' + "x" * 41 + '"', "40"),
    ("3", "text in quotes"),
])
def test_a_bad_unit_is_refused_with_its_key(tmp_path, unit, words):
    path = _write(tmp_path, SMALL.replace('unit = "mmHg"', f"unit = {unit}"))
    with pytest.raises(DesignFileError, match="endpoint.unit") as err:
        asr.read_design(path)
    assert words in str(err.value)


def test_units_are_labels_only():
    a = asr.evaluate(_design(), [100, 200])
    b = asr.evaluate(_design(unit="metres"), [100, 200])
    assert (a.assurance.values == b.assurance.values).all()
    with pytest.raises(AssuranceInputError, match="'unit' parameter of ContinuousEndpoint"):
        _design(unit="\x00")


def test_count_time_unit_is_checked():
    ep = asr.CountEndpoint(0.8, 1.0, time_unit="years")
    assert ep.to_dict()["time_unit"] == "years"
    with pytest.raises(AssuranceInputError, match="'time_unit' parameter of CountEndpoint"):
        asr.CountEndpoint(0.8, 1.0, time_unit="fortnights")


def test_sensitivity_keys_reach_the_settings(tmp_path):
    path = _write(tmp_path, SMALL + "[sensitivity]\ncentre_shift = 1.0\n"
                  "spread_factors = [0.5]\nmap_centres = 5\nmap_spreads = 4\n")
    spec = asr.read_design(path)
    assert spec.sensitivity.centre_shift == 1.0
    assert spec.sensitivity.spread_factors == (0.5,)
    assert (spec.sensitivity.map_centres, spec.sensitivity.map_spreads) == (5, 4)


@pytest.mark.parametrize("key, value", [("centre_shift", "0"), ("map_centres", "2"),
                                        ("spread_factors", "[-1.0]"), ("show", '"no"')])
def test_bad_sensitivity_keys_are_refused(tmp_path, key, value):
    path = _write(tmp_path, SMALL + f"[sensitivity]\n{key} = {value}\n")
    with pytest.raises(DesignFileError, match=f"sensitivity.{key}"):
        asr.read_design(path)


def test_design_record_reads_back_with_planned_and_sensitivity(tmp_path):
    path = _write(tmp_path, SMALL + "[sizes]\nlist = [100, 200]\nplanned = 150\n"
                  "[sensitivity]\nshow = false\n")
    p = asr.Plan.from_file(path)
    again = _write(tmp_path / "..", p.design_record())
    q = asr.Plan.from_file(again)
    assert q.planned_n == 150 and q.sensitivity is None
    assert (q.results.assurance.values == p.results.assurance.values).all()


# ------------------------------------------------------------------------------------------
# provenance and the written tables
# ------------------------------------------------------------------------------------------
def test_provenance_names_the_call_and_the_time():
    p = asr.plan(_design(), sizes=[100], sensitivity=False)
    assert p.made_by == "assurance.plan(...)"
    created = dt.datetime.fromisoformat(p.created)
    assert created.tzinfo is not None
    assert abs((dt.datetime.now(dt.UTC) - created).total_seconds()) < 600


def test_command_line_records_itself_and_writes_the_tables(tmp_path):
    design = _write(tmp_path, SMALL + "[zones]\nmin_acceptable = 2.0\ntarget = 5.0\n"
                    "[analysis_prior]\nfamily = \"normal\"\nmean = 0.0\nsd = 20.0\n"
                    "[sensitivity]\nmap_centres = 5\nmap_spreads = 4\n")
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    for name in ("sensitivity.csv", "sensitivity_map.csv", "zones_by_effect.csv"):
        assert (out / name).is_file(), name
    rows = list(csv.DictReader((out / "sensitivity.csv").open(encoding="utf-8")))
    elicited = next(r for r in rows if r["variation"] == "elicited")
    p = asr.Plan.from_file(design)
    assert float(elicited["assurance"]) == pytest.approx(
        float(p.results.assurance.sel(n=p.planned_n)), rel=1e-5)  # written to 6 digits
    grid = list(csv.DictReader((out / "sensitivity_map.csv").open(encoding="utf-8")))
    assert len(grid) == 5 * 4
    oc = list(csv.DictReader((out / "zones_by_effect.csv").open(encoding="utf-8")))
    for row in oc:  # go, consider and stop partition the outcomes
        assert float(row["go"]) + float(row["consider"]) + float(row["stop"]) == \
            pytest.approx(1.0, abs=1e-5)
    memo = (out / "memo.html").read_text(encoding="utf-8")
    assert "assurance plan" in memo
