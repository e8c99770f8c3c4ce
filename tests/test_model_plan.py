"""Plans made with a general analysis model, from Python, from a design file and on the
command line: the same numbers three ways, the output folder, resumption, bad files.

The model is the built-in borrowed-control model with no borrowing (weight 0) and the SD
known to the analysis: its posterior for the effect is then the z analysis's, so the
simulated probability of success is checked against the closed form for a normal prior and
a z test (O'Hagan, Stevens & Campbell 2005), within 4 Monte Carlo standard errors.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest
from scipy import stats

import assurance as asr
from assurance.cli import main
from assurance.errors import DesignFileError

DESIGN = """title = "Invented: model plan checks"
[endpoint]
type = "model"
model = "borrowed_control"
sd = 10.0
historical_mean = 0.0
historical_n = 40
method = "power_prior"
weight = 0.0
unit = "points"
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[effect]
assumed = 4.0
[success]
alpha = 0.025
sided = "one"
[sizes]
list = [40, 120]
[targets]
assurance = 0.5
[simulation]
trials = 120
nuts_check = 0
chunk = 40
[monte_carlo]
seed = 7
"""


def _closed_form(n_total: int, mean: float = 4.0, sd: float = 2.0, sigma: float = 10.0,
                 alpha: float = 0.025) -> float:
    # O'Hagan, Stevens & Campbell (2005): Phi((m - z se) / sqrt(se^2 + s^2)), 1:1 arms
    se = sigma * math.sqrt(4.0 / n_total)
    return float(stats.norm.cdf((mean - stats.norm.isf(alpha) * se) / math.hypot(se, sd)))


@pytest.fixture(scope="module")
def design_file(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("model") / "trial.toml"
    path.write_text(DESIGN, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def from_file(design_file) -> asr.ModelPlan:
    return asr.ModelPlan.from_file(design_file)


def test_probability_of_success_matches_the_closed_form(from_file):
    ds = from_file.results
    for n in (40, 120):
        at = ds.sel(n=n)
        assert abs(float(at.assurance) - _closed_form(n)) <= 4 * float(at.assurance_mcse) \
            + 1e-12, n


def test_the_same_numbers_from_python_and_the_file(from_file):
    from assurance.general.builtin import borrowed_control

    model = borrowed_control(asr.Normal(4.0, 2.0), 4.0, sd=10.0, historical_mean=0.0,
                             historical_n=40, method="power_prior", weight=0.0)
    by_hand = asr.plan_model(model, asr.Significance(alpha=0.025, sided="one"), [40, 120],
                             targets={"assurance": 0.5}, trials=120, nuts_check=0, chunk=40,
                             seed=7)
    assert (by_hand.results.assurance.values == from_file.results.assurance.values).all()
    assert by_hand.planned_n == from_file.planned_n


def test_command_line_writes_the_folder_and_resumes(design_file, tmp_path):
    out = tmp_path / "out"
    assert main(["plan", str(design_file), "--out", str(out), "--quiet"]) == 0
    for name in ("memo.html", "results.csv", "results.nc", "sample_sizes.csv", "design.toml",
                 "design_as_given.toml", "figures/success_by_size.png"):
        assert (out / name).is_file(), name
    assert (out / "finished_sizes").is_dir()
    assert not (tmp_path / ".out.finished-sizes").exists()  # kept in the folder instead
    rows = list(csv.DictReader((out / "results.csv").open(encoding="utf-8")))
    assert [int(r["n"]) for r in rows] == [40, 120]
    memo = (out / "memo.html").read_text(encoding="utf-8")
    assert "Probability of success" in memo and "assurance plan" in memo
    # the design.toml written reads back to the same numbers
    again = asr.ModelPlan.from_file(out / "design.toml")
    assert [f"{float(v):.6g}" for v in again.results.assurance.values] == \
        [r["assurance"] for r in rows]  # the CSV keeps 6 significant digits


def test_an_interrupted_run_resumes_from_its_finished_sizes(design_file, tmp_path):
    # a first run that finished only n = 40 (the same settings), then the whole run
    store = tmp_path / "store"
    spec = asr.read_design(design_file)
    from assurance.general.engine import simulate_general

    part = simulate_general(spec.model, [40], rule=spec.rule, trials=120, seed=7,
                            nuts_check=0, chunk=40, store=store, progress=False)
    whole = asr.ModelPlan.from_spec(spec, store=store)
    fresh = asr.ModelPlan.from_spec(spec)
    assert float(whole.results.assurance.sel(n=40)) == float(part.assurance.sel(n=40))
    assert (whole.results.assurance.values == fresh.results.assurance.values).all()


def test_a_model_file_refuses_tables_that_do_not_apply(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(DESIGN + "[zones]\nmin_acceptable = 1.0\ntarget = 3.0\n"
                    "[analysis_prior]\nfamily = \"normal\"\nmean = 0.0\nsd = 10.0\n",
                    encoding="utf-8")
    with pytest.raises(DesignFileError) as err:
        asr.read_design(path)
    assert "[zones] is for the built-in endpoints" in str(err.value)
    assert "[analysis_prior] is for the built-in endpoints" in str(err.value)


def test_a_model_file_needs_its_sizes_and_an_assumed_effect(tmp_path):
    text = DESIGN.replace("[sizes]\nlist = [40, 120]\n", "").replace("assumed = 4.0\n", "")
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(DesignFileError) as err:
        asr.read_design(path)
    assert "'effect.assumed'" in str(err.value) and "needs its sizes" in str(err.value)


def test_plan_from_file_points_to_the_model_plan(design_file):
    with pytest.raises(asr.AssuranceInputError, match="ModelPlan.from_file"):
        asr.Plan.from_file(design_file)


def test_command_line_workers_give_the_same_numbers(design_file, tmp_path, from_file):
    out = tmp_path / "out"
    assert main(["plan", str(design_file), "--out", str(out), "--quiet", "--workers", "2"]) == 0
    rows = list(csv.DictReader((out / "results.csv").open(encoding="utf-8")))
    assert [r["assurance"] for r in rows] == \
        [f"{float(v):.6g}" for v in from_file.results.assurance.values]
    assert "--workers 2" in (out / "memo.html").read_text(encoding="utf-8")


@pytest.mark.parametrize("argv, words", [
    (["--workers", "-1"], "--workers option must be a whole number from 0 to 256"),
    (["--scheduler", " "], "--scheduler option must be a Dask scheduler address"),
])
def test_command_line_cluster_options_are_checked(design_file, tmp_path, capsys, argv,
                                                   words):
    out = tmp_path / "out"
    assert main(["plan", str(design_file), "--out", str(out), "--quiet", *argv]) == 2
    assert words in capsys.readouterr().err
    assert not out.exists()


def test_cluster_options_are_refused_for_built_in_endpoints(tmp_path, capsys):
    root = Path(__file__).resolve().parents[1]
    code = main(["plan", str(root / "case_studies" / "knee_pain" / "design.toml"), "--out",
                 str(tmp_path / "out"), "--quiet", "--workers", "2"])
    assert code == 2 and "are for analysis models" in capsys.readouterr().err
