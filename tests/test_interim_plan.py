"""InterimPlan: the interim file read, the output folder written, the memo in a browser.

The numbers themselves are checked in tests/test_interim.py (against formulas, scipy and
simulation); here: the file format and its errors, that the folder and memo carry exactly the
computed numbers (read back independently), the provenance, and the memo in headless
Chromium (skipped, with the reason, where it is not installed).
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import shutil
from pathlib import Path

import pytest
from _browser import NEEDS_BROWSER, check_reads_well, open_memo
from test_memo import _read, _shown

from assurance.errors import AssuranceInputError, DesignFileError
from assurance.interim_plan import InterimPlan, interim_look
from assurance.program.interim import InterimData, evaluate_interim
from assurance.report.interim_memo import interim_memo_html
from assurance.report.output_folder import MARKER, write_outputs

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "case_studies" / "programs" / "interim_look"
INTERIM = CASE / "interim.toml"

DESIGN = """title = "Test trial"
[endpoint]
sd = 10.0
analysis = "z"
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[sizes]
planned = 200
"""


@pytest.fixture(scope="module")
def case_plan():
    return InterimPlan.from_file(INTERIM)


def _files(tmp_path, interim: str, design: str = DESIGN) -> Path:
    (tmp_path / "trial.toml").write_text(design, encoding="utf-8")
    path = tmp_path / "look.toml"
    path.write_text(interim, encoding="utf-8")
    return path


# ------------------------------------------------------------------------------------------
# the case study and the file format
# ------------------------------------------------------------------------------------------
def test_case_study_reads_and_matches_the_python_route(case_plan):
    from assurance.design_file import read_design_file

    spec = read_design_file(CASE / "design.toml")
    # the interim data of the file, computed by hand: -2.1 - (-1.5), 4.2 sqrt(1/76 + 1/74)
    data = InterimData(-0.6, standard_error=4.2 * (1 / 76 + 1 / 74) ** 0.5)
    look = evaluate_interim(spec.design, data, planned_total=300, futility=0.1,
                            efficacy=0.99, prediction_prior="analysis")
    assert case_plan.look.predictive == pytest.approx(look.predictive, abs=1e-12)
    assert case_plan.look.conditional == pytest.approx(look.conditional, abs=1e-12)
    assert case_plan.look.fraction == pytest.approx((4 * (2 / 150) ** 0.5) ** 2
                                                    / data.standard_error**2)
    assert case_plan.input_paths == (INTERIM, CASE / "design.toml")


def test_relative_design_path_is_read_from_the_interim_files_folder(tmp_path, monkeypatch):
    path = _files(tmp_path, 'design = "trial.toml"\n[interim]\nestimate = 3.0\n'
                            "information_fraction = 0.5\n")
    monkeypatch.chdir(ROOT)  # not the interim file's folder
    plan = InterimPlan.from_file(path)
    assert plan.look.fraction == pytest.approx(0.5)
    assert plan.design_source.path == tmp_path / "trial.toml"
    assert plan.title == "Test trial: interim look"


@pytest.mark.parametrize("interim, match", [
    ('design = "trial.toml"\n[interim]\nestimat = 3.0\nstandard_error = 2.0\n',
     r"unknown key 'estimat' in \[interim\]\. Did you mean 'estimate'\?"),
    ('design = "missing.toml"\n[interim]\nestimate = 3.0\nstandard_error = 2.0\n',
     "'design' names 'missing.toml'"),
    ('[interim]\nestimate = 3.0\nstandard_error = 2.0\n', "'design' is required"),
    ('design = "trial.toml"\n[interim]\nestimate = 3.0\n', "match none of the forms"),
    ('design = "trial.toml"\n[interim]\nestimate = 0.8\nevents = 100\n',
     "belongs to a time_to_event endpoint"),
    ('design = "trial.toml"\n[interim]\nestimate = 3.0\nstandard_error = -2.0\n',
     r"'interim.standard_error' must be a number > 0"),
    ('design = "trial.toml"\n[interim]\nestimate = 3.0\nstandard_error = 2.0\n'
     '[boundaries]\nfutility = 0.5\nefficacy = 0.4\n', "must be below"),
    ('design = "trial.toml"\n[interim]\nestimate = 3.0\nstandard_error = 2.0\n'
     '[boundaries]\nprior = "desing"\n', "Did you mean 'design'"),
    ('design = "trial.toml"\n[interim]\nestimate = 3.0\nstandard_error = 1.0\n',
     "as much information as the final analysis"),
])
def test_file_errors_name_the_key(tmp_path, interim, match):
    path = _files(tmp_path, interim)
    with pytest.raises(DesignFileError, match=match):
        InterimPlan.from_file(path)


def test_missing_planned_size_is_asked_for(tmp_path):
    design = DESIGN.replace("[sizes]\nplanned = 200\n", "")
    path = _files(tmp_path, 'design = "trial.toml"\n[interim]\nestimate = 3.0\n'
                            "standard_error = 2.0\n", design)
    with pytest.raises(DesignFileError, match="'final.planned_total' is needed"):
        InterimPlan.from_file(path)
    path.write_text(path.read_text() + "[final]\nplanned_total = 200\n", encoding="utf-8")
    assert InterimPlan.from_file(path).look.fraction == pytest.approx(0.5)


def test_per_arm_forms_for_other_endpoints(tmp_path):
    binary = ('[endpoint]\ntype = "binary"\ncontrol_rate = 0.3\n[design_prior]\n'
              'family = "normal"\nmean = 0.15\nsd = 0.05\n[sizes]\nplanned = 400\n')
    path = _files(tmp_path, 'design = "trial.toml"\n[interim]\ntreatment_responders = 40\n'
                            "treatment_n = 100\ncontrol_responders = 30\ncontrol_n = 100\n",
                  binary)
    look = InterimPlan.from_file(path).look
    assert look.data.estimate == pytest.approx(0.1)
    assert look.data.standard_error == pytest.approx((0.4 * 0.6 / 100 + 0.3 * 0.7 / 100) ** .5)
    survival = ('[endpoint]\ntype = "time_to_event"\ncontrol_median = 10.0\n'
                "accrual_time = 12.0\nfollow_up_time = 12.0\n[effect]\nassumed = 0.7\n"
                '[design_prior]\nfamily = "normal"\nmean = -0.3\nsd = 0.15\n'
                "[sizes]\nplanned = 600\n")
    path = _files(tmp_path, 'design = "trial.toml"\n[interim]\nestimate = 0.8\nevents = 120\n',
                  survival)
    look = InterimPlan.from_file(path).look
    assert look.interim_se == pytest.approx(2 / 120**0.5)
    assert look.size_unit == "events"


def test_python_entry_point_checks_its_title():
    from assurance import ContinuousEndpoint, Normal, TrialDesign

    d = TrialDesign(ContinuousEndpoint(sigma=10.0, analysis="z"), Normal(4.0, 2.0))
    with pytest.raises(AssuranceInputError, match="title"):
        interim_look(d, InterimData(3.0, standard_error=2.0), planned_total=200, title="")
    plan = interim_look(d, InterimData(3.0, standard_error=2.0), planned_total=200)
    assert plan.source is None and plan.input_paths == ()
    assert "Predictive probability of success: 56.4%" in plan.summary()
    shown = plan._repr_html_()
    assert "56.4%" in shown and "<script" not in shown


# ------------------------------------------------------------------------------------------
# the output folder
# ------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def written(case_plan, tmp_path_factory):
    plan = dataclasses.replace(case_plan, made_by="assurance interim interim.toml --out out")
    out = tmp_path_factory.mktemp("interim") / "out"
    write_outputs(out, plan, formats=("png", "svg"))
    return plan, out


def test_folder_holds_the_listed_files(written):
    plan, out = written
    names = sorted(str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
    assert names == sorted([MARKER, "design_as_given.toml", "interim_as_given.toml",
                            "interim_results.csv", "operating_characteristics.csv",
                            "operating_by_effect.csv", "memo.html",
                            "figures/interim_predictive.png", "figures/interim_predictive.svg",
                            "figures/interim_operating.png", "figures/interim_operating.svg"])
    assert (out / "interim_as_given.toml").read_bytes() == INTERIM.read_bytes()
    assert (out / "design_as_given.toml").read_bytes() == (CASE / "design.toml").read_bytes()
    assert (out / "figures/interim_predictive.png").read_bytes()[:4] == b"\x89PNG"


def test_csv_carries_the_computed_numbers(written):
    plan, out = written
    with open(out / "interim_results.csv", encoding="utf-8") as fh:
        rows = {r["quantity"]: r["value"] for r in csv.DictReader(fh)}
    look = plan.look
    assert float(rows["predictive_probability_analysis_prior"]) == pytest.approx(
        look.predictive["analysis"], rel=1e-5)
    assert float(rows["conditional_power_trend"]) == pytest.approx(look.conditional["trend"],
                                                                   rel=1e-5)
    assert rows["decision"] == look.decision
    with open(out / "operating_characteristics.csv", encoding="utf-8") as fh:
        oc = list(csv.DictReader(fh))
    assert [r["truth"] for r in oc] == [r.name for r in look.operating]
    assert float(oc[0]["p_success"]) == pytest.approx(look.operating[0].p_success, rel=1e-5)


def test_never_written_over_the_input_files(case_plan, tmp_path):
    with pytest.raises(AssuranceInputError):
        write_outputs(CASE, case_plan, overwrite=True)  # the folder holding the inputs
    out = tmp_path / "look"
    case_plan.write(out)
    with pytest.raises(AssuranceInputError):
        case_plan.write(out)  # exists, no overwrite
    case_plan.write(out, overwrite=True)


def test_memo_leads_with_the_numbers_and_records_provenance(written):
    plan, out = written
    page = (out / "memo.html").read_text(encoding="utf-8")
    dom = _read(page)
    look = plan.look
    assert dom.values["predictive"] == _shown(look.predictive["analysis"])
    assert dom.values["predictive_other"] == _shown(look.predictive["design"])
    assert dom.values["cp_assumed"] == _shown(look.conditional["assumed"])
    assert dom.values["cp_trend"] == _shown(look.conditional["trend"])
    assert dom.values["decision"] == look.decision
    assert dom.order[:2] == ["h1", "decision"]
    for path in (INTERIM, CASE / "design.toml"):
        assert hashlib.sha256(path.read_bytes()).hexdigest() in page
    assert "assurance interim interim.toml --out out" in page
    assert plan.created in page and "numpy" in page.lower()
    for caution in ("qualified statistician", "ICH E9", "ethics committee",
                    "data monitoring committee"):
        assert caution in page
    assert "<script" not in page.lower()


# ------------------------------------------------------------------------------------------
# the memo in a browser
# ------------------------------------------------------------------------------------------
@NEEDS_BROWSER
def test_memo_in_a_browser(case_plan, tmp_path):
    page = interim_memo_html(case_plan, date="2026-01-05", versions="test")
    opened = open_memo(page, tmp_path)
    check_reads_well(opened, images=2)
    dom = _read(opened.dom)
    assert dom.values["predictive"] == _shown(case_plan.look.predictive["analysis"])
    assert dom.values["decision"] == case_plan.look.decision


@NEEDS_BROWSER
def test_a_deep_file_path_wraps_instead_of_widening_the_page(tmp_path):
    # the provenance names the files by path; one deep in folders (as in a fresh clone under
    # a temporary folder) must wrap inside its cell, not push the page past A4 width
    deep = tmp_path.joinpath("a_rather_long_folder_name_for_testing_wrapping",
                             "another_deep_folder_level_with_no_spaces", "interim_look")
    shutil.copytree(Path(__file__).resolve().parents[1] / "case_studies" / "programs"
                    / "interim_look", deep)
    plan = InterimPlan.from_file(deep / "interim.toml")
    opened = open_memo(interim_memo_html(plan, date="2026-01-05", versions="test"),
                       tmp_path)
    assert opened.overflow <= 0


def test_written_figures_are_the_look_drawn_directly(written):
    # the folder's figures are drawn in worker processes where the platform forks; they
    # must be the bytes of drawing the look's figures here
    from assurance.report.figures import figure_bytes
    from assurance.report.interim_figures import interim_figure_makers

    plan, out = written
    for name, draw in interim_figure_makers().items():
        fig = draw(plan.look).figure
        assert (out / "figures" / f"{name}.png").read_bytes() == figure_bytes(fig, "png")
        assert (out / "figures" / f"{name}.svg").read_bytes() == figure_bytes(fig, "svg")
