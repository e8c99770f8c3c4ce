"""The Plan object: one computation behind the command line, design files and Python.

For every shipped case study the numbers from ``assurance plan`` (read back from the files
it writes), from ``Plan.from_file`` and from a plan built by hand with the public classes
are the same to the last bit: they run the same code on equal designs. The rest checks what
a user relies on: the notebook view is well-formed static HTML with the solved sizes, the
writers never replace anything unless asked and keep the design file byte for byte, and bad
inputs get one clear message naming the parameter, the value and what is allowed.
"""

from __future__ import annotations

import csv
import hashlib
import html
import math
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from scipy import stats

import assurance as asr
from assurance.cli import main
from assurance.errors import AssuranceInputError, DesignFileError
from assurance.planner import DesignSource, Plan, PlanSettings
from assurance.report import memo_text_summary

ROOT = Path(__file__).resolve().parents[1]
CASE_DIR = ROOT / "case_studies"


# ------------------------------------------------------------------------------------------
# each case study written by hand with the public classes (the same values as its
# design.toml; numbers are floats where the file reader turns them into floats)
# ------------------------------------------------------------------------------------------
def _knee_pain() -> dict:
    design = asr.TrialDesign(
        asr.ContinuousEndpoint(sigma=18.0, layout="two_arm", allocation=1.0, analysis="t",
                               better="lower", unit="points"),
        asr.Mixture([asr.PointMass(0.0), asr.Normal(-6.0, 3.0)], [0.2, 0.8]),
        rule=asr.Significance(alpha=0.05, sided="two"),
        assumed_effect=-7.0,
        relevant_effect=-5.0,
        power_effects=(-4.0, -6.0, -8.0),
        title="Invented case: KX-17 for chronic knee pain (phase 3 sizing)",
    )
    return {"design": design,
            "targets": {"power": 0.9, "assurance": 0.6, "conditional_assurance": 0.9},
            "sizes": range(40, 801, 20),
            "precision": asr.PrecisionPlan(length=8.0, coverage=0.95)}


def _event_driven() -> dict:
    design = asr.TrialDesign(
        asr.SurvivalEndpoint(assumed_hazard_ratio=0.75, accrual_time=24.0, follow_up_time=18.0,
                             control_median=14.0, accrual_ramp=6.0, dropout_per_year=0.05,
                             time_unit="months", allocation=2.0, better="lower",
                             events_follow_true_effect=False),
        asr.Normal(math.log(0.80), 0.15),  # log_normal with median 0.80, log_sd 0.15
        rule=asr.Significance(alpha=0.05, sided="two"),
        assumed_effect=0.75,
        relevant_effect=0.85,
        power_effects=(0.7, 0.8),
        title="Invented case: ONC-52 plus chemotherapy versus chemotherapy alone, overall "
              "survival",
    )
    return {"design": design, "targets": {"power": 0.8, "assurance": 0.6},
            "sizes": range(300, 1201, 30)}


def _phase2_to_phase3() -> dict:
    origin = asr.DiscountedEstimate(asr.Estimate(22.0, 9.0, "estimate"), shrinkage=0.8,
                                    power_weight=0.5, robust_weight=0.8, vague_sd=40.0)
    prior = origin.prior()
    design = asr.TrialDesign(
        asr.ContinuousEndpoint(sigma=60.0, layout="two_arm", allocation=1.0, analysis="t",
                               better="higher", unit="metres"),
        prior,
        rule=asr.Significance(alpha=0.05, sided="two"),
        assumed_effect=22.0,
        relevant_effect=15.0,
        power_effects=(10.0, 17.6),
        analysis_prior=asr.Normal(0.0, 30.0),
        title="Invented case: AX-4 in heart failure, phase 2 result carried into phase 3",
    )
    return {"design": design, "targets": {"power": 0.9, "assurance": 0.7},
            "sizes": range(50, 1001, 25),
            "zones": asr.GoConsiderStop(min_acceptable=10.0, target=25.0),
            "prior_origin": origin, "planned": 500}


def _relapse_counts() -> dict:
    design = asr.TrialDesign(
        asr.CountEndpoint(0.6, 2.0, dropout_rate=0.1, overdispersion=0.8, layout="two_arm",
                          allocation=1.0, better="lower", variance_at="true_effect",
                          test_variance="observed_rates", time_unit="years",
                          control_rate_prior=asr.FromScipy(stats.gamma(a=36.0,
                                                                       scale=0.0166667))),
        asr.Normal(math.log(0.70), 0.15),
        rule=asr.Significance(alpha=0.05, sided="two"),
        assumed_effect=0.65,
        relevant_effect=0.8,
        power_effects=(0.55, 0.75, 0.85),
        title="Invented case: RB-11 to prevent relapses (phase 3 sizing)",
    )
    return {"design": design, "targets": {"power": 0.9, "assurance": 0.75},
            "sizes": range(100, 1001, 50), "draws": 20000, "seed": 20261203}


def _response_rate() -> dict:
    design = asr.TrialDesign(
        asr.BinaryEndpoint(0.30, layout="two_arm", allocation=1.0, scale="difference",
                           test="z", better="higher"),
        asr.BetaRates(control=(36.0, 84.0), treatment=(9.0, 11.0), scale="difference"),
        rule=asr.Significance(alpha=0.05, sided="two"),
        assumed_effect=0.15,
        relevant_effect=0.10,
        power_effects=(0.08, 0.12, 0.20),
        title="Invented case: TQ-9 response rate at week 12 (phase 3 sizing)",
    )
    return {"design": design,
            "targets": {"power": 0.9, "assurance": 0.7, "conditional_assurance": 0.9},
            "sizes": range(40, 801, 20)}


def _weekly_injection() -> dict:
    design = asr.TrialDesign(
        asr.ContinuousEndpoint(sigma=12.0, layout="two_arm", allocation=1.0, analysis="t",
                               better="lower", unit="mmHg"),
        asr.Normal(0.5, 1.5),
        rule=asr.Significance(alpha=0.025, sided="one", margin=3.0),
        assumed_effect=0.0,
        relevant_effect=1.0,
        power_effects=(-1.0, 2.0),
        sigma_prior=asr.ScaledInvChiSquare(40.0, 12.0),
        title="Invented case: weekly injection WB-3 versus daily tablet, blood pressure "
              "(non-inferiority)",
    )
    # no [sizes] table: the automatic grid
    return {"design": design, "targets": {"power": 0.9, "assurance": 0.8},
            "draws": 20000, "seed": 20261202}


BY_HAND = {
    "event_driven": _event_driven,
    "knee_pain": _knee_pain,
    "phase2_to_phase3": _phase2_to_phase3,
    "relapse_counts": _relapse_counts,
    "response_rate": _response_rate,
    "weekly_injection": _weekly_injection,
}
CASES = sorted(p.parent.name for p in CASE_DIR.glob("*/design.toml"))


def test_every_case_study_is_written_by_hand_here():
    assert sorted(BY_HAND) == CASES


@pytest.fixture(scope="module", params=CASES)
def three_ways(request, tmp_path_factory):
    """One case study planned by the command line, from its file, and by hand."""
    name = request.param
    path = CASE_DIR / name / "design.toml"
    out = tmp_path_factory.mktemp(name) / "plan"
    assert main(["plan", str(path), "--out", str(out), "--quiet"]) == 0
    with xr.open_dataset(out / "results.nc", engine="scipy") as saved:
        cli_results = saved.load()
    with open(out / "sample_sizes.csv", newline="", encoding="utf-8") as fh:
        cli_sizes = list(csv.DictReader(fh))
    from_file = Plan.from_file(path)
    kwargs = BY_HAND[name]()
    design = kwargs.pop("design")
    by_hand = asr.plan(design, **kwargs)
    # the normalised design.toml of the output folder, and the record of the plan made in
    # Python, each read back as a design file
    rerun = Plan.from_file(out / "design.toml")
    python_record = out.parent / "python_record.toml"
    python_record.write_text(by_hand.design_record(), encoding="utf-8")
    from_python_record = Plan.from_file(python_record)
    return {"name": name, "path": path, "out": out, "cli_results": cli_results,
            "cli_sizes": cli_sizes, "from_file": from_file, "by_hand": by_hand,
            "rerun": rerun, "from_python_record": from_python_record}


def test_results_are_identical_three_ways(three_ways):
    from_file, by_hand = three_ways["from_file"], three_ways["by_hand"]
    # the hand-written design equals the file's, so even the attributes (the design as
    # JSON, the method, the seed) agree
    assert by_hand.design.to_dict() == from_file.design.to_dict()
    xr.testing.assert_identical(by_hand.results, from_file.results)
    # results.nc round-trips every variable, coordinate and attribute unchanged
    saved = three_ways["cli_results"].copy()
    # ... with the normalised design.toml added, in the design file's own names
    assert saved.attrs.pop("design_toml") == (three_ways["out"] / "design.toml").read_text()
    xr.testing.assert_identical(saved, from_file.results)
    assert set(three_ways["cli_results"].data_vars) == set(from_file.results.data_vars)


@pytest.mark.parametrize("way", ["rerun", "from_python_record"])
def test_the_written_design_reads_back_to_the_same_numbers(three_ways, way):
    from_file, again = three_ways["from_file"], three_ways[way]
    # every number, coordinate and per-variable label; the dataset attributes name the file
    xr.testing.assert_equal(again.results, from_file.results)
    for name in from_file.results.variables:
        assert again.results[name].attrs == from_file.results[name].attrs, name
    assert again.sample_sizes == from_file.sample_sizes
    assert again.precision == from_file.precision
    assert again.settings == from_file.settings
    # and it records the same design again: the record is a fixed point
    def body(text: str) -> str:
        return "\n".join(line for line in text.splitlines() if not line.startswith("#"))

    assert body(again.design_record()) == body(again.source.text())


def test_sample_sizes_are_identical_three_ways(three_ways):
    from_file, by_hand = three_ways["from_file"], three_ways["by_hand"]
    assert by_hand.sample_sizes == from_file.sample_sizes
    assert len(three_ways["cli_sizes"]) == len(from_file.sample_sizes)
    for row, answer in zip(three_ways["cli_sizes"], from_file.sample_sizes, strict=True):
        assert row["quantity"] == answer.quantity
        assert row["reached"] == str(answer.reached)
        for key in ("n_total", "n_treatment", "n_control"):
            assert row[key] == ("" if getattr(answer, key) is None
                                else str(getattr(answer, key)))
        # the CSV holds repr(float), which reads back to the same float
        if answer.achieved is not None:
            assert float(row["achieved"]) == answer.achieved
        assert float(row["ceiling"]) == answer.ceiling


def test_settings_and_precision_agree(three_ways):
    from_file, by_hand = three_ways["from_file"], three_ways["by_hand"]
    assert by_hand.precision == from_file.precision
    assert by_hand.settings == from_file.settings
    assert from_file.source.path == three_ways["path"]
    assert from_file.source.content == three_ways["path"].read_bytes()
    assert (three_ways["out"] / "design_as_given.toml").read_bytes() == \
        three_ways["path"].read_bytes()
    assert by_hand.source is None


def test_notebook_view_of_each_case_study_is_well_formed(three_ways):
    plan = three_ways["from_file"]
    root = ET.fromstring(f"<root>{plan._repr_html_()}</root>")
    text = "".join(root.itertext())
    for answer in plan.sample_sizes:
        assert (str(answer.n_total) if answer.reached else "not reachable") in text


# ------------------------------------------------------------------------------------------
# a small, fast design for the rest
# ------------------------------------------------------------------------------------------
DESIGN_TEXT = """\
# A comment, odd spacing and a non-ASCII title: the copy must keep every byte.\r
title   = "Small <trial> & 'friends' \u2013 \u00e9tude"\r
[endpoint]\r
sd = 10.0\r
analysis = "z"\r
[effect]\r
assumed = 4.0\r
relevant = 3.0\r
[design_prior]\r
family = "normal"\r
mean = 4.0\r
sd = 2.0\r
[sizes]\r
list = [100, 200, 300]\r
[targets]\r
power = 0.9\r
assurance = 0.6\r
[precision]\r
length = 5.0\r
criteria = ["ALC", "WOC"]\r
"""


@pytest.fixture(scope="module")
def small_file(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("design") / "small.toml"
    path.write_bytes(DESIGN_TEXT.encode("utf-8"))
    return path


@pytest.fixture(scope="module")
def small(small_file) -> Plan:
    return Plan.from_file(small_file)


def _digest(folder: Path) -> str:
    h = hashlib.sha256()
    for path in sorted(folder.rglob("*")):
        h.update(str(path.relative_to(folder)).encode())
        if path.is_file():
            h.update(path.read_bytes())
    return h.hexdigest()


def test_from_file_keeps_the_exact_bytes(small, small_file):
    assert small.source == DesignSource(small_file, small_file.read_bytes())
    assert small.source.text().startswith("# A comment")
    assert small.design.title == "Small <trial> & 'friends' \u2013 \u00e9tude"


def test_solved_sizes_are_added_to_the_grid(small):
    # power 0.9 at effect 4, SD 10, one-sided 0.025, z test: 2 x 132 (common practice:
    # 2 (1.96 + 1.2816)^2 (10 / 4)^2 = 131.3 per arm); assurance 0.6 at 140 (doctest of
    # run_plan, same design)
    assert [(a.quantity, a.n_total) for a in small.sample_sizes] == [("power", 264),
                                                                      ("assurance", 140)]
    assert [int(n) for n in small.results.n] == [100, 140, 200, 264, 300]
    assert small.settings == PlanSettings({"power": 0.9, "assurance": 0.6}, (100, 200, 300),
                                          None, small.settings.precision, 20000, 20260101,
                                          None, asr.SensitivitySettings())


def test_summary_is_the_text_the_command_line_prints(small, small_file, tmp_path, capsys):
    text = small.summary()
    assert text == memo_text_summary(small.design, small.results, list(small.sample_sizes))
    assert main(["plan", str(small_file), "--out", str(tmp_path / "o")]) == 0
    assert text in capsys.readouterr().out


def test_repr_is_one_plain_line(small):
    text = repr(small)
    assert "\n" not in text
    assert text.startswith("Plan(") and "power 0.9: n = 264" in text \
        and "assurance 0.6: n = 140" in text


class _Balance(HTMLParser):
    """Checks that every opened tag is closed in order (void elements excepted)."""

    VOID = {"img", "br", "hr", "meta", "input", "link"}

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.errors: list[str] = []

    def handle_starttag(self, tag, attrs):
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        pass

    def handle_endtag(self, tag):
        if not self.stack or self.stack.pop() != tag:
            self.errors.append(tag)


def test_notebook_view_is_well_formed_static_html(small):
    page = small._repr_html_()
    root = ET.fromstring(f"<root>{page}</root>")  # raises unless well formed
    parser = _Balance()
    parser.feed(page)
    assert parser.errors == [] and parser.stack == []
    assert "<script" not in page.lower() and "javascript:" not in page.lower()
    assert " on" not in "".join(f" {k}" for el in root.iter() for k in el.attrib)
    text = "".join(root.itertext())
    # the title is escaped, so it reads back as it was written
    assert html.escape(small.design.title) in page and small.design.title in text
    # the headline numbers as printed: the solved sizes, their arms, the values reached
    for answer in small.sample_sizes:
        assert str(answer.n_total) in text
        assert f"{answer.n_treatment} / {answer.n_control}" in text
        assert f"{answer.achieved:.3f}" in text
    j = int(np.flatnonzero(small.results.n.values == 140)[0])
    assert f"{float(small.results.assurance[j]):.3f}" in text
    assert f"{float(small.results.ceiling):.3f}" in text
    images = [el for el in root.iter("img")]
    assert len(images) == 1 and images[0].attrib["src"].startswith("data:image/png;base64,")


def test_notebook_view_says_when_a_target_cannot_be_reached():
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Mixture([asr.PointMass(0.0), asr.Normal(4.0, 2.0)],
                                         [0.5, 0.5]))
    p = asr.plan(design, targets={"assurance": 0.9}, sizes=[100, 200])
    assert not p.sample_sizes[0].reached
    page = p._repr_html_()
    ET.fromstring(f"<root>{page}</root>")
    assert "not reachable" in page
    assert "not reachable" in repr(p)


def test_write_makes_the_folder_with_a_copy_of_the_design_file(small, small_file, tmp_path):
    out = small.write(tmp_path / "plan")
    assert out == tmp_path / "plan"
    names = {str(p.relative_to(out)) for p in out.rglob("*") if p.is_file()}
    assert {"memo.html", "results.csv", "results.nc", "sample_sizes.csv", "design.toml",
            "design_as_given.toml", "figures/prior.png", "figures/power_and_assurance.png",
            "figures/interval_width.png", ".assurance-output"} <= names
    assert not any(name.endswith(".svg") for name in names)  # PNG only by default
    assert (out / "design_as_given.toml").read_bytes() == small_file.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]  # nothing left beside
    # the marker lists exactly what was written
    listed = [line for line in (out / ".assurance-output").read_text(encoding="utf-8")
              .splitlines() if line and not line.startswith("#")]
    on_disk = sorted(p.relative_to(out).as_posix() + ("/" if p.is_dir() else "")
                     for p in out.rglob("*") if p.name != ".assurance-output")
    assert listed == on_disk


def test_write_formats_svg_on_request(small, tmp_path):
    out = small.write(tmp_path / "plan", formats=("png", "svg"))
    for name in ("prior", "power_and_assurance", "interval_width"):
        assert (out / "figures" / f"{name}.png").is_file()
        assert "</svg>" in (out / "figures" / f"{name}.svg").read_text(encoding="utf-8")
    out = small.write(tmp_path / "svg_only", formats="svg")
    assert sorted(p.suffix for p in (out / "figures").iterdir()) == \
        [".svg"] * len(small.figures())
    assert 'src="data:image/png;base64,' in (out / "memo.html").read_text(encoding="utf-8")


@pytest.mark.parametrize("formats", [(), ("pdf",), ["png", "jpg"], 3])
def test_write_rejects_unknown_formats(small, tmp_path, formats):
    with pytest.raises(AssuranceInputError, match="'formats' parameter of Plan.write"):
        small.write(tmp_path / "plan", formats=formats)
    assert not (tmp_path / "plan").exists()


def test_write_never_replaces_a_folder_unless_asked(small, tmp_path):
    out = small.write(tmp_path / "plan")
    before = _digest(out)
    with pytest.raises(AssuranceInputError, match="already exists"):
        small.write(out)
    assert _digest(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]
    (out / "memo.html").write_text("edited", encoding="utf-8")  # a file the package wrote
    small.write(out, overwrite=True)
    assert (out / "memo.html").read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]


def test_write_never_replaces_a_folder_holding_a_users_file(small, tmp_path):
    out = tmp_path / "plan"
    out.mkdir()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    before = _digest(out)
    with pytest.raises(AssuranceInputError, match="was not written by assurance"):
        small.write(out, overwrite=True)
    assert _digest(out) == before
    small.write(tmp_path / "other")
    (tmp_path / "other" / "notes.txt").write_text("mine", encoding="utf-8")
    with pytest.raises(AssuranceInputError, match="'notes.txt'"):
        small.write(tmp_path / "other", overwrite=True)
    assert (tmp_path / "other" / "notes.txt").read_text(encoding="utf-8") == "mine"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["other", "plan"]


def test_write_never_replaces_the_design_files_folder(small_file, tmp_path):
    folder = tmp_path / "project"
    folder.mkdir()
    design = folder / "design.toml"
    design.write_bytes(small_file.read_bytes())
    p = Plan.from_file(design)
    with pytest.raises(AssuranceInputError, match="holds the design file"):
        p.write(folder, overwrite=True)
    assert sorted(x.name for x in folder.iterdir()) == ["design.toml"]
    assert p.write(folder / "plan") == folder / "plan"  # a folder inside it is fine
    assert design.read_bytes() == small_file.read_bytes()


def test_write_leaves_a_file_of_the_same_name_alone(small, tmp_path):
    path = tmp_path / "plan"
    path.write_text("a file", encoding="utf-8")
    with pytest.raises(AssuranceInputError, match="not a folder"):
        small.write(path, overwrite=True)
    assert path.read_text(encoding="utf-8") == "a file"


def test_write_rejects_a_non_boolean_overwrite(small, tmp_path):
    with pytest.raises(AssuranceInputError, match="'overwrite' parameter of Plan.write"):
        small.write(tmp_path / "plan", overwrite="yes")


@pytest.mark.parametrize("out", ["", "  ", 3, None])
def test_write_needs_a_folder_name(small, out):
    with pytest.raises(AssuranceInputError, match="'out' parameter of Plan.write"):
        small.write(out)


def test_a_plan_made_in_python_has_no_design_copy(tmp_path):
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                             asr.Normal(4.0, 2.0))
    out = asr.plan(design, sizes=[100, 200]).write(tmp_path / "plan")
    assert not (out / "design_as_given.toml").exists()
    assert (out / "design.toml").is_file()


def test_write_memo_alone_and_never_silently_over_a_file(small, tmp_path):
    path = tmp_path / "memo.html"
    path.write_text("keep", encoding="utf-8")
    with pytest.raises(AssuranceInputError, match="will not replace"):
        small.write_memo(path)
    assert path.read_text(encoding="utf-8") == "keep"
    assert small.write_memo(path, overwrite=True) == path
    page = path.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and "How precisely the effect" in page
    assert sorted(p.name for p in tmp_path.iterdir()) == ["memo.html"]


def test_figures_are_matplotlib_figures(small):
    import matplotlib.pyplot as plt
    from matplotlib.figure import Figure

    figures = small.figures()
    try:
        assert sorted(figures) == ["interval_width", "power_and_assurance", "prior",
                                   "sensitivity_map"]
        assert all(isinstance(fig, Figure) for fig in figures.values())
    finally:
        for fig in figures.values():
            plt.close(fig)


def test_figures_include_the_fit_of_an_elicited_prior():
    import matplotlib.pyplot as plt

    fit = asr.fit_prior([asr.Quantile(2.0, 0.25), asr.Quantile(4.0, 0.5),
                         asr.Quantile(6.0, 0.75)], family="normal")
    design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"), fit.prior)
    figures = asr.plan(design, sizes=[100, 200], prior_origin=fit, sensitivity=False).figures()
    try:
        assert sorted(figures) == ["power_and_assurance", "prior", "prior_fit"]
    finally:
        for fig in figures.values():
            plt.close(fig)


def test_progress_reports_each_step(small_file):
    calls = []
    Plan.from_file(small_file, progress=lambda *args: calls.append(args))
    steps = [args[0] for args in calls if len(args) == 1]
    assert steps == ["solving n for power 0.9", "solving n for assurance 0.6",
                     "evaluating 5 sample sizes", "posterior interval width against n",
                     "solving n for precision (ALC)", "solving n for precision (WOC)",
                     "sensitivity to the design prior"]


def test_plan_is_the_function_even_after_importing_its_module():
    import assurance.planner  # noqa: F401 - the import itself is what is checked

    assert callable(asr.plan) and asr.plan.__name__ == "plan"
    assert asr.Plan is Plan
    from assurance.design_file import read_design_file

    assert asr.read_design is read_design_file


def test_from_file_reports_a_missing_file(tmp_path):
    with pytest.raises(DesignFileError, match="not found"):
        Plan.from_file(tmp_path / "missing.toml")


# ------------------------------------------------------------------------------------------
# validation at the boundary
# ------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def design():
    return asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
                           asr.Normal(4.0, 2.0))


BAD = [
    ({"targets": {"asurance": 0.7}},
     ["'targets' parameter of plan", "'asurance'", "'power', 'assurance', "
      "'conditional_assurance'"]),
    ({"targets": {"assurance": 1.2}},
     ["'targets['assurance']' parameter of plan", "1.2", "(0, 1)"]),
    ({"targets": {"power": True}}, ["'targets['power']'", "True", "(0, 1)"]),
    ({"targets": [("power", 0.9)]}, ["'targets' parameter of plan", "mapping"]),
    ({"targets": {"conditional_assurance": 0.8}}, ["relevant_effect"]),
    ({"draws": 10}, ["'draws' parameter of plan", "10", "[100, 2e+06]"]),
    ({"draws": 2000.5}, ["'draws' parameter of plan", "2000.5", "whole number"]),
    ({"seed": -1}, ["'seed' parameter of plan", "-1", ">= 0"]),
    ({"sizes": [100, 1]}, ["'sizes' parameter of plan", "Got 1 ", "[2, "]),
    ({"sizes": [100.5]}, ["'sizes' parameter of plan", "100.5", "whole numbers"]),
    ({"sizes": []}, ["'sizes' parameter of plan", "at least 1"]),
    ({"zones": {"min_acceptable": 1, "target": 2}}, ["'zones' parameter of plan",
                                                     "GoConsiderStop"]),
    ({"zones": asr.GoConsiderStop(min_acceptable=4.0, target=2.0)}, ["'target'", "above"]),
    ({"precision": 8.0}, ["'precision' parameter of plan", "PrecisionPlan", "8.0"]),
    ({"prior_origin": 3}, ["'prior_origin' parameter of plan", "3"]),
    ({"progress": "yes"}, ["'progress' parameter of plan", "'yes'"]),
]


@pytest.mark.parametrize(("kwargs", "words"), BAD)
def test_plan_rejects_bad_input_with_a_clear_message(design, kwargs, words):
    with pytest.raises(AssuranceInputError) as info:
        asr.plan(design, **kwargs)
    for word in words:
        assert word in str(info.value), (word, str(info.value))


def test_plan_needs_a_design():
    with pytest.raises(AssuranceInputError, match="'design' parameter of plan must be a "
                                                  "TrialDesign"):
        asr.plan("trial.toml")
