"""Evaluate a design over a grid of sample sizes, and solve for the n that reaches a target.

:func:`evaluate` returns an :class:`xarray.Dataset` with dimension ``n`` (total patients) and
an ``effect`` dimension for the power curve; :func:`solve_sample_size` finds the smallest n
for a target power, assurance or conditional assurance, and says plainly when a target lies
above the ceiling that no sample size can pass.
"""

from __future__ import annotations

import json
import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass
from typing import Any, Literal

import numpy as np

from ._validation import MAX_TOTAL, check_choice, check_int, check_real, check_real_array
from .compute.normal_outcome import Cut
from .design import TrialDesign
from .errors import AssuranceInputError, AssuranceWarning

__all__ = ["evaluate", "solve_sample_size", "SampleSizeAnswer", "Quantity"]

Quantity = Literal["power", "assurance", "conditional_assurance"]
QUANTITIES: tuple[str, ...] = ("power", "assurance", "conditional_assurance")
DEFAULT_DRAWS = 20_000
ProgressCallback = Callable[[int, int], None]


# ------------------------------------------------------------------------------------------
# one engine for both evaluation and solving
# ------------------------------------------------------------------------------------------
class _Calculator:
    """Computes every per-n quantity of a design for arrays of arm sizes."""

    def __init__(self, design: TrialDesign, draws: int, seed: int | None):
        self.design = design
        self.endpoint = design.endpoint
        self.rule = design.benefit_rule
        self.prior = design.benefit_prior
        self.relevant = (None if design.relevant_effect is None
                         else float(self.endpoint.to_benefit(design.relevant_effect)))
        self.cuts = [Cut(0.0)] + ([Cut(self.relevant, inclusive=True)]
                                  if self.relevant is not None else [])
        self.prob_relevant = design.prob_relevant()
        self.engine = design.endpoint.calculator(self.prior, self.rule, draws=draws, seed=seed,
                                                 nuisance=design.sigma_prior)
        self.monte_carlo = self.engine.monte_carlo
        if self.monte_carlo and self.prob_relevant is not None:
            expected = self.prob_relevant * draws
            if expected < 100:
                warnings.warn(
                    f"Only about {expected:.0f} of {draws} Monte Carlo draws fall where the "
                    f"effect is relevant (prior probability {self.prob_relevant:.3g}); "
                    "conditional assurance will be imprecise. Increase the draws.",
                    AssuranceWarning, stacklevel=3)

    def power(self, effect: float, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
        """Classical power at one natural-scale effect, planning nuisance values."""
        return self.engine.power(float(self.endpoint.to_benefit(effect)), n_t, n_c)

    def assurance(self, n_t: np.ndarray, n_c: np.ndarray) -> dict[str, np.ndarray]:
        """Assurance and its decomposition (plus standard errors under Monte Carlo)."""
        res = self.engine.success(n_t, n_c, self.cuts)
        out = {"assurance": res.success, "prob_success_and_benefit": res.joint[0]}
        if res.success_mcse is not None:
            out["assurance_mcse"] = res.success_mcse
            out["prob_success_and_benefit_mcse"] = res.joint_mcse[0]
        if self.relevant is not None:
            # P(relevant) is known exactly from the prior, so the conditional and the miss
            # probability are exact transforms of the joint (and of its standard error).
            joint = res.joint[1]
            out["prob_success_and_relevant"] = joint
            out["prob_miss_relevant"] = np.clip(self.prob_relevant - joint, 0.0, 1.0)
            out["conditional_assurance"] = np.clip(joint / self.prob_relevant, 0.0, 1.0)
            if self.monte_carlo:
                out["prob_success_and_relevant_mcse"] = res.joint_mcse[1]
                out["prob_miss_relevant_mcse"] = res.joint_mcse[1]
                out["conditional_assurance_mcse"] = res.joint_mcse[1] / self.prob_relevant
        return out

    def quantity(self, name: str, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
        if name == "power":
            return self.power(self.design.assumed_effect, n_t, n_c)
        return self.assurance(n_t, n_c)[name]


# ------------------------------------------------------------------------------------------
# evaluate over a grid
# ------------------------------------------------------------------------------------------
def _check_sizes(design: TrialDesign, sizes: Any) -> np.ndarray:
    smallest = design.endpoint.smallest_total
    arr = check_real_array(sizes, "sizes", "evaluate", low=smallest, high=MAX_TOTAL)
    if np.any(arr != np.round(arr)):
        raise AssuranceInputError(
            f"The 'sizes' parameter of evaluate must hold whole numbers of patients. "
            f"Got {sizes!r} instead."
        )
    return np.unique(arr.astype(int))


def evaluate(
    design: TrialDesign,
    sizes: Sequence[int] | np.ndarray,
    *,
    draws: int = DEFAULT_DRAWS,
    seed: int | None = 20260101,
    progress: ProgressCallback | None = None,
) -> Any:
    """Power, assurance, ceiling and success decomposition for each total sample size.

    Parameters
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`).
    sizes
        Total numbers of patients (all arms), whole numbers at or above the smallest size
        the analysis allows. Arms are split by the allocation ratio.
    draws
        Monte Carlo draws, used only when the design has a prior on sigma.
    seed
        Seed for those draws; the same seed gives the same numbers.
    progress
        Optional callback ``progress(done, total)`` called as chunks of the grid finish.

    Returns
    -------
    xarray.Dataset
        Dimension ``n`` with coordinates ``n_treatment`` and ``n_control``; variables
        ``power`` (at the assumed effect), ``power_curve`` (``effect`` x ``n``),
        ``type_one_error`` (success probability at the rule's null value: no effect, the
        non-inferiority margin, or a posterior rule's reference value),
        ``assurance``, ``prob_success_and_benefit`` and, with a relevant effect,
        ``prob_success_and_relevant``, ``conditional_assurance``, ``prob_miss_relevant``;
        ``*_mcse`` Monte Carlo standard errors when sigma is uncertain; scalars ``ceiling``,
        ``prob_benefit``, ``prob_relevant``. ``attrs`` hold the design (JSON), seed, method
        and package version.

    Notes
    -----
    With a normal design prior ``N(m, v)`` and known sigma, assurance for the threshold
    ``c(n)`` is ``Phi((m - c) / sqrt(v + se^2))`` (O'Hagan, Stevens & Campbell 2005); the
    decomposition uses the bivariate normal of (effect, estimate).

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, Normal, TrialDesign, evaluate
    >>> design = TrialDesign(ContinuousEndpoint(sigma=10.0), Normal(4.0, 2.0))
    >>> ds = evaluate(design, [100, 200, 400])
    >>> bool((ds.assurance <= ds.ceiling).all())
    True
    """
    import xarray as xr

    from . import __version__

    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of evaluate must be a TrialDesign. Got {design!r} instead."
        )
    n = _check_sizes(design, sizes)
    draws = check_int(draws, "draws", "evaluate", low=100)
    if seed is not None:
        seed = check_int(seed, "seed", "evaluate", low=0)
    calc = _Calculator(design, draws, seed)
    n_t, n_c = design.endpoint.arm_sizes(n)

    chunks = np.array_split(np.arange(n.size), max(1, math.ceil(n.size / 25))) \
        if calc.monte_carlo else [np.arange(n.size)]
    parts: list[dict[str, np.ndarray]] = []
    for done, idx in enumerate(chunks, start=1):
        parts.append(calc.assurance(n_t[idx], n_c[idx]))
        if progress is not None:
            progress(done, len(chunks))
    per_n = {key: np.concatenate([p[key] for p in parts]) for key in parts[0]}

    effects = np.array(design.curve_effects())
    curve = np.vstack([calc.power(e, n_t, n_c) for e in effects])
    power = curve[int(np.flatnonzero(effects == design.assumed_effect)[0])]

    type_one = calc.engine.power(float(calc.rule.null_value), n_t, n_c)
    data_vars: dict[str, Any] = {"power": ("n", power), "power_curve": (("effect", "n"), curve),
                                 "type_one_error": ("n", type_one)}
    data_vars.update({key: ("n", value) for key, value in per_n.items()})
    data_vars["ceiling"] = ((), design.ceiling())
    data_vars["prob_benefit"] = ((), design.prob_benefit())
    if design.relevant_effect is not None:
        data_vars["prob_relevant"] = ((), design.prob_relevant())
    coords = {"n": n, "n_treatment": ("n", n_t), "n_control": ("n", n_c), "effect": effects}
    coords.update({k: ("n", v) for k, v in design.endpoint.extra_coords(n_t, n_c).items()})
    ds = xr.Dataset(
        data_vars,
        coords=coords,
        attrs={
            "title": design.title,
            "design": json.dumps(design.to_dict()),
            "method": calc.engine.method(),
            "draws": draws if calc.monte_carlo else 0,
            "seed": -1 if seed is None else seed,
            "package_version": __version__,
        },
    )
    _label(ds)
    return ds


_LABELS = {
    "power": "classical power at the assumed effect",
    "power_curve": "classical power at each effect",
    "type_one_error": "P(success) when the true effect is the null value (type I error)",
    "assurance": "assurance: probability of success averaged over the design prior",
    "prob_success_and_benefit": "P(success and the treatment is truly better)",
    "prob_success_and_relevant": "P(success and the effect is clinically relevant)",
    "conditional_assurance": "P(success | effect is clinically relevant)",
    "prob_miss_relevant": "P(no success although the effect is clinically relevant)",
    "ceiling": "highest assurance any sample size can reach",
    "prob_benefit": "prior probability that the treatment is better",
    "prob_relevant": "prior probability that the effect is clinically relevant",
}


def _label(ds: Any) -> None:
    for name, var in ds.data_vars.items():
        base = name.removesuffix("_mcse")
        text = _LABELS.get(base, base)
        var.attrs["long_name"] = f"Monte Carlo standard error of {text}" \
            if name.endswith("_mcse") else text


# ------------------------------------------------------------------------------------------
# solve for n
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SampleSizeAnswer:
    """The smallest sample size that reaches a target, or why none does."""

    quantity: str
    target: float
    reached: bool
    n_total: int | None
    n_treatment: int | None
    n_control: int | None
    achieved: float | None
    achieved_mcse: float | None
    ceiling: float
    message: str

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def _ceiling_for(calc: _Calculator, quantity: str) -> float:
    design = calc.design
    if quantity == "power":
        return calc.rule.limit_success_at(float(design.endpoint.to_benefit(design.assumed_effect)))
    if quantity == "assurance":
        return design.ceiling()
    limit = design.success_limit(effect_above=calc.relevant, inclusive=True)
    return min(limit / calc.prob_relevant, 1.0)


def solve_sample_size(
    design: TrialDesign,
    target: float,
    *,
    quantity: Quantity = "assurance",
    max_total: int = 1_000_000,
    draws: int = DEFAULT_DRAWS,
    seed: int | None = 20260101,
) -> SampleSizeAnswer:
    """Smallest sample size at which ``quantity`` reaches ``target``.

    Sizes are searched on the control arm (whole patients), the treatment arm getting
    ``ceil(allocation * n_control)``; for one group, on the whole sample. The search doubles
    until the target is met, then bisects, so that one patient fewer on control falls short.
    It assumes the probability rises with n, as it does for these rules in practical
    designs. :func:`evaluate` splits the returned total into the same arms.

    A target at or above the ceiling (the limit of the quantity as n grows) is reported as
    not reachable. False positives (successes when the true effect is at or just below the
    lowest passable effect) can lift assurance at moderate n slightly above that limit, by
    at most about alpha times the prior probability of such effects; such a target is still
    reported as not reachable, since no true effect supports it.

    Parameters
    ----------
    design
        The trial.
    target
        Required probability, in (0, 1).
    quantity
        ``"power"`` (at the assumed effect), ``"assurance"`` or ``"conditional_assurance"``
        (mean power over the prior restricted to relevant effects; needs a relevant effect).
    max_total
        Largest total sample size considered.
    draws, seed
        Monte Carlo settings when sigma is uncertain (the same draws serve every n).

    Returns
    -------
    SampleSizeAnswer
        ``reached`` is False, with the reason in ``message``, when the target is at or above
        the ceiling or needs more than ``max_total`` patients.

    Examples
    --------
    >>> from assurance import ContinuousEndpoint, PointMass, TrialDesign, solve_sample_size
    >>> d = TrialDesign(ContinuousEndpoint(sigma=1.0), PointMass(0.5))
    >>> solve_sample_size(d, 0.8, quantity="power").n_control  # Cohen's table: 64 per group
    64
    """
    owner = "solve_sample_size"
    if not isinstance(design, TrialDesign):
        raise AssuranceInputError(
            f"The 'design' parameter of {owner} must be a TrialDesign. Got {design!r} instead."
        )
    target = check_real(target, "target", owner, low=0, high=1, low_open=True, high_open=True)
    check_choice(quantity, "quantity", owner, QUANTITIES)
    if quantity == "conditional_assurance" and design.relevant_effect is None:
        raise AssuranceInputError(
            f"The 'quantity' parameter of {owner} can be 'conditional_assurance' only when the "
            "design has a relevant_effect. Got a design without one."
        )
    max_total = check_int(max_total, "max_total", owner, low=design.endpoint.smallest_total,
                          high=MAX_TOTAL)
    draws = check_int(draws, "draws", owner, low=100)
    calc = _Calculator(design, draws, seed)
    ceiling = _ceiling_for(calc, quantity)
    label = quantity.replace("_", " ")

    def answer(reached: bool, n_c: int | None, message: str) -> SampleSizeAnswer:
        if n_c is None:
            return SampleSizeAnswer(quantity, target, reached, None, None, None, None, None,
                                    ceiling, message)
        n_t_arr, n_c_arr = design.endpoint.sizes_from_control(np.array([n_c]))
        value = calc.quantity(quantity, n_t_arr, n_c_arr)
        mcse = None
        if calc.monte_carlo and quantity != "power":
            mcse = float(calc.assurance(n_t_arr, n_c_arr)[f"{quantity}_mcse"][0])
        return SampleSizeAnswer(quantity, target, reached, int(n_t_arr[0] + n_c_arr[0]),
                                int(n_t_arr[0]), int(n_c_arr[0]), float(value[0]), mcse,
                                ceiling, message)

    if target >= ceiling:
        return answer(False, None,
                      f"Target {label} {target:g} is not reachable: no sample size can pass "
                      f"the ceiling of {ceiling:.3f} (the limit as n grows: the prior "
                      "probability of effects at which the rule can be passed). Lower the "
                      "target or revisit the design.")

    def value_at(n_c: int) -> float:
        n_t_arr, n_c_arr = design.endpoint.sizes_from_control(np.array([n_c]))
        return float(calc.quantity(quantity, n_t_arr, n_c_arr)[0])

    arms = design.endpoint.arms
    low = max(1, math.ceil(design.endpoint.smallest_total / arms))
    while int(np.sum(design.endpoint.sizes_from_control(np.array([low])))) < \
            design.endpoint.smallest_total:
        low += 1
    if value_at(low) >= target:
        return answer(True, low, "Reached at the smallest size the analysis allows.")
    high = low
    limit = _control_limit(design, max_total)
    while value_at(high) < target:
        if high >= limit:
            return answer(False, None,
                          f"Target {label} {target:g} needs more than {max_total} patients "
                          f"(ceiling {ceiling:.3f}).")
        low, high = high, min(2 * high, limit)
    while high - low > 1:
        mid = (low + high) // 2
        if value_at(mid) >= target:
            high = mid
        else:
            low = mid
    return answer(True, high, f"Smallest size reaching {label} {target:g}.")


def _control_limit(design: TrialDesign, max_total: int) -> int:
    ep = design.endpoint
    if ep.layout == "single_arm":
        return max_total
    return max(1, int(max_total / (1 + ep.allocation)))
