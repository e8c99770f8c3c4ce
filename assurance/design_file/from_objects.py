"""The design-file record of a plan made in Python: objects back to tables.

A plan read from a file records that file's own tables. A plan made with the Python classes
is written back here into the same tables and keys, so its output folder also holds a
``design.toml`` that ``assurance plan`` reads to the same numbers. Objects a design file
cannot express (an ``AnyOf`` rule, a prior of a class of one's own, a negated scipy
distribution) give no record: the caller then writes none and says why.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["record_from_plan", "NotExpressible"]


class NotExpressible(Exception):
    """A part of the design has no design-file form."""


def record_from_plan(plan: Any) -> dict[str, Any] | None:
    """The normalised record of ``plan`` (tables by name), or None when not expressible.

    The record is checked by reading it back: a record the reader would refuse is not
    returned.

    Examples
    --------
    >>> import assurance as asr
    >>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0, analysis="z"),
    ...                          asr.Normal(4.0, 2.0), title="Python plan")
    >>> record = record_from_plan(asr.plan(design, sizes=[100, 200]))
    >>> record["endpoint"]["sd"], record["design_prior"]["family"]
    (10.0, 'normal')
    """
    from .reader import parse_design

    try:
        raw = _raw(plan)
    except NotExpressible:
        return None
    try:
        return parse_design(raw, source="design.toml").record
    except ValueError:
        return None


def _raw(plan: Any) -> dict[str, Any]:
    design, settings = plan.design, plan.settings
    endpoint = design.endpoint
    raw: dict[str, Any] = {"title": design.title, "endpoint": _endpoint(endpoint),
                           "success": _rule(design.rule)}
    effect: dict[str, Any] = {"assumed": float(design.assumed_effect),
                              "also_power_at": [float(e) for e in design.power_effects]}
    if design.relevant_effect is not None:
        effect["relevant"] = float(design.relevant_effect)
    raw["effect"] = effect
    raw["design_prior"] = _design_prior(design.design_prior, plan.prior_origin)
    if design.analysis_prior is not None:
        raw["analysis_prior"] = _prior(design.analysis_prior)
    if design.sigma_prior is not None:
        raw["sd_prior"] = _prior(design.sigma_prior)
    if settings.sizes is not None:
        raw["sizes"] = {"list": [int(n) for n in settings.sizes]}
    if settings.planned is not None:
        raw.setdefault("sizes", {})["planned"] = int(settings.planned)
    varied = settings.sensitivity
    if varied is None:
        raw["sensitivity"] = {"show": False}
    else:
        if varied.map_centre_range != 2.0 or tuple(varied.map_spread_range) != (0.25, 4.0):
            raise NotExpressible("sensitivity map ranges other than the defaults")
        raw["sensitivity"] = {"show": True, "centre_shift": float(varied.centre_shift),
                              "spread_factors": [float(f) for f in varied.spread_factors],
                              "weight_change": float(varied.weight_change),
                              "map_centres": int(varied.map_centres),
                              "map_spreads": int(varied.map_spreads)}
    raw["targets"] = {k: float(v) for k, v in settings.targets.items()}
    if settings.zones is not None:
        z = settings.zones
        if z.go_target_prob is None:
            raise NotExpressible("zones without a target probability")
        raw["zones"] = {k: float(getattr(z, k)) for k in (
            "min_acceptable", "target", "go_min_prob", "go_target_prob", "stop_target_prob")}
    if settings.precision is not None:
        p = settings.precision
        raw["precision"] = {"length": p.length, "coverage": p.coverage,
                            "interval": p.interval, "criteria": list(p.criteria),
                            "likely_share": p.likely_share}
    seed = settings.seed
    if seed is None or not isinstance(seed, int) or seed < 0:
        raise NotExpressible("a seed that is not a whole number")
    raw["monte_carlo"] = {"draws": int(settings.draws), "seed": int(seed)}
    return raw


def _design_prior(prior: Any, origin: Any) -> dict[str, Any]:
    """An earlier trial's recipe when the prior came from one (so it can be varied), else the
    prior itself."""
    from ..priors.evidence import DiscountedEstimate

    if not isinstance(origin, DiscountedEstimate) or \
            origin.prior().to_dict() != prior.to_dict():
        return _prior(prior)
    table: dict[str, Any] = {"family": "earlier_trial"}
    if origin.estimate.measure == "log ratio":
        table.update(ratio=math.exp(origin.estimate.value), log_se=origin.estimate.se)
    else:
        table.update(estimate=origin.estimate.value, se=origin.estimate.se)
    for key in ("power_weight", "shrinkage", "robust_weight", "vague_sd", "vague_mean"):
        value = getattr(origin, key)
        if value is not None:
            table[key] = float(value)
    return table


def _endpoint(ep: Any) -> dict[str, Any]:
    from .schema import ENDPOINT_TABLES

    kind = ep.to_dict().get("kind")
    if kind not in ENDPOINT_TABLES:
        raise NotExpressible(f"endpoint {type(ep).__name__}")
    out: dict[str, Any] = {"type": kind}
    for key in ENDPOINT_TABLES[kind].model_fields:
        if key == "type":
            continue
        value = _endpoint_value(ep, kind, key)
        if value is None:
            continue
        out[key] = value
    return out


def _endpoint_value(ep: Any, kind: str, key: str) -> Any:
    if kind == "continuous" and key == "sd":
        return float(ep.sigma)
    if kind == "binary" and key in ("control_rate", "reference_rate"):
        single = ep.layout == "single_arm"
        return float(ep.control_rate) if (key == "reference_rate") == single else None
    value = getattr(ep, key, None)
    if key in ("median_prior", "control_rate_prior"):
        return None if value is None else _prior(value)
    if isinstance(value, tuple):
        return [float(v) for v in value]
    if isinstance(value, bool | str | int):
        return value
    if isinstance(value, float):
        return float(value)
    if value is None:
        return None
    try:
        return float(value)
    except (TypeError, ValueError):
        raise NotExpressible(f"endpoint key {key}") from None


def _rule(rule: Any) -> dict[str, Any]:
    from ..rules.posterior import AllOf, MinimumEstimate, PosteriorProbability
    from ..rules.significance import Significance

    if isinstance(rule, Significance):
        out: dict[str, Any] = {"rule": "significance", "alpha": rule.alpha,
                               "sided": rule.sided, "margin": rule.margin}
        if rule.min_estimate is not None:
            out["min_estimate"] = rule.min_estimate
        return out
    if isinstance(rule, PosteriorProbability) and rule.analysis_prior is None:
        out = {"rule": "posterior_probability", "level": rule.level}
        if rule.beyond is not None:
            out["beyond"] = rule.beyond
        return out
    parts = getattr(rule, "rules", None)
    if isinstance(rule, AllOf) and parts is not None and len(parts) == 2:
        first, second = parts
        if isinstance(first, PosteriorProbability) and isinstance(second, MinimumEstimate):
            out = _rule(first)
            out["min_estimate"] = second.value
            return out
    raise NotExpressible(f"rule {rule!r}")


def _prior(prior: Any) -> dict[str, Any]:
    from ..endpoints.binary import BetaRates
    from ..priors.families import (
        FromScipy,
        GammaPrecision,
        Mixture,
        Normal,
        PointMass,
        ScaledInvChiSquare,
        StudentT,
        TruncatedNormal,
        Uniform,
    )

    if isinstance(prior, Normal | PointMass | Uniform | GammaPrecision):
        return dict(prior.to_dict())
    if isinstance(prior, ScaledInvChiSquare):
        return dict(prior.to_dict())
    if isinstance(prior, StudentT):
        return {"family": "student_t", "df": prior.df, "location": prior.loc,
                "scale": prior.scale}
    if isinstance(prior, TruncatedNormal):
        out = {"family": "truncated_normal", "mean": prior.mu, "sd": prior.sigma}
        for end in ("lower", "upper"):
            value = getattr(prior, end)
            if math.isfinite(value):
                out[end] = value
        return out
    if isinstance(prior, Mixture):
        parts = []
        for weight, part in zip(prior.weights, prior.components, strict=True):
            table = _prior(part)
            if table["family"] in ("mixture", "beta_rates"):
                raise NotExpressible("a mixture inside a mixture")
            parts.append({"weight": float(weight), **table})
        return {"family": "mixture", "parts": parts}
    if isinstance(prior, FromScipy):
        return _scipy(prior)
    if isinstance(prior, BetaRates):
        if prior.negated_copy:
            raise NotExpressible("a negated beta_rates prior")

        def arm(a: Any) -> Any:
            return float(a.value) if a.fixed else [float(a.a), float(a.b)]

        return {"family": "beta_rates", "control": arm(prior.control_arm),
                "treatment": arm(prior.treatment_arm), "scale": prior.scale}
    raise NotExpressible(f"prior {type(prior).__name__}")


def _scipy(prior: Any) -> dict[str, Any]:
    frozen = prior._dist
    if prior._negate:
        raise NotExpressible("a negated scipy distribution")
    dist = frozen.dist
    names = [s.strip() for s in (dist.shapes or "").split(",") if s.strip()]
    names += ["loc", "scale"]
    if len(frozen.args) > len(names):
        raise NotExpressible("scipy arguments")
    parameters = {name: float(v) for name, v in zip(names, frozen.args, strict=False)}
    parameters.update({k: float(v) for k, v in frozen.kwds.items()})
    return {"family": "scipy", "name": dist.name, "parameters": parameters}
