"""The program plan: the program file, the output folder, the memo (also in a browser).

The memo's numbers are checked against the plan's own results with the rounding the memo
promises (one decimal of a percent), written out here; the provenance's SHA-256 against
``hashlib``; the folder's CSV files against the plan. The invented case study
``case_studies/programs/phase2_then_phase3`` is planned once for the module.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
from _browser import NEEDS_BROWSER, check_reads_well, open_memo

import assurance as asr
from assurance.design_file.program_file import read_program_file
from assurance.errors import AssuranceInputError, DesignFileError
from assurance.program.development import CHECK_LIMIT, ProgramDesign
from assurance.program_plan import ProgramPlan, program_plan
from assurance.report.output_folder import claim_output_folder, write_outputs

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "case_studies" / "programs" / "phase2_then_phase3"
PROGRAM = CASE / "program.toml"

DESIGN = """[endpoint]
sd = 10
analysis = "z"
[success]
alpha = 0.1
[design_prior]
family = "normal"
mean = 4
sd = 2
"""


class _Keys(HTMLParser):
    """Text of every element carrying a data-key; section ids in order; all text."""

    def __init__(self) -> None:
        super().__init__()
        self.values: dict[str, str] = {}
        self.order: list[str] = []
        self.text: list[str] = []
        self._key: str | None = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "h1":
            self.order.append("h1")
        if tag == "section":
            self.order.append(a.get("id", ""))
        if "data-key" in a:
            self._key = a["data-key"]
            self.values[self._key] = ""

    def handle_endtag(self, tag):
        if tag in ("div", "p"):
            self._key = None

    def handle_data(self, data):
        self.text.append(data)
        if self._key is not None:
            self.values[self._key] += data.strip()


def _parse(page: str) -> _Keys:
    parsed = _Keys()
    parsed.feed(page)
    return parsed


def _pct(p: float) -> str:
    """One decimal of a percent (the memo's rounding for probabilities away from 0 and 1)."""
    return f"{100 * p:.1f}%"


@pytest.fixture(scope="module")
def case():
    plan = ProgramPlan.from_file(PROGRAM)
    return dataclasses.replace(plan, made_by="assurance program program.toml --out x")


@pytest.fixture(scope="module")
def written(case, tmp_path_factory):
    out = tmp_path_factory.mktemp("program") / "out"
    with claim_output_folder(out) as claim:  # as the command line does
        write_outputs(out, case, claim=claim, formats=("png", "svg"))
    return out


def _small(tmp_path: Path, program_text: str) -> Path:
    (tmp_path / "trial.toml").write_text(DESIGN, encoding="utf-8")
    path = tmp_path / "program.toml"
    path.write_text(program_text, encoding="utf-8")
    return path


SMALL = """title = "Small program"
[phase2]
design = "trial.toml"
n = 100
[phase3]
design = "trial.toml"
n = 400
[check]
programs = 0
"""


# ------------------------------------------------------------------------------------------
# the case study
# ------------------------------------------------------------------------------------------
def test_case_study_is_kept_out_of_the_design_glob():
    assert not list(ROOT.glob("case_studies/programs/design.toml"))
    assert PROGRAM.is_file() and (CASE / "phase2.toml").is_file()


def test_case_study_plan_and_its_check(case):
    r, q = case.result, case.replanned
    assert q is not None and q.replanned and not r.replanned
    assert 0 < r.pos < r.p_go < 1
    assert case.check_passes() is True
    rows = case.check_rows()
    assert {row["program"] for row in rows} == {"fixed", "replanned"}
    for row in rows:  # each computed figure within CHECK_LIMIT MC SE of the simulated one
        assert abs(row["computed"] - row["simulated"]) <= CHECK_LIMIT * row["mcse"]
    assert case.input_paths == (PROGRAM, CASE / "phase2.toml", CASE / "phase3.toml")
    text = case.summary()
    assert f"{r.pos:.3f}" in text and "passes" in text


def test_output_folder_holds_every_file(case, written):
    names = sorted(p.relative_to(written).as_posix() for p in written.rglob("*")
                   if p.is_file())
    for name in ("results.csv", "grid.csv", "replan.csv", "check.csv", "results.nc",
                 "memo.html", "figures/by_effect.png", "figures/grid.svg",
                 "figures/replan.png", "inputs/program.toml", "inputs/phase2.toml",
                 "inputs/phase3.toml", ".assurance-output"):
        assert name in names, name
    for name in ("program.toml", "phase2.toml", "phase3.toml"):  # byte-for-byte copies
        assert (written / "inputs" / name).read_bytes() == (CASE / name).read_bytes()
    with open(written / "results.csv", encoding="utf-8") as fh:
        rows = {row["quantity"]: row for row in csv.DictReader(fh)}
    assert float(rows["pos"]["phase3_fixed"]) == pytest.approx(case.result.pos, rel=1e-5)
    assert float(rows["pos"]["phase3_replanned"]) == pytest.approx(case.replanned.pos,
                                                                   rel=1e-5)
    with open(written / "grid.csv", encoding="utf-8") as fh:
        grid = list(csv.DictReader(fh))
    assert len(grid) == case.grid.sizes["phase2_n"] * case.grid.sizes["go_rule"]
    import xarray as xr

    with xr.open_dataset(written / "results.nc", engine="scipy") as ds:
        assert float(ds.attrs["fixed_pos"]) == pytest.approx(case.result.pos)
        assert ds["pos"].shape == case.grid["pos"].shape


def test_the_folder_holding_the_inputs_is_never_replaced(case, tmp_path):
    with pytest.raises(AssuranceInputError, match="holds the design file"):
        case.write(CASE, overwrite=True)


def test_memo_shows_the_plans_numbers_provenance_and_cautions(case, written):
    page = (written / "memo.html").read_text(encoding="utf-8")
    dom = _parse(page)
    r = case.replanned
    assert dom.order[:2] == ["h1", "decision"]
    assert dom.values["pos"] == _pct(r.pos)
    assert dom.values["p_go"] == _pct(r.p_go)
    assert dom.values["p_success_given_go"] == _pct(r.p_success_given_go)
    assert dom.values["false_go"] == _pct(r.false_go)
    assert dom.values["expected_patients"] == f"{r.expected_patients:,.0f}"
    assert dom.values["check"] == "passes"
    text = " ".join(" ".join(dom.text).split())
    for path in case.input_paths:  # every input file with its SHA-256
        assert hashlib.sha256(path.read_bytes()).hexdigest() in text
    assert "assurance program program.toml --out x" in text
    assert case.created in text and "20260101" in text
    assert "ICH E9" in text and "qualified statistician" in text
    assert "<script" not in page.lower()
    assert not re.search(r"\bnan\b", text, re.I)


# ------------------------------------------------------------------------------------------
# the program file
# ------------------------------------------------------------------------------------------
def test_a_small_program_file_reads_paths_relative_to_itself(tmp_path):
    path = _small(tmp_path, SMALL)
    spec = read_program_file(path)
    assert spec.design_paths == (tmp_path / "trial.toml", tmp_path / "trial.toml")
    plan = ProgramPlan.from_file(path)
    assert plan.check == {} and plan.input_paths == (path, tmp_path / "trial.toml")
    out = plan.write(tmp_path / "out")
    assert sorted(p.name for p in (out / "inputs").iterdir()) == ["program.toml",
                                                                   "trial.toml"]
    page = (out / "memo.html").read_text(encoding="utf-8")
    assert 'data-key="no-check"' in page


@pytest.mark.parametrize("change, expected", [
    (("n = 100", "n = 0"), r"'phase2\.n' must be >= 1\. Got 0"),
    (("n = 400", 'n = "400"'), r"'phase3\.n' must be a whole number\. Got '400'"),
    (("[check]", "[chek]"), r"unknown key 'chek' in the top level\. Did you mean 'check'\?"),
    (("n = 100", "n = 100\ngo_treshold = 2.0"),
     r"unknown key 'go_treshold' in \[phase2\]\. Did you mean 'go_threshold'\?"),
    (('design = "trial.toml"\nn = 100', 'design = "missing.toml"\nn = 100'),
     r"'phase2\.design' names .*missing\.toml.*not found"),
    (("[check]", "[replan]\ntarget = 0.8\nmin_n = 500\nmax_n = 100\n[check]"),
     r"'replan\.max_n' must be >= 'replan\.min_n'"),
    (("[check]", "[surrogate]\nslope = 0.0\n[check]"), r"'surrogate\.slope'"),
    (("n = 100", "n = 1"), r"'phase2\.n' must be at least 2"),
    (("[check]", "[replan]\ntarget = 0.8\nmin_n = 50\nmax_n = 900\nrobust_weight = 0.5\n"
                 "[check]"), r"'replan\.vague_sd' is required"),
])
def test_program_file_problems_name_the_key(tmp_path, change, expected):
    path = _small(tmp_path, SMALL.replace(*change, 1))
    with pytest.raises(DesignFileError, match=expected):
        read_program_file(path)


def test_missing_tables_are_all_reported(tmp_path):
    path = _small(tmp_path, 'title = "No phases"\n')
    with pytest.raises(DesignFileError) as info:
        read_program_file(path)
    assert len(info.value.problems) == 2
    assert "'phase2' is required" in str(info.value)


def test_program_plan_refuses_a_non_program():
    with pytest.raises(AssuranceInputError, match="'program' parameter of program_plan"):
        program_plan("program.toml")


def test_made_by_is_set_by_replace_and_shown(tmp_path):
    ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    plan = program_plan(ProgramDesign(p3, p3, n2=100, n3=400), programs=0)
    assert plan.made_by is None
    page = dataclasses.replace(plan, made_by="shell: assurance program x").memo_html(
        figures=False, versions="-")
    assert "shell: assurance program x" in page


# ------------------------------------------------------------------------------------------
# in a browser
# ------------------------------------------------------------------------------------------
@NEEDS_BROWSER
def test_memo_in_a_browser(case, written, tmp_path):
    page = (written / "memo.html").read_text(encoding="utf-8")
    opened = open_memo(page, tmp_path)
    check_reads_well(opened, images=3)
    dom = _parse(opened.dom)
    assert dom.values["pos"] == _pct(case.replanned.pos)


def test_notebook_view_escapes_the_title(tmp_path):
    ep = asr.ContinuousEndpoint(sigma=10.0, analysis="z")
    p3 = asr.TrialDesign(ep, asr.Normal(3.0, 2.0))
    plan = program_plan(ProgramDesign(p3, p3, n2=100, n3=400, title="A <b> & C"), programs=0)
    view = plan._repr_html_()
    assert "A &lt;b&gt; &amp; C" in view and "<script" not in view
    assert f"{plan.result.pos:.1%}" in view


# ------------------------------------------------------------------------------------------
# durations, and the check for other endpoints, through the program file
# ------------------------------------------------------------------------------------------
def test_case_study_months_follow_the_sizes_and_are_checked(case, written):
    p = case.program
    # the case study's file: 20 patients a month and 3 months of follow-up in phase 2, 25 a
    # month and 6 months in phase 3, 4 months between them (written out here)
    r, q = case.result, case.replanned
    assert r.expected_months == pytest.approx(
        120 / 20 + 3 + r.p_go * (4 + 500 / 25 + 6), rel=1e-9)
    assert q.expected_phase3_months == pytest.approx(q.expected_phase3_n / 25 + 6, rel=1e-9)
    assert p.recruitment_phase3 == 25.0 and p.months_phase3 == 0.0
    assert {row["quantity"] for row in case.check_rows()} >= {"expected_months"}
    page = (written / "memo.html").read_text(encoding="utf-8")
    dom = _parse(page)
    assert dom.values["expected_months"] == f"{q.expected_months:.1f} months"
    text = " ".join(" ".join(dom.text).split())
    assert "phase 3 recruits 25 patients a month, then 6 months of follow-up" in text
    assert f"on average {q.expected_phase3_months:.1f} months after a go" in text


FIXED_MONTHS = SMALL.replace("[check]", """[durations]
phase2 = 9.0
gap = 3.0
phase3 = 24.0
[replan]
target = 0.6
min_n = 100
max_n = 2000
[check]""")


def test_fixed_months_still_read_and_the_memo_says_they_stay_fixed(tmp_path):
    plan = ProgramPlan.from_file(_small(tmp_path, FIXED_MONTHS))
    p, q = plan.program, plan.replanned
    assert (p.months_phase2, p.months_gap, p.months_phase3) == (9.0, 3.0, 24.0)
    assert p.recruitment_phase3 is None
    assert q.expected_months == pytest.approx(9 + q.p_go * (3 + 24), rel=1e-12)
    page = plan.memo_html(figures=False, versions="-")
    text = " ".join(" ".join(_parse(page).text).split())
    assert "Phase 3 is counted as 24 months whatever its re-planned size" in text


@pytest.mark.parametrize("durations, expected", [
    ("phase3 = 24.0\nphase3_recruitment = 20.0",
     r"'durations\.phase3' \(fixed months\) and 'durations\.phase3_recruitment'"),
    ("phase2_follow_up = 3.0", r"'durations\.phase2_follow_up' needs "
                               r"'durations\.phase2_recruitment'"),
    ("phase3_recruitment = 0.0", r"'durations\.phase3_recruitment' must be > 0"),
    ("phase3_recruitmnet = 20.0", r"Did you mean 'phase3_recruitment'\?"),
])
def test_duration_problems_name_the_key(tmp_path, durations, expected):
    path = _small(tmp_path, SMALL.replace("[check]", f"[durations]\n{durations}\n[check]"))
    with pytest.raises(DesignFileError, match=expected):
        read_program_file(path)


BINARY = """[endpoint]
type = "binary"
control_rate = 0.3
[success]
alpha = 0.1
sided = "one"
[design_prior]
family = "normal"
mean = 0.1
sd = 0.05
"""

SURVIVAL = """[endpoint]
type = "time_to_event"
control_median = 12.0
accrual_time = 24.0
follow_up_time = 12.0
assumed_hazard_ratio = 0.75
[design_prior]
family = "log_normal"
median = 0.72
log_sd = 0.12
"""

MIXED = """title = "Binary phase 2, time-to-event phase 3"
[phase2]
design = "binary.toml"
n = 40
[phase3]
design = "survival.toml"
n = 500
[surrogate]
slope = -0.3
[check]
programs = 20000
"""


def test_a_binary_then_time_to_event_program_file_is_checked_by_simulation(tmp_path):
    (tmp_path / "binary.toml").write_text(BINARY, encoding="utf-8")
    (tmp_path / "survival.toml").write_text(SURVIVAL, encoding="utf-8")
    path = tmp_path / "program.toml"
    path.write_text(MIXED, encoding="utf-8")
    plan = ProgramPlan.from_file(path)
    assert plan.check_gap is None and set(plan.check) == {"fixed"}
    for row in plan.check_rows():  # CHECK_LIMIT (4) Monte Carlo SE, as in the memo
        assert abs(row["computed"] - row["simulated"]) <= CHECK_LIMIT * row["mcse"], row
    page = plan.memo_html(figures=False, versions="-")
    text = " ".join(" ".join(_parse(page).text).split())
    assert "decided by the success region of its own test" in text
    assert "decided on the log-rank statistic" in text
    assert 'data-key="no-check"' not in page


def test_a_program_without_simulated_programs_says_so(tmp_path):
    plan = ProgramPlan.from_file(_small(tmp_path, SMALL))
    page = plan.memo_html(figures=False, versions="-")
    assert "[check] programs = 0" in " ".join(_parse(page).text)


def test_memo_says_which_nuisance_priors_are_held_at_planning_values():
    import math

    from assurance.program.development import Surrogate

    surv = asr.SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
                                assumed_hazard_ratio=0.75,
                                median_prior=asr.Gamma(144.0, 12.0))
    p2 = asr.TrialDesign(asr.BinaryEndpoint(control_rate=0.3, control_prior=(30, 70)),
                         asr.Normal(0.1, 0.05), rule=asr.Significance(alpha=0.1))
    p3 = asr.TrialDesign(surv, asr.Normal(math.log(0.75), 0.1))
    plan = program_plan(ProgramDesign(p2, p3, n2=40, n3=500,
                                      surrogate=Surrogate(0.0, -0.3)),
                        programs=0)
    text = " ".join(" ".join(_parse(plan.memo_html(figures=False, versions="-")).text).split())
    assert "priors on the control rate (phase 2), the control median (phase 3) are not " \
           "averaged over" in text


def test_written_figures_are_the_plan_figures_drawn_directly(case, written):
    # drawn in worker processes where the platform forks: the same bytes as here
    from assurance.report.figures import figure_bytes

    for name, fig in case.figures().items():
        assert (written / "figures" / f"{name}.png").read_bytes() == figure_bytes(fig, "png")
