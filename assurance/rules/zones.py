"""Go / consider / stop decisions built on a minimum acceptable value and a target value.

A three-zone rule judges the final estimate against two reference effects: the smallest
effect worth having (minimum acceptable value) and the effect hoped for (target value), in
the spirit of Lalonde et al. (2007, Clinical Pharmacology & Therapeutics 82:21-32). Each
criterion is a posterior probability under the design's analysis prior; with a flat prior it
is a one-sided confidence bound (``P(effect > v) >= p`` iff the one-sided ``p`` lower bound
exceeds ``v``). The defaults are a common choice, not a standard:

* **go** when P(effect better than the minimum acceptable value) >= 0.9 and
  P(effect better than the target) >= 0.5 (the estimate reaches the target);
* **stop** when P(effect better than the target) < 0.1 (the one-sided 90% upper bound falls
  short of the target);
* **consider** otherwise.

Every criterion is a threshold on the estimate, so each zone's probability under the design
prior (and at fixed effects: the operating characteristic curves) comes from the same
machinery as assurance. Zone probabilities sum to one for every n and every effect.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import check_real, check_real_array
from ..errors import AssuranceInputError
from .posterior import AllOf, AnyOf, PosteriorProbability

__all__ = ["GoConsiderStop", "evaluate_zones"]


@dataclass(frozen=True)
class GoConsiderStop:
    """Three-zone decision rule (natural scale: differences, or ratios for ratio endpoints).

    Parameters
    ----------
    min_acceptable
        Minimum acceptable effect.
    target
        Target effect; must be better than ``min_acceptable`` (larger when higher is better,
        smaller when lower is better).
    go_min_prob
        Go needs P(effect better than ``min_acceptable``) at least this, in (0, 1).
    go_target_prob
        ... and P(effect better than ``target``) at least this (None: not required).
    stop_target_prob
        Stop when P(effect better than ``target``) is below this; must be below
        ``go_target_prob`` so that the zones cannot overlap.

    Examples
    --------
    >>> zones = GoConsiderStop(min_acceptable=2.0, target=4.0)
    >>> zones.go_min_prob, zones.go_target_prob, zones.stop_target_prob
    (0.9, 0.5, 0.1)
    """

    min_acceptable: float
    target: float
    go_min_prob: float = 0.9
    go_target_prob: float | None = 0.5
    stop_target_prob: float = 0.1

    def __post_init__(self) -> None:
        owner = "GoConsiderStop"
        put = object.__setattr__
        put(self, "min_acceptable", check_real(self.min_acceptable, "min_acceptable", owner))
        put(self, "target", check_real(self.target, "target", owner))
        for name in ("go_min_prob", "stop_target_prob"):
            put(self, name, check_real(getattr(self, name), name, owner, low=0, high=1,
                                       low_open=True, high_open=True))
        if self.go_target_prob is not None:
            put(self, "go_target_prob", check_real(self.go_target_prob, "go_target_prob",
                                                   owner, low=0, high=1, low_open=True,
                                                   high_open=True))
            if not self.stop_target_prob < self.go_target_prob:
                raise AssuranceInputError(
                    f"The 'stop_target_prob' parameter of {owner} must be below "
                    f"go_target_prob={self.go_target_prob:g}, or the go and stop zones would "
                    f"overlap. Got {self.stop_target_prob!r} instead."
                )

    def check_direction(self, endpoint: Any) -> None:
        """The target must be better than the minimum acceptable value for this endpoint."""
        if not endpoint.to_benefit(self.target) > endpoint.to_benefit(self.min_acceptable):
            word = "above" if endpoint.better == "higher" else "below"
            raise AssuranceInputError(
                f"The 'target' parameter of GoConsiderStop must be {word} min_acceptable="
                f"{self.min_acceptable:g} for an endpoint where {endpoint.better} is better. "
                f"Got {self.target!r} instead."
            )

    def go_rule(self) -> Any:
        """Rule whose success is "go" (natural scale)."""
        first = PosteriorProbability(self.go_min_prob, beyond=self.min_acceptable)
        if self.go_target_prob is None:
            return first
        return AllOf((first, PosteriorProbability(self.go_target_prob, beyond=self.target)))

    def not_stop_rule(self) -> Any:
        """Rule whose success is "not stop". Go always counts as not stop."""
        return AnyOf((PosteriorProbability(self.stop_target_prob, beyond=self.target),
                      self.go_rule()))

    def describe(self) -> str:
        go = f"P(better than {self.min_acceptable:g}) >= {self.go_min_prob:g}"
        if self.go_target_prob is not None:
            go += f" and P(better than {self.target:g}) >= {self.go_target_prob:g}"
        return (f"go if {go}; stop if P(better than {self.target:g}) < "
                f"{self.stop_target_prob:g}; consider otherwise")

    def to_dict(self) -> dict[str, Any]:
        return {"min_acceptable": self.min_acceptable, "target": self.target,
                "go_min_prob": self.go_min_prob, "go_target_prob": self.go_target_prob,
                "stop_target_prob": self.stop_target_prob}


def evaluate_zones(
    design: Any,
    zones: GoConsiderStop,
    sizes: Sequence[int] | np.ndarray,
    *,
    effects: Sequence[float] | None = None,
    draws: int = 20_000,
    seed: int | None = 20260101,
) -> Any:
    """Probability of go, consider and stop for each total sample size.

    Parameters
    ----------
    design
        The trial (:class:`~assurance.TrialDesign`); its analysis prior is used for the
        posterior probabilities, its design prior for the zone probabilities.
    zones
        The three-zone rule.
    sizes
        Total sample sizes.
    effects
        Fixed true effects (natural scale) for the operating characteristic curves; default:
        no effect, the minimum acceptable value, the target and the assumed effect.
    draws, seed
        Monte Carlo settings when the design needs them.

    Returns
    -------
    xarray.Dataset
        ``prob_go``, ``prob_consider``, ``prob_stop`` over ``n`` (design prior; with
        ``*_mcse`` under Monte Carlo) and ``oc_go``, ``oc_consider``, ``oc_stop`` over
        (``zone_effect``, ``n``).

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.0))
    >>> ds = evaluate_zones(design, GoConsiderStop(2.0, 4.0), [100, 400])
    >>> bool(np.allclose(ds.prob_go + ds.prob_consider + ds.prob_stop, 1.0))
    True
    """
    import xarray as xr

    from .._validation import MAX_DRAWS, MAX_TOTAL, check_int

    draws = check_int(draws, "draws", "evaluate_zones", low=100, high=MAX_DRAWS)
    if not isinstance(zones, GoConsiderStop):
        raise AssuranceInputError(
            f"The 'zones' parameter of evaluate_zones must be a GoConsiderStop. "
            f"Got {zones!r} instead."
        )
    endpoint = design.endpoint
    zones.check_direction(endpoint)
    n = np.unique(check_real_array(sizes, "sizes", "evaluate_zones",
                                   low=endpoint.smallest_total, high=MAX_TOTAL).astype(np.int64))
    n_t, n_c = endpoint.arm_sizes(n)
    no_effect = 1.0 if endpoint.ratio_scale else 0.0
    if effects is None:
        effects = sorted({no_effect, zones.min_acceptable, zones.target,
                          float(design.assumed_effect)})
    effects = check_real_array(effects, "effects", "evaluate_zones")
    prior_b = design.benefit_prior
    out: dict[str, Any] = {}
    curves: dict[str, np.ndarray] = {}
    for name, rule in (("go", zones.go_rule()), ("not_stop", zones.not_stop_rule())):
        rule_b = endpoint.benefit_rule(rule, design.analysis_prior)
        calc = endpoint.calculator(prior_b, rule_b, draws=draws, seed=seed,
                                   nuisance=design.sigma_prior)
        res = calc.success(n_t, n_c, [])
        out[name] = res.success
        if res.success_mcse is not None:
            out[f"{name}_mcse"] = res.success_mcse
        curves[name] = np.vstack([calc.power(float(endpoint.to_benefit(e)), n_t, n_c)
                                  for e in effects])
    go, not_stop = out["go"], np.maximum(out["not_stop"], out["go"])
    data = {
        "prob_go": ("n", go),
        "prob_consider": ("n", np.clip(not_stop - go, 0.0, 1.0)),
        "prob_stop": ("n", np.clip(1.0 - not_stop, 0.0, 1.0)),
        "oc_go": (("zone_effect", "n"), curves["go"]),
        "oc_consider": (("zone_effect", "n"),
                        np.clip(np.maximum(curves["not_stop"], curves["go"]) - curves["go"],
                                0.0, 1.0)),
        "oc_stop": (("zone_effect", "n"),
                    np.clip(1.0 - np.maximum(curves["not_stop"], curves["go"]), 0.0, 1.0)),
    }
    if "go_mcse" in out:
        data["prob_go_mcse"] = ("n", out["go_mcse"])
        data["prob_stop_mcse"] = ("n", out["not_stop_mcse"])
    ds = xr.Dataset(data, coords={"n": n, "n_treatment": ("n", n_t), "n_control": ("n", n_c),
                                  "zone_effect": np.asarray(effects, dtype=float)},
                    attrs={"zones": zones.describe()})
    labels = {"prob_go": "P(go) under the design prior",
              "prob_consider": "P(consider) under the design prior",
              "prob_stop": "P(stop) under the design prior",
              "oc_go": "P(go) at each fixed effect",
              "oc_consider": "P(consider) at each fixed effect",
              "oc_stop": "P(stop) at each fixed effect"}
    for name, text in labels.items():
        ds[name].attrs["long_name"] = text
    return ds
