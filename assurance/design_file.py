"""Read a TOML design file into a :class:`~assurance.TrialDesign` and run settings.

The file format is this package's own, in plain words. A complete example::

    title = "Invented example: pain score trial"

    [endpoint]
    type = "continuous"
    sd = 10.0               # planning SD of the outcome
    layout = "two_arm"      # or "single_arm"
    allocation = 1.0        # treatment patients per control patient
    analysis = "t"          # "t": SD estimated at the analysis; "z": SD known
    better = "higher"       # or "lower"

    [success]
    alpha = 0.05
    sided = "two"           # two-sided alpha, success only in the favourable direction
    margin = 0.0            # > 0 for non-inferiority
    # min_estimate = 2.0    # observed effect must also reach this

    [effect]
    assumed = 4.0           # classical power is computed here
    relevant = 3.0          # smallest clinically relevant effect
    also_power_at = [2.0, 5.0]

    [design_prior]
    family = "normal"
    mean = 4.0
    sd = 2.5

    [sizes]                 # total patients; or: list = [100, 200, 300]
    from = 20
    to = 600
    step = 20

    [targets]
    power = 0.9
    assurance = 0.7
    conditional_assurance = 0.8

    [monte_carlo]           # used only with an [sd_prior]
    draws = 20000
    seed = 2026

Every unknown key is an error naming the nearest known key.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .errors import AssuranceInputError, DesignFileError

__all__ = ["DesignFile", "read_design_file", "parse_design", "prior_from_table"]

_TOP = {"title", "endpoint", "success", "effect", "design_prior", "sd_prior", "sizes",
        "analysis_prior", "zones", "precision",
        "targets", "monte_carlo"}
_ENDPOINT = {"type", "sd", "layout", "allocation", "analysis", "better"}
_SUCCESS = {"rule", "alpha", "sided", "margin", "min_estimate", "level", "beyond"}
_SUCCESS_BY_RULE = {"significance": {"rule", "alpha", "sided", "margin", "min_estimate"},
                    "posterior_probability": {"rule", "level", "beyond", "min_estimate"}}
_PRECISION = {"length", "coverage", "interval", "criteria", "likely_share"}
_ZONES = {"min_acceptable", "target", "go_min_prob", "go_target_prob", "stop_target_prob"}
_EFFECT = {"assumed", "relevant", "also_power_at"}
_SIZES = {"from", "to", "step", "list"}
_TARGETS = {"power", "assurance", "conditional_assurance"}
_MONTE_CARLO = {"draws", "seed"}
_FAMILIES: dict[str, tuple[str, dict[str, str]]] = {
    # family in file -> (class name, {file key: constructor argument})
    "normal": ("Normal", {"mean": "mean", "sd": "sd"}),
    "student_t": ("StudentT", {"df": "df", "location": "loc", "scale": "scale"}),
    "uniform": ("Uniform", {"lower": "lower", "upper": "upper"}),
    "truncated_normal": ("TruncatedNormal",
                         {"mean": "mean", "sd": "sd", "lower": "lower", "upper": "upper"}),
    "point_mass": ("PointMass", {"value": "value"}),
    "scaled_inv_chi_square": ("ScaledInvChiSquare", {"df": "df", "scale": "scale"}),
    "gamma_precision": ("GammaPrecision", {"shape": "shape", "rate": "rate"}),
}
_OPTIONAL = {"TruncatedNormal": {"lower", "upper"}, "StudentT": {"loc", "scale"}}


@dataclass(frozen=True)
class DesignFile:
    """A parsed design file: the design plus what to compute."""

    design: Any
    sizes: np.ndarray | None
    targets: dict[str, float] = field(default_factory=dict)
    draws: int = 20_000
    seed: int = 20260101
    source: str = ""
    zones: Any = None
    prior_origin: Any = None
    precision: Any = None


def read_design_file(path: str | Path) -> DesignFile:
    """Read and check a TOML design file.

    Raises
    ------
    DesignFileError
        If the file is missing, is not valid TOML, has unknown keys or invalid values; the
        message names the key, the value and what is allowed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> text = '''title = "Demo"
    ... [endpoint]
    ... sd = 10
    ... [design_prior]
    ... family = "normal"
    ... mean = 4
    ... sd = 2
    ... '''
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp, "trial.toml")
    ...     _ = path.write_text(text)
    ...     spec = read_design_file(path)
    >>> spec.design.endpoint.sigma
    10.0
    """
    path = Path(path)
    if not path.is_file():
        raise DesignFileError(f"Design file not found: {str(path)!r}. Check the path.")
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise DesignFileError(f"{path} is not valid TOML: {exc}.") from None
    except UnicodeDecodeError:
        raise DesignFileError(f"{path} is not a UTF-8 text file.") from None
    return parse_design(raw, source=str(path))


def parse_design(raw: dict[str, Any], *, source: str = "design") -> DesignFile:
    """Build a :class:`DesignFile` from an already-parsed TOML mapping."""
    from .design import TrialDesign

    _known(raw, _TOP, "", source)
    for req in ("endpoint", "design_prior"):
        if req not in raw:
            raise DesignFileError(f"{source}: the [{req}] table is missing; it is required.")
    endpoint_t = dict(_table(raw, "endpoint", source))
    effect_assumed = _table(raw, "effect", source, required=False).get("assumed")
    planning_key = _PLANNING_KEYS.get(endpoint_t.get("type", "continuous"))
    if planning_key and planning_key not in endpoint_t and effect_assumed is not None:
        # the effect at which events / variances are planned defaults to [effect] assumed
        endpoint_t[planning_key] = effect_assumed
    endpoint = endpoint_from_table(endpoint_t, source)
    if "sd_prior" in raw and endpoint.to_dict().get("kind") != "continuous":
        raise DesignFileError(f"{source}: [sd_prior] applies to continuous endpoints only.")
    success_t = _table(raw, "success", source, required=False)
    _known(success_t, _SUCCESS, "success", source)
    effect_t = _table(raw, "effect", source, required=False)
    _known(effect_t, _EFFECT, "effect", source)
    sizes_t = _table(raw, "sizes", source, required=False)
    _known(sizes_t, _SIZES, "sizes", source)
    targets_t = _table(raw, "targets", source, required=False)
    _known(targets_t, _TARGETS, "targets", source)
    mc_t = _table(raw, "monte_carlo", source, required=False)
    _known(mc_t, _MONTE_CARLO, "monte_carlo", source)

    rule = _rule_from_table(success_t, source)
    analysis_prior = None
    if "analysis_prior" in raw:
        analysis_prior = prior_from_table(_table(raw, "analysis_prior", source),
                                          "analysis_prior", source, ratio=endpoint.ratio_scale)
    precision = None
    if "precision" in raw:
        from .precision_design import PrecisionPlan

        precision_t = _table(raw, "precision", source)
        _known(precision_t, _PRECISION, "precision", source)
        if "length" not in precision_t:
            raise DesignFileError(f"{source}: [precision] needs 'length' (the target width of "
                                  "the posterior interval).")
        with _as_file_error(source, "precision"):
            options = dict(precision_t)
            if "criteria" in options:
                if not isinstance(options["criteria"], list):
                    raise AssuranceInputError(
                        "The 'criteria' key must be a list such as [\"ALC\", \"WOC\"]. "
                        f"Got {options['criteria']!r} instead.")
                options["criteria"] = tuple(options["criteria"])
            precision = PrecisionPlan(**options)
    zones = None
    if "zones" in raw:
        from .zones import GoConsiderStop

        zones_t = _table(raw, "zones", source)
        _known(zones_t, _ZONES, "zones", source)
        missing = [k for k in ("min_acceptable", "target") if k not in zones_t]
        if missing:
            raise DesignFileError(f"{source}: [zones] needs "
                                  f"{' and '.join(repr(m) for m in missing)}.")
        with _as_file_error(source, "zones"):
            zones = GoConsiderStop(**zones_t)
            zones.check_direction(endpoint)
    prior_t = _table(raw, "design_prior", source)
    if prior_t.get("family") == "beta_rates" and "scale" not in prior_t and hasattr(
            endpoint, "scale"):
        prior_t = {**prior_t, "scale": endpoint.scale}  # the effect scale of the endpoint
    design_prior, prior_origin = prior_with_origin(prior_t, "design_prior", source,
                                                   ratio=endpoint.ratio_scale)
    sd_prior = None
    if "sd_prior" in raw:
        sd_prior = prior_from_table(_table(raw, "sd_prior", source), "sd_prior", source)
    with _as_file_error(source, "effect"):
        also = effect_t.get("also_power_at", [])
        if not isinstance(also, list):
            raise AssuranceInputError(
                f"The 'also_power_at' key must be a list of numbers. Got {also!r} instead."
            )
    with _as_file_error(source, "top level"):
        design = TrialDesign(
            endpoint=endpoint,
            design_prior=design_prior,
            rule=rule,
            assumed_effect=effect_t.get("assumed"),
            relevant_effect=effect_t.get("relevant"),
            sigma_prior=sd_prior,
            analysis_prior=analysis_prior,
            power_effects=tuple(also),
            title=raw.get("title", Path(source).stem or "Untitled trial"),
        )
    sizes = _sizes(sizes_t, source) if sizes_t else None
    smallest = design.endpoint.smallest_total
    if sizes is not None and sizes.min() < smallest:
        raise DesignFileError(
            f"{source}: every entry of 'sizes' must be >= {smallest} (the fewest patients this "
            f"analysis allows). Got {int(sizes.min())}."
        )
    targets: dict[str, float] = {}
    for key, value in targets_t.items():
        if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < value < 1:
            raise DesignFileError(
                f"{source}: 'targets.{key}' must be a probability strictly between 0 and 1. "
                f"Got {value!r}."
            )
        targets[key] = float(value)
    if "conditional_assurance" in targets and design.relevant_effect is None:
        raise DesignFileError(
            f"{source}: 'targets.conditional_assurance' needs 'effect.relevant' (the smallest "
            "clinically relevant effect)."
        )
    draws = _whole(mc_t.get("draws", 20_000), "monte_carlo.draws", source, 100)
    seed = _whole(mc_t.get("seed", 20260101), "monte_carlo.seed", source, 0)
    return DesignFile(design=design, sizes=sizes, targets=targets, draws=draws, seed=seed,
                      source=source, zones=zones, prior_origin=prior_origin,
                      precision=precision)


def _rule_from_table(table: dict[str, Any], source: str) -> Any:
    """``[success]``: ``rule = "significance"`` (default) or ``"posterior_probability"``."""
    from .posterior_rules import AllOf, MinimumEstimate, PosteriorProbability
    from .rules import Significance

    kind = table.get("rule", "significance")
    if kind not in _SUCCESS_BY_RULE:
        raise DesignFileError(f"{source}: 'success.rule' must be one of "
                              f"{', '.join(_SUCCESS_BY_RULE)}. Got {kind!r}.")
    _known(table, _SUCCESS_BY_RULE[kind], "success", source)
    with _as_file_error(source, "success"):
        if kind == "significance":
            return Significance(alpha=table.get("alpha", 0.025), sided=table.get("sided", "one"),
                                margin=table.get("margin", 0.0),
                                min_estimate=table.get("min_estimate"))
        rule = PosteriorProbability(level=table.get("level", 0.975), beyond=table.get("beyond"))
        if table.get("min_estimate") is not None:
            rule = AllOf((rule, MinimumEstimate(table["min_estimate"])))
        return rule


#: endpoint type in a design file -> (module, class); each class has from_design_table
ENDPOINT_TYPES: dict[str, tuple[str, str]] = {
    "continuous": ("assurance.endpoints.continuous", "ContinuousEndpoint"),
    "binary": ("assurance.endpoints.binary", "BinaryEndpoint"),
    "time_to_event": ("assurance.endpoints.survival", "SurvivalEndpoint"),
    "counts": ("assurance.endpoints.counts", "CountEndpoint"),
}


#: endpoint keys that default to ``[effect] assumed`` when absent
_PLANNING_KEYS = {"time_to_event": "assumed_hazard_ratio"}


def endpoint_from_table(table: dict[str, Any], source: str = "design") -> Any:
    """Build the endpoint named by ``type`` in an ``[endpoint]`` table.

    Examples
    --------
    >>> endpoint_from_table({"type": "continuous", "sd": 4.0}).sigma
    4.0
    """
    import importlib

    kind = table.get("type", "continuous")
    if kind not in ENDPOINT_TYPES:
        hint = _did_you_mean(kind, ENDPOINT_TYPES)
        raise DesignFileError(
            f"{source}: 'endpoint.type' must be one of {', '.join(ENDPOINT_TYPES)}. "
            f"Got {kind!r}.{hint}"
        )
    module_name, class_name = ENDPOINT_TYPES[kind]
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError:
        raise DesignFileError(f"{source}: endpoint type {kind!r} is not available in this "
                              "version.") from None
    return getattr(module, class_name).from_design_table(table, source)


def check_endpoint_table(table: Any, known: set[str], kind: str, source: str) -> None:
    """Common checks of an ``[endpoint]`` table: a table, known keys only, the right type."""
    if not isinstance(table, dict):
        raise DesignFileError(f"{source}: [endpoint] must be a table. Got {table!r}.")
    _known(table, known, "endpoint", source)
    given = table.get("type", kind)
    if given != kind:
        raise DesignFileError(f"{source}: 'endpoint.type' must be {kind!r} for this endpoint. "
                              f"Got {given!r}.")


def continuous_from_table(table: dict[str, Any], source: str) -> Any:
    """The ``[endpoint]`` table of a continuous endpoint (keys: ``sd``, ``layout``,
    ``allocation``, ``analysis``, ``better``)."""
    from .endpoints.continuous import ContinuousEndpoint

    check_endpoint_table(table, _ENDPOINT, "continuous", source)
    if "sd" not in table:
        raise DesignFileError(f"{source}: 'endpoint.sd' (the outcome's SD) is required.")
    with _as_file_error(source, "endpoint"):
        return ContinuousEndpoint(
            sigma=table["sd"],
            layout=table.get("layout", "two_arm"),
            allocation=table.get("allocation", 1.0),
            analysis=table.get("analysis", "t"),
            better=table.get("better", "higher"),
        )


def prior_from_table(table: dict[str, Any], where: str, source: str = "design", *,
                     ratio: bool = False) -> Any:
    """Build a prior from a design-file table such as ``{family = "normal", mean = 1, sd = 2}``.

    Mixtures are written ``family = "mixture"`` with ``parts = [{weight = 0.3, family =
    "point_mass", value = 0}, {weight = 0.7, family = "normal", mean = 3, sd = 1}]``.
    Any continuous ``scipy.stats`` distribution: ``family = "scipy"``, ``name = "logistic"``,
    ``parameters = {loc = 1, scale = 0.5}``. For a ratio endpoint (``ratio=True``), whose
    prior is on the log ratio, ``family = "log_normal"`` with ``median`` (a ratio) and
    ``log_sd`` gives a normal prior on the log scale.

    Examples
    --------
    >>> prior_from_table({"family": "normal", "mean": 1.0, "sd": 2.0}, "design_prior")
    normal(mean=1, sd=2)
    """
    from . import priors

    if not isinstance(table, dict):
        raise DesignFileError(f"{source}: [{where}] must be a table. Got {table!r}.")
    family = table.get("family")
    if family is None:
        raise DesignFileError(f"{source}: '{where}.family' is required; choose one of "
                              f"{', '.join(_family_names(ratio))}.")
    if family == "log_normal":
        if not ratio:
            raise DesignFileError(f"{source}: '{where}.family' = 'log_normal' is for ratio "
                                  "endpoints (hazard, rate, risk or odds ratios) only.")
        _known(table, {"family", "median", "log_sd"}, where, source)
        missing = [k for k in ("median", "log_sd") if k not in table]
        if missing:
            raise DesignFileError(f"{source}: '{where}' (log_normal) needs "
                                  f"{', '.join(repr(m) for m in missing)}.")
        median = _number(table["median"], f"{where}.median", source)
        if median <= 0:
            raise DesignFileError(f"{source}: '{where}.median' must be a ratio > 0. "
                                  f"Got {median!r}.")
        with _as_file_error(source, where):
            return priors.Normal(math.log(median), _number(table["log_sd"], f"{where}.log_sd",
                                                           source))
    if family == "mixture":
        _known(table, {"family", "parts"}, where, source)
        parts = table.get("parts")
        if not isinstance(parts, list) or not parts:
            raise DesignFileError(f"{source}: '{where}.parts' must be a non-empty list of "
                                  "tables, each with a weight and a family.")
        comps, weights = [], []
        for i, part in enumerate(parts):
            if not isinstance(part, dict) or "weight" not in part:
                raise DesignFileError(f"{source}: '{where}.parts[{i}]' needs a 'weight'.")
            rest = {k: v for k, v in part.items() if k != "weight"}
            comps.append(prior_from_table(rest, f"{where}.parts[{i}]", source, ratio=ratio))
            weights.append(part["weight"])
        with _as_file_error(source, where):
            return priors.Mixture(comps, weights)
    if family == "scipy":
        _known(table, {"family", "name", "parameters"}, where, source)
        return _scipy_prior(table, where, source)
    if family in _EXTRA_FAMILIES:
        return _EXTRA_FAMILIES[family](table, where, source)
    if family in _EVIDENCE_FAMILIES:
        return prior_with_origin(table, where, source, ratio=ratio)[0]
    if family not in _FAMILIES:
        hint = _did_you_mean(family, _family_names(ratio))
        raise DesignFileError(
            f"{source}: '{where}.family' must be one of "
            f"{', '.join(_family_names(ratio))}. Got {family!r}.{hint}"
        )
    cls_name, mapping = _FAMILIES[family]
    _known(table, {"family", *mapping}, where, source)
    optional = _OPTIONAL.get(cls_name, set())
    missing = [k for k, arg in mapping.items() if k not in table and arg not in optional]
    if missing:
        raise DesignFileError(f"{source}: '{where}' ({family}) needs "
                              f"{', '.join(repr(m) for m in missing)}.")
    kwargs = {mapping[k]: _number(v, f"{where}.{k}", source) for k, v in table.items()
              if k != "family"}
    with _as_file_error(source, where):
        return getattr(priors, cls_name)(**kwargs)


#: families added by endpoint modules: name -> reader(table, where, source)
_EXTRA_FAMILIES: dict[str, Any] = {}

#: priors built from evidence: family -> allowed keys (see prior_with_origin)
_EVIDENCE_FAMILIES = {
    "elicited": {"family", "fit", "quantiles", "intervals", "tolerance", "df"},
    "earlier_trial": {"family", "estimate", "se", "ratio", "log_se", "power_weight",
                      "shrinkage", "robust_weight", "vague_sd", "vague_mean"},
    "meta_analysis": {"family", "estimates", "ses", "method"},
}


def prior_with_origin(table: dict[str, Any], where: str, source: str = "design", *,
                      ratio: bool = False) -> tuple[Any, Any]:
    """A prior built from evidence, with the object that explains it (for the memo).

    Families: ``elicited`` (``fit`` = normal, t, lognormal, beta, gamma or best;
    ``quantiles = [[value, probability], ...]``; optional ``intervals = [[lower, upper,
    probability], ...]``, ``tolerance``, ``df``), ``earlier_trial`` (``estimate`` and ``se``
    on the prior's scale, or for a ratio endpoint ``ratio`` and ``log_se``; discounting by
    ``power_weight``, ``shrinkage``, ``robust_weight`` with ``vague_sd`` and ``vague_mean``),
    ``meta_analysis`` (``estimates``, ``ses``, ``method`` = paule_mandel or
    dersimonian_laird). Other families give ``(prior, None)``.

    Examples
    --------
    >>> prior, fit = prior_with_origin({"family": "elicited", "fit": "normal",
    ...                                 "quantiles": [[2.0, 0.5], [5.0, 0.9]]}, "design_prior")
    >>> round(prior.mean(), 3), fit.family
    (2.0, 'normal')
    """
    family = table.get("family")
    if family not in _EVIDENCE_FAMILIES:
        return prior_from_table(table, where, source, ratio=ratio), None
    _known(table, _EVIDENCE_FAMILIES[family], where, source)
    with _as_file_error(source, where):
        if family == "elicited":
            return _elicited(table, where, source, ratio)
        if family == "earlier_trial":
            return _earlier_trial(table, where, source, ratio)
        return _meta_analysis(table, where, source)


def _pairs(value: Any, key: str, width: int, source: str) -> list[tuple[float, ...]]:
    if not isinstance(value, list) or not all(isinstance(v, list) and len(v) == width
                                              for v in value):
        raise DesignFileError(f"{source}: '{key}' must be a list of [{', '.join(['x'] * width)}]"
                              f" lists. Got {value!r}.")
    return [tuple(_number(x, key, source) for x in v) for v in value]


def _elicited(table: dict[str, Any], where: str, source: str, ratio: bool) -> tuple[Any, Any]:
    from .elicitation import Interval, Quantile, fit_prior

    fit = table.get("fit", "normal")
    if ratio and fit not in ("lognormal", "best"):
        raise DesignFileError(f"{source}: '{where}.fit' must be 'lognormal' for a ratio "
                              f"endpoint (its prior is on the log ratio). Got {fit!r}.")
    if not ratio and fit == "lognormal":
        raise DesignFileError(f"{source}: '{where}.fit' = 'lognormal' is for ratio endpoints; "
                              "use normal, t, beta, gamma or best.")
    statements: list[Any] = [Quantile(v, p) for v, p in
                             _pairs(table.get("quantiles", []), f"{where}.quantiles", 2, source)]
    statements += [Interval(lo, hi, p) for lo, hi, p in
                   _pairs(table.get("intervals", []), f"{where}.intervals", 3, source)]
    kwargs: dict[str, Any] = {}
    if "df" in table:
        kwargs["df"] = _number(table["df"], f"{where}.df", source)
    if "tolerance" in table:
        kwargs["tolerance"] = _number(table["tolerance"], f"{where}.tolerance", source)
    if ratio and fit == "best":
        fit = "lognormal"
    result = fit_prior(statements, family=fit, **kwargs)
    return result.prior, result


def _earlier_trial(table: dict[str, Any], where: str, source: str, ratio: bool
                   ) -> tuple[Any, Any]:
    from .evidence import Estimate, prior_from_estimate

    if ratio and "ratio" in table:
        ratio_value = _number(table["ratio"], f"{where}.ratio", source)
        if ratio_value <= 0:
            raise DesignFileError(f"{source}: '{where}.ratio' must be > 0. Got {ratio_value!r}.")
        value, se_key = math.log(ratio_value), "log_se"
    else:
        if "estimate" not in table:
            raise DesignFileError(f"{source}: '{where}' (earlier_trial) needs 'estimate' and "
                                  "'se'" + (" (or 'ratio' and 'log_se')" if ratio else "") + ".")
        value, se_key = _number(table["estimate"], f"{where}.estimate", source), "se"
    if se_key not in table:
        raise DesignFileError(f"{source}: '{where}' (earlier_trial) needs '{se_key}'.")
    se = _number(table[se_key], f"{where}.{se_key}", source)
    options = {k: _number(table[k], f"{where}.{k}", source)
               for k in ("power_weight", "shrinkage", "robust_weight", "vague_sd", "vague_mean")
               if k in table}
    estimate = Estimate(value, se, "log ratio" if ratio else "effect")
    prior = prior_from_estimate(estimate, **options)
    shown = {"estimate": value, "se": se, **options}
    text = ("Design prior from an earlier trial: "
            + ", ".join(f"{k} {v:g}" for k, v in shown.items())
            + f" (on the {'log ratio' if ratio else 'effect'} scale); result {prior.describe()}.")
    return prior, text


def _meta_analysis(table: dict[str, Any], where: str, source: str) -> tuple[Any, Any]:
    from .evidence import meta_analytic_prior

    estimates = table.get("estimates")
    ses = table.get("ses")
    if not isinstance(estimates, list) or not isinstance(ses, list):
        raise DesignFileError(f"{source}: '{where}' (meta_analysis) needs lists 'estimates' "
                              "and 'ses' of equal length.")
    result = meta_analytic_prior([_number(v, f"{where}.estimates", source) for v in estimates],
                                 [_number(v, f"{where}.ses", source) for v in ses],
                                 method=table.get("method", "paule_mandel"))
    return result.prior, result


def register_prior_family(name: str, reader: Any) -> None:
    """Let an endpoint module add a design-file prior family (e.g. beta priors per arm)."""
    _EXTRA_FAMILIES[name] = reader


def _family_names(ratio: bool) -> list[str]:
    names = [*_FAMILIES, "mixture", "scipy", *_EXTRA_FAMILIES, *_EVIDENCE_FAMILIES]
    return sorted(names + (["log_normal"] if ratio else []))


def _scipy_prior(table: dict[str, Any], where: str, source: str) -> Any:
    from scipy import stats

    from .priors import FromScipy

    name = table.get("name")
    params = table.get("parameters", {})
    dist = getattr(stats, str(name), None)
    if not isinstance(dist, stats.rv_continuous):
        raise DesignFileError(f"{source}: '{where}.name' must name a continuous scipy.stats "
                              f"distribution (e.g. 'logistic', 'gamma'). Got {name!r}.")
    if not isinstance(params, dict):
        raise DesignFileError(f"{source}: '{where}.parameters' must be a table. Got {params!r}.")
    try:
        frozen = dist(**{k: _number(v, f"{where}.parameters.{k}", source)
                         for k, v in params.items()})
        frozen.cdf(0.0)
    except TypeError as exc:
        raise DesignFileError(f"{source}: '{where}.parameters' do not fit scipy.stats.{name}: "
                              f"{exc}.") from None
    if not np.all(np.isfinite(frozen.support())) and not np.isfinite(frozen.mean()):
        raise DesignFileError(f"{source}: scipy.stats.{name} with {params} has no finite mean.")
    return FromScipy(frozen)


def _sizes(t: dict[str, Any], source: str) -> np.ndarray:
    if "list" in t:
        if set(t) - {"list"}:
            raise DesignFileError(f"{source}: give [sizes] either 'list' or 'from'/'to'/'step', "
                                  "not both.")
        values = t["list"]
        if not isinstance(values, list) or not values:
            raise DesignFileError(f"{source}: 'sizes.list' must be a non-empty list of whole "
                                  f"numbers. Got {values!r}.")
        return np.array([_whole(v, "sizes.list", source, 1) for v in values])
    missing = [k for k in ("from", "to") if k not in t]
    if missing:
        raise DesignFileError(f"{source}: [sizes] needs {' and '.join(repr(m) for m in missing)}"
                              " (or a 'list').")
    lo = _whole(t["from"], "sizes.from", source, 1)
    hi = _whole(t["to"], "sizes.to", source, lo)
    step = _whole(t.get("step", max(1, (hi - lo) // 50)), "sizes.step", source, 1)
    if (hi - lo) // step > 5000:
        raise DesignFileError(f"{source}: [sizes] asks for {(hi - lo) // step + 1} sizes; "
                              "use a larger 'step' (at most 5000 sizes).")
    return np.arange(lo, hi + 1, step)


def _whole(value: Any, key: str, source: str, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < low:
        raise DesignFileError(f"{source}: '{key}' must be a whole number >= {low}. "
                              f"Got {value!r}.")
    return int(value)


def _number(value: Any, key: str, source: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        raise DesignFileError(f"{source}: '{key}' must be a finite number. Got {value!r}.")
    return float(value)


def _table(raw: dict[str, Any], key: str, source: str, required: bool = True) -> dict[str, Any]:
    value = raw.get(key, None if required else {})
    if not isinstance(value, dict):
        raise DesignFileError(f"{source}: '{key}' must be a table ([{key}]). Got {value!r}.")
    return value


def _did_you_mean(value: Any, options: Any, cutoff: float = 0.6) -> str:
    """`` Did you mean 'x'?`` for the closest option, or an empty string."""
    close = difflib.get_close_matches(str(value), list(options), n=1, cutoff=cutoff)
    return f" Did you mean {close[0]!r}?" if close else ""


def _known(table: dict[str, Any], allowed: set[str], where: str, source: str) -> None:
    for key in table:
        if key not in allowed:
            hint = _did_you_mean(key, sorted(allowed), cutoff=0.5)
            place = f"[{where}]" if where else "the top level"
            raise DesignFileError(
                f"{source}: unknown key {key!r} in {place}.{hint} Known keys: "
                f"{', '.join(sorted(allowed))}."
            )


_FILE_KEYS = {"sigma": "sd", "loc": "location", "assumed_effect": "effect.assumed",
              "relevant_effect": "effect.relevant", "power_effects": "effect.also_power_at",
              "sigma_prior": "sd_prior"}


class _as_file_error:  # noqa: N801 - used as a context manager
    """Re-raise an input error from a constructor as a design-file error naming the key."""

    def __init__(self, source: str, where: str):
        self.source, self.where = source, where

    def __enter__(self) -> None:
        return None

    def __exit__(self, exc_type, exc, tb) -> bool:
        if exc is not None and isinstance(exc, AssuranceInputError) and not isinstance(
            exc, DesignFileError
        ):
            text = re.sub(r"The '(\w+)' parameter of \w+",
                          lambda m: f"The '{_FILE_KEYS.get(m.group(1), m.group(1))}' key", str(exc))
            raise DesignFileError(f"{self.source} [{self.where}]: {text}") from None
        return False
