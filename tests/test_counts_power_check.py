"""Count plans check their power formula by simulating the test itself.

The Wald test on the log rate ratio has a closed-form power that approximates the test's own
(the normal limit of the log rate ratio). A plan with a count endpoint therefore simulates
the test at each solved size and at the planned size, and the memo shows the simulated power
beside the formula's. Checked here against an independent simulation written in the test
with numpy (Poisson counts, rates over exposure, ``Var(log rate) = 1 / events`` by the delta
method: the usual Wald test of two Poisson rates, common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import xarray as xr
from scipy import stats

import assurance as asr
from assurance.report.memo import _power_check
from assurance.workflow import POWER_CHECK_TRIALS, needs_power_check

RATE, FOLLOW_UP, RATIO = 0.6, 2.0, 0.65


def _design(**extra) -> asr.TrialDesign:
    endpoint = asr.CountEndpoint(control_rate=RATE, follow_up=FOLLOW_UP, **extra)
    return asr.TrialDesign(endpoint, asr.Normal(math.log(0.7), 0.15),
                           rule=asr.Significance(alpha=0.05, sided="two"),
                           assumed_effect=RATIO)


@pytest.fixture(scope="module")
def plan() -> asr.Plan:
    return asr.plan(_design(), targets={"power": 0.9}, sensitivity=False)


def _independent_power(n_per_arm: int, trials: int, seed: int) -> tuple[float, float]:
    rng = np.random.default_rng(seed)
    x_t = rng.poisson(RATE * RATIO * FOLLOW_UP * n_per_arm, trials)
    x_c = rng.poisson(RATE * FOLLOW_UP * n_per_arm, trials)
    ok = (x_t > 0) & (x_c > 0)
    log_rr = np.log(np.where(ok, x_t, 1) / np.where(ok, x_c, 1))
    z = log_rr / np.sqrt(1 / np.where(ok, x_t, 1) + 1 / np.where(ok, x_c, 1))
    p = float(np.mean(ok & (z < -stats.norm.isf(0.025))))  # two-sided 5%, benefit side
    return p, math.sqrt(p * (1 - p) / trials)


def test_solved_and_planned_sizes_are_checked(plan):
    ds = plan.results
    checked = [int(n) for n in ds["checked_n"].values]
    assert plan.planned_n in checked
    assert plan.sample_sizes[0].n_total in checked
    assert ds.attrs["power_check_trials"] == POWER_CHECK_TRIALS["poisson"]
    # the formula column is the plan's own classical power at those sizes
    for n in checked:
        assert float(ds["power_check_formula"].sel(checked_n=n)) == pytest.approx(
            float(ds["power"].sel(n=n)), abs=1e-12)


def test_simulated_power_agrees_with_an_independent_simulation(plan):
    ds = plan.results
    for n in ds["checked_n"].values:
        n_t, n_c = plan.design.endpoint.arm_sizes(np.array([int(n)]))
        assert n_t[0] == n_c[0]
        ours = float(ds["power_check_simulated"].sel(checked_n=n))
        se = float(ds["power_check_mcse"].sel(checked_n=n))
        theirs, se2 = _independent_power(int(n_t[0]), 40_000, seed=int(n))
        # two independent estimates: 4 SE of their difference
        assert abs(ours - theirs) <= 4 * math.hypot(se, se2), (n, ours, theirs)


def test_the_memo_and_folder_show_the_check(plan, tmp_path):
    out = plan.write(tmp_path / "out")
    memo = (out / "memo.html").read_text(encoding="utf-8")
    assert "Power formula checked by simulation" in memo
    assert 'data-key="power-check"' in memo
    rows = (out / "power_check.csv").read_text(encoding="utf-8").splitlines()
    assert rows[0] == "n,power_formula,power_simulated,power_simulated_mcse"
    assert len(rows) == 1 + plan.results.sizes["checked_n"]


def _check_ds(formula, simulated, se):
    return xr.Dataset({"power_check_formula": ("checked_n", formula),
                       "power_check_simulated": ("checked_n", simulated),
                       "power_check_mcse": ("checked_n", se)},
                      coords={"checked_n": [300, 400]},
                      attrs={"power_check_trials": 20000, "power_check_analysis": "poisson"})


@pytest.mark.parametrize("simulated, se, flag, words", [
    ([0.8719, 0.9], [0.0024, 0.002], True, "beyond Monte Carlo error"),
    ([0.8719, 0.9], [0.004, 0.002], False, "less than two Monte Carlo standard errors"),
    ([0.8690, 0.9], [0.0024, 0.002], False, "agrees with the formula"),
])
def test_differences_are_flagged_only_beyond_half_a_point_and_noise(simulated, se, flag,
                                                                   words):
    # the example: 0.8667 by formula against 0.8719 simulated
    parts = type("Parts", (), {"results": _check_ds([0.8667, 0.9], simulated, se)})()
    shown = _power_check(parts)
    assert shown["flag"] is flag
    assert words in shown["sentences"][1]
    assert "-0.0" not in str(shown["rows"]) and "\u22120.0" not in str(shown["rows"])


def test_only_approximate_count_tests_are_checked():
    assert needs_power_check(_design())
    assert not needs_power_check(_design(test="exact_conditional"))
    continuous = asr.TrialDesign(asr.ContinuousEndpoint(sigma=1.0, analysis="z"),
                                 asr.Normal(0.3, 0.1))
    assert not needs_power_check(continuous)
