"""The design file's schema: every table and key, in one place.

Each key is declared once, with its type, default, allowed values or range, the endpoint or
rule it belongs to, the scale on which it is read, and one sentence of help. From these
declarations come the reader's structural checks (all problems of a file in one pass), the
normalised record of a design (``design.toml`` in the output folder), the key reference
page ``docs/design-file.md`` and the JSON Schema for editors
(``docs/design-file.schema.json``); see :mod:`assurance.design_file.reference`.

Keys are checked strictly: numbers must be numbers (``10`` or ``10.0``, never ``"10"``),
finite, and inside their range; flags are ``true`` or ``false``; titles are one line of plain
text (no control characters, at most 200 characters); a key this schema does not declare is
an error that lists the declared keys and names one of close spelling, if there is one.
What one table alone cannot decide (a hazard ratio prior on a continuous endpoint, a relevant
effect with no prior mass beyond it, a binary effect that gives a response rate outside
[0, 1]) is checked when the design is built, in :mod:`assurance.design_file.reader`.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal, Union

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    WithJsonSchema,
    create_model,
    field_validator,
    model_validator,
)

from .._validation import MAX_DRAWS, MAX_TOTAL

__all__ = [
    "DesignFileModel",
    "ENDPOINT_TABLES",
    "MODEL_TABLES",
    "PRIOR_TABLES",
    "RULE_TABLES",
    "TAGGED",
    "EFFECT_SCALES",
]

#: How ``[effect]`` values, rule thresholds and prior parameters are read, per endpoint.
EFFECT_SCALES = {
    "continuous": "difference in means (treatment minus control), in the outcome's unit; "
                  "priors on the same difference",
    "binary": "difference in response rates, risk ratio or odds ratio (the endpoint's "
              "'scale'); priors on the difference or on the log of the ratio",
    "time_to_event": "hazard ratio (treatment over control); priors on the log hazard ratio "
                     "(or 'log_normal' with a median ratio)",
    "counts": "rate ratio (treatment over control); priors on the log rate ratio (or "
              "'log_normal' with a median ratio)",
}

#: the two scales of the reference page's "Scales" section
_EFFECT_SCALE_TEXT = "natural effect scale"
_PRIOR_SCALE_TEXT = "prior scale"


class Table(BaseModel):
    """A table of a design file: known keys only, strict types, finite numbers."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False,
                              populate_by_name=True, frozen=True, defer_build=True)


def key(default: Any = ..., help: str = "", *, scale: str | None = None,
        applies: str | None = None, alias: str | None = None, **constraints: Any) -> Any:
    """Declare one key: its default (``...`` when required), help, scale and constraints."""
    extra: dict[str, Any] = {}
    if scale is not None:
        extra["x-scale"] = scale
    if applies is not None:
        extra["x-applies-to"] = applies
    if "default_factory" in constraints:
        return Field(description=help, alias=alias, json_schema_extra=extra or None,
                     **constraints)
    return Field(default, description=help, alias=alias, json_schema_extra=extra or None,
                 **constraints)


#: Longest title, in characters (TrialDesign has the same bound).
MAX_TITLE = 200
#: Longest unit name, in characters (the endpoints have the same bound).
MAX_UNIT = 40
#: Longest scipy.stats name or parameter name (the longest scipy name has 18 characters).
MAX_NAME = 40


def _first_control(text: str) -> int | None:
    """Index of the first control character (C0 but tab, DEL, C1), or None."""
    for i, ch in enumerate(text):
        if (ch < " " and ch != "\t") or "\x7f" <= ch <= "\x9f":
            return i
    return None


def _plain_text(value: str) -> str:
    """Text on one line: no control characters (shown escaped, never raw), not blank."""
    at = _first_control(value)
    if at is not None:
        raise ValueError(f"must be plain text on one line without control characters; "
                         f"character {at + 1} is {ascii(value[at])}")
    if not value.strip():
        raise ValueError("must not be blank")
    return value


#: JSON Schema pattern for the same rule (editors check it as you type)
_PLAIN_PATTERN = "^[^\\u0000-\\u0008\\u000a-\\u001f\\u007f-\\u009f]*$"
Title = Annotated[str, Field(min_length=1, max_length=MAX_TITLE,
                             json_schema_extra={"pattern": _PLAIN_PATTERN}),
                  AfterValidator(_plain_text)]
Unit = Annotated[str, Field(min_length=1, max_length=MAX_UNIT,
                            json_schema_extra={"pattern": _PLAIN_PATTERN}),
                 AfterValidator(_plain_text)]
#: a scipy.stats name or parameter name: letters, digits and underscores
ScipyName = Annotated[str, Field(min_length=1, max_length=MAX_NAME,
                                 pattern=r"^[A-Za-z_][A-Za-z0-9_]*$")]

Positive = Annotated[float, Field(gt=0)]
Probability = Annotated[float, Field(gt=0, lt=1)]
Pair = Annotated[list[Positive], Field(min_length=2, max_length=2)]
_RATE_OR_PAIR_SCHEMA = WithJsonSchema({
    "anyOf": [{"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1},
              {"type": "array", "items": {"type": "number", "exclusiveMinimum": 0},
               "minItems": 2, "maxItems": 2}]})
_HAZARD_SCHEMA = WithJsonSchema({
    "anyOf": [{"type": "number", "exclusiveMinimum": 0},
              {"type": "array", "items": {"type": "number", "exclusiveMinimum": 0},
               "minItems": 1}]})


def _is_number(value: Any) -> bool:
    import math

    return (isinstance(value, int | float) and not isinstance(value, bool)
            and math.isfinite(value))


def _tag(field: str, prefix: str, default: str | None = None) -> Any:
    """Discriminator reading ``field`` (``type``, ``family``, ``rule``) of a table."""
    def get(value: Any) -> str | None:
        found = value.get(field, default) if isinstance(value, dict) else getattr(
            value, field, default)
        if found is None and isinstance(value, dict):
            return f"{prefix}:"  # no such key: reported as required, with the choices
        if not isinstance(found, str):
            return None
        return f"{prefix}:{found}"
    return Discriminator(get)


# ------------------------------------------------------------------------------------------
# priors
# ------------------------------------------------------------------------------------------
class NormalPrior(Table):
    """Normal prior."""

    family: Literal["normal"] = key("normal", "Normal distribution.")
    mean: float = key(help="Mean.", scale=_PRIOR_SCALE_TEXT)
    sd: Positive = key(help="Standard deviation, > 0.", scale=_PRIOR_SCALE_TEXT)


class LogNormalPrior(Table):
    """Log-normal prior on a ratio (ratio endpoints only)."""

    family: Literal["log_normal"] = key("log_normal", "Log-normal belief about a ratio.")
    median: Positive = key(help="Median of the ratio, > 0.", scale="ratio")
    log_sd: Positive = key(help="SD of the log ratio, > 0.", scale="log ratio")


class StudentTPrior(Table):
    """Student t prior."""

    family: Literal["student_t"] = key("student_t", "Student t distribution.")
    df: Positive = key(help="Degrees of freedom, > 0.")
    location: float = key(0.0, "Centre.", scale=_PRIOR_SCALE_TEXT)
    scale: Positive = key(1.0, "Scale, > 0.", scale=_PRIOR_SCALE_TEXT)


class UniformPrior(Table):
    """Uniform prior."""

    family: Literal["uniform"] = key("uniform", "Uniform distribution.")
    lower: float = key(help="Lower end.", scale=_PRIOR_SCALE_TEXT)
    upper: float = key(help="Upper end, above 'lower'.", scale=_PRIOR_SCALE_TEXT)

    @model_validator(mode="after")
    def _ordered(self) -> UniformPrior:
        if not self.upper > self.lower:
            raise ValueError(f"'upper' ({self.upper:g}) must be above 'lower' "
                             f"({self.lower:g})")
        return self


class TruncatedNormalPrior(Table):
    """Normal prior restricted to an interval."""

    family: Literal["truncated_normal"] = key("truncated_normal",
                                              "Normal distribution cut to [lower, upper].")
    mean: float = key(help="Mean before truncation.", scale=_PRIOR_SCALE_TEXT)
    sd: Positive = key(help="SD before truncation, > 0.", scale=_PRIOR_SCALE_TEXT)
    lower: float | None = key(None, "Lower end (none: unbounded).", scale=_PRIOR_SCALE_TEXT)
    upper: float | None = key(None, "Upper end (none: unbounded).", scale=_PRIOR_SCALE_TEXT)


class PointMassPrior(Table):
    """All the probability on one value."""

    family: Literal["point_mass"] = key("point_mass", "All probability on one value.")
    value: float = key(help="The value.", scale=_PRIOR_SCALE_TEXT)


class ScaledInvChiSquarePrior(Table):
    """Prior on a standard deviation (sd_prior)."""

    family: Literal["scaled_inv_chi_square"] = key(
        "scaled_inv_chi_square", "Scaled inverse chi-square on the variance (for sd_prior).")
    df: Positive = key(help="Degrees of freedom (the SD's weight, like a pilot study's df).")
    scale: Positive = key(help="Central value of the SD.", scale="outcome unit")


class GammaPrecisionPrior(Table):
    """Gamma prior on the precision 1/SD^2 (sd_prior)."""

    family: Literal["gamma_precision"] = key("gamma_precision",
                                             "Gamma on the precision 1/SD^2 (for sd_prior).")
    shape: Positive = key(help="Shape, > 0.")
    rate: Positive = key(help="Rate, > 0.", scale="outcome unit squared")


def _scipy_names(schema: dict[str, Any]) -> None:
    """The allowed scipy.stats names, for editors (read when the JSON Schema is made)."""
    from ..priors.families import FAST_SCIPY_DISTRIBUTIONS

    schema["enum"] = sorted(FAST_SCIPY_DISTRIBUTIONS)
    schema.pop("pattern", None)


class ScipyPrior(Table):
    """A continuous distribution of scipy.stats with fast distribution and quantile functions.

    Only distributions whose distribution and quantile functions are closed form or fast
    special functions are allowed (listed below); the others (levy_stable,
    studentized_range, ...) compute them numerically at every point and can take hours over
    a plan. The parameters are checked by name: each must be a number in the range scipy
    allows (scale > 0), and the quantiles must be finite.
    """

    family: Literal["scipy"] = key("scipy", "A continuous scipy.stats distribution by name.")
    name: Annotated[ScipyName, WithJsonSchema(
        {"type": "string", "maxLength": MAX_NAME})] = Field(
        description="Name in scipy.stats, e.g. 'logistic' or 'gamma' (see the list below "
        "the table).",
        json_schema_extra=_scipy_names)
    parameters: Annotated[dict[ScipyName, float], Field(max_length=12)] = key(
        {}, "Its parameters by name (shapes, loc, scale), e.g. { a = 36.0, scale = 0.0167 }.",
        scale=_PRIOR_SCALE_TEXT)


class BetaRatesPrior(Table):
    """Beta priors on each arm's response rate (binary endpoints)."""

    family: Literal["beta_rates"] = key("beta_rates",
                                        "Beta priors on the response rate of each arm.")
    control: Annotated[Any, _RATE_OR_PAIR_SCHEMA] = key(
        help="Control arm: a beta pair [a, b], or a fixed rate in (0, 1).", applies="binary")
    treatment: Annotated[Any, _RATE_OR_PAIR_SCHEMA] = key(
        help="Treatment arm: a beta pair [a, b], or a fixed rate in (0, 1).",
        applies="binary")
    scale: Literal["difference", "risk_ratio", "odds_ratio"] | None = key(
        None, "Effect scale; must agree with the endpoint's 'scale' (none: the endpoint's).",
        applies="binary")

    @field_validator("control", "treatment")
    @classmethod
    def _arm(cls, value: Any) -> Any:
        if _is_number(value):
            if not 0 < value < 1:
                raise ValueError(f"a fixed rate must lie in (0, 1); got {value!r}")
            return float(value)
        if (isinstance(value, list) and len(value) == 2 and all(_is_number(v) and v > 0
                                                                for v in value)):
            return [float(v) for v in value]
        raise ValueError(f"must be a pair [a, b] of beta parameters > 0 or a fixed rate in "
                         f"(0, 1); got {value!r}")


class ElicitedPrior(Table):
    """A prior fitted to experts' judgements."""

    family: Literal["elicited"] = key("elicited", "Fitted to experts' quantiles and intervals.")
    fit: Literal["normal", "t", "lognormal", "beta", "gamma", "best"] = key(
        "normal", "Family to fit ('lognormal' and 'best' for ratio endpoints).")
    quantiles: list[Annotated[list[float], Field(min_length=2, max_length=2)]] = key(
        [], "Judged quantiles as [value, probability] pairs.", scale=_EFFECT_SCALE_TEXT)
    intervals: list[Annotated[list[float], Field(min_length=3, max_length=3)]] = key(
        [], "Judged intervals as [lower, upper, probability] triples.",
        scale=_EFFECT_SCALE_TEXT)
    tolerance: Positive | None = key(None, "Largest acceptable miss of a judged probability "
                                     "(none: 0.05).")
    df: Positive | None = key(None, "Degrees of freedom for fit = 't' (none: fitted).")


class EarlierTrialPrior(Table):
    """A prior from an earlier trial's estimate, discounted."""

    family: Literal["earlier_trial"] = key("earlier_trial",
                                           "From an earlier trial's estimate, discounted.")
    estimate: float | None = key(None, "The earlier estimate (not for ratio endpoints given "
                                 "by 'ratio').", scale=_PRIOR_SCALE_TEXT)
    se: Positive | None = key(None, "Its standard error.", scale=_PRIOR_SCALE_TEXT)
    ratio: Positive | None = key(None, "For ratio endpoints: the earlier ratio estimate.",
                                 scale="ratio")
    log_se: Positive | None = key(None, "For ratio endpoints: SE of the log ratio.",
                                  scale="log ratio")
    power_weight: Annotated[float, Field(gt=0, le=1)] = key(
        1.0, "Share of the earlier information kept (power prior weight), in (0, 1].")
    shrinkage: Annotated[float, Field(ge=0, le=1)] = key(
        1.0, "Factor pulling the estimate toward no effect, in [0, 1].")
    robust_weight: Annotated[float, Field(ge=0, le=1)] = key(
        1.0, "Weight of the informative part; the rest goes to a vague part.")
    vague_sd: Positive | None = key(None, "SD of the vague part (needed when robust_weight < 1).",
                                    scale=_PRIOR_SCALE_TEXT)
    vague_mean: float | None = key(None, "Centre of the vague part (none: no effect).",
                                   scale=_PRIOR_SCALE_TEXT)

    @model_validator(mode="after")
    def _one_form(self) -> EarlierTrialPrior:
        plain = self.estimate is not None or self.se is not None
        ratio = self.ratio is not None or self.log_se is not None
        if plain and ratio:
            raise ValueError("give either 'estimate' and 'se', or 'ratio' and 'log_se', "
                             "not both")
        if ratio and (self.ratio is None or self.log_se is None):
            raise ValueError("the ratio form needs both 'ratio' and 'log_se'")
        if not ratio and (self.estimate is None or self.se is None):
            raise ValueError("needs 'estimate' and 'se' (or, for a ratio endpoint, 'ratio' "
                             "and 'log_se')")
        return self


class MetaAnalysisPrior(Table):
    """A meta-analytic prior from several earlier studies."""

    family: Literal["meta_analysis"] = key("meta_analysis",
                                           "Predictive distribution of a new study's effect.")
    estimates: list[float] = key(help="One estimate per earlier study (at least two).",
                                 scale=_PRIOR_SCALE_TEXT, min_length=2)
    ses: list[Positive] = key(help="Their standard errors, in the same order.",
                              scale=_PRIOR_SCALE_TEXT, min_length=2)
    method: Literal["paule_mandel", "dersimonian_laird"] = key(
        "paule_mandel", "Estimator of the between-study variance.")

    @model_validator(mode="after")
    def _same_length(self) -> MetaAnalysisPrior:
        if len(self.estimates) != len(self.ses):
            raise ValueError(f"'estimates' ({len(self.estimates)}) and 'ses' "
                             f"({len(self.ses)}) must have the same length")
        return self


_SIMPLE_PRIORS: dict[str, type[Table]] = {
    "normal": NormalPrior,
    "log_normal": LogNormalPrior,
    "student_t": StudentTPrior,
    "uniform": UniformPrior,
    "truncated_normal": TruncatedNormalPrior,
    "point_mass": PointMassPrior,
    "scaled_inv_chi_square": ScaledInvChiSquarePrior,
    "gamma_precision": GammaPrecisionPrior,
    "scipy": ScipyPrior,
}
_EVIDENCE_PRIORS: dict[str, type[Table]] = {
    "elicited": ElicitedPrior,
    "earlier_trial": EarlierTrialPrior,
    "meta_analysis": MetaAnalysisPrior,
}

#: mixture parts: each simple family with a weight
_PARTS: dict[str, type[Table]] = {
    name: create_model(f"{cls.__name__}Part", __base__=cls, __doc__=cls.__doc__,
                       weight=(Annotated[float, Field(gt=0, le=1)],
                               key(help="Weight of this part, in (0, 1]; the weights of all "
                                   "parts sum to 1.")))
    for name, cls in _SIMPLE_PRIORS.items()
}

PartTable = Annotated[
    Union[tuple(Annotated[cls, Tag(f"part:{name}")]  # noqa: UP007 - built from a tuple
                for name, cls in _PARTS.items())],
    _tag("family", "part"),
]


class MixturePrior(Table):
    """A weighted mixture of simple priors (e.g. a point mass at no effect plus a normal)."""

    family: Literal["mixture"] = key("mixture", "Weighted mixture of simple priors.")
    parts: list[PartTable] = key(help="The parts: inline tables, each with a 'weight' and a "
                                 "'family' with its keys.", min_length=1)


PRIOR_TABLES: dict[str, type[Table]] = {
    **_SIMPLE_PRIORS, "mixture": MixturePrior, "beta_rates": BetaRatesPrior,
    **_EVIDENCE_PRIORS,
}

PriorTable = Annotated[
    Annotated[NormalPrior, Tag("prior:normal")]
    | Annotated[LogNormalPrior, Tag("prior:log_normal")]
    | Annotated[StudentTPrior, Tag("prior:student_t")]
    | Annotated[UniformPrior, Tag("prior:uniform")]
    | Annotated[TruncatedNormalPrior, Tag("prior:truncated_normal")]
    | Annotated[PointMassPrior, Tag("prior:point_mass")]
    | Annotated[ScaledInvChiSquarePrior, Tag("prior:scaled_inv_chi_square")]
    | Annotated[GammaPrecisionPrior, Tag("prior:gamma_precision")]
    | Annotated[ScipyPrior, Tag("prior:scipy")]
    | Annotated[MixturePrior, Tag("prior:mixture")]
    | Annotated[BetaRatesPrior, Tag("prior:beta_rates")]
    | Annotated[ElicitedPrior, Tag("prior:elicited")]
    | Annotated[EarlierTrialPrior, Tag("prior:earlier_trial")]
    | Annotated[MetaAnalysisPrior, Tag("prior:meta_analysis")],
    _tag("family", "prior"),
]

# ------------------------------------------------------------------------------------------
# endpoints
# ------------------------------------------------------------------------------------------
_ALLOCATION = "Patients on treatment per patient on control (two arms), > 0."


class ContinuousTable(Table):
    """A normally distributed outcome."""

    type: Literal["continuous"] = key("continuous", "Outcome measured on a scale.")
    sd: Positive = key(help="Planning SD of the outcome (of the change, for one arm).",
                       scale="outcome unit")
    layout: Literal["two_arm", "single_arm"] = key(
        "two_arm", "Two parallel arms, or one arm (or paired changes) against a reference.")
    allocation: Positive = key(1.0, _ALLOCATION)
    analysis: Literal["t", "z"] = key(
        "t", "'t': the SD is estimated at the analysis; 'z': the SD is taken as known.")
    better: Literal["higher", "lower"] = key("higher", "Which direction of the effect is good.")
    unit: Unit | None = key(None, "The outcome's unit for the memo and figures, e.g. 'metres' "
                            "(labels only).")


class BinaryTable(Table):
    """A yes/no response."""

    type: Literal["binary"] = key("binary", "Response (yes/no) outcome.")
    control_rate: Probability | None = key(None, "Planning response rate on control (two "
                                           "arms); give this or reference_rate.")
    reference_rate: Probability | None = key(None, "Fixed reference rate (one arm); give this "
                                             "or control_rate.")
    layout: Literal["two_arm", "single_arm"] | None = key(
        None, "Two arms or one (none: one arm with reference_rate, two with control_rate).")
    allocation: Positive = key(1.0, _ALLOCATION)
    scale: Literal["difference", "risk_ratio", "odds_ratio"] = key(
        "difference", "Scale of the effect: rate difference, risk ratio or odds ratio.")
    test: Literal["z", "unpooled_z", "chi_square", "fisher_exact", "exact_binomial"] = key(
        "z", "Test at the analysis: 'z' pools the rates for the variance, 'unpooled_z' uses "
        "each arm's own (two arms), 'exact_binomial' is for one arm; power by exact "
        "enumeration.")
    continuity_correction: bool = key(False, "Continuity correction for the z, unpooled z or "
                                      "chi-square test.")
    better: Literal["higher", "lower"] = key("higher", "Whether a higher response rate is good.")
    control_prior: Pair | None = key(None, "Beta pair [a, b] for the control rate when the "
                                     "design prior is on the effect alone.")
    exact_up_to: Annotated[int, Field(ge=1)] = key(
        500, "Largest arm size enumerated exactly; beyond it a normal approximation.")

    @model_validator(mode="after")
    def _one_rate(self) -> BinaryTable:
        given = [k for k in ("control_rate", "reference_rate") if getattr(self, k) is not None]
        if len(given) != 1:
            raise ValueError("needs exactly one of 'control_rate' (two arms) and "
                             f"'reference_rate' (one arm); got {' and '.join(given) or 'neither'}")
        if given == ["reference_rate"] and self.layout == "two_arm":
            raise ValueError("'reference_rate' is for one arm; use 'control_rate' for two arms")
        return self


class TimeToEventTable(Table):
    """Time to an event, compared by the hazard ratio."""

    type: Literal["time_to_event"] = key("time_to_event", "Time to an event (log-rank test).")
    assumed_hazard_ratio: Positive | None = key(
        None, "Hazard ratio at which the expected events are planned (none: effect.assumed).",
        scale="hazard ratio")
    accrual_time: Positive = key(help="Time over which patients enter.", scale="time unit")
    follow_up_time: Annotated[float, Field(ge=0)] = key(
        0.0, "Follow-up after the last patient enters, until the analysis.", scale="time unit")
    control_median: Positive | None = key(
        None, "Median time to the event on control (exponential); or give control_hazard.",
        scale="time unit")
    control_hazard: Annotated[Any, _HAZARD_SCHEMA] = key(
        None, "Control hazard per time unit: a number, or a list with hazard_starts "
        "(piecewise).", scale="events per time unit")
    hazard_starts: list[Annotated[float, Field(ge=0)]] | None = key(
        None, "Start times of the pieces of a piecewise control hazard (first 0).",
        scale="time unit")
    accrual_ramp: Annotated[float, Field(ge=0)] = key(
        0.0, "Time over which the entry rate rises linearly to its plateau.",
        scale="time unit")
    dropout_per_year: Annotated[float, Field(ge=0, lt=1)] = key(
        0.0, "Share of patients lost to follow-up per year.")
    time_unit: Literal["days", "weeks", "months", "years"] = key(
        "months", "Unit of every time in the table.")
    allocation: Positive = key(1.0, _ALLOCATION)
    better: Literal["higher", "lower"] = key(
        "lower", "Whether a lower hazard ratio (fewer events) is good.")
    events_follow_true_effect: bool = key(
        False, "true: the number of events follows each true hazard ratio; false: fixed at "
        "the planning ratio.")
    median_prior: PriorTable | None = key(
        None, "Prior on the control median (a table written like any prior).",
        scale="time unit")

    @field_validator("control_hazard")
    @classmethod
    def _hazard(cls, value: Any) -> Any:
        if value is None:
            return None
        if _is_number(value) and value > 0:
            return float(value)
        if isinstance(value, list) and value and all(_is_number(v) and v > 0 for v in value):
            return [float(v) for v in value]
        raise ValueError(f"must be a hazard > 0 or a non-empty list of them; got {value!r}")

    @model_validator(mode="after")
    def _control(self) -> TimeToEventTable:
        if (self.control_median is None) == (self.control_hazard is None):
            raise ValueError("give exactly one of 'control_median' (exponential) and "
                             "'control_hazard' (with 'hazard_starts' for piecewise hazards)")
        return self


class CountsTable(Table):
    """Counts of events per patient, compared by the rate ratio."""

    type: Literal["counts"] = key("counts", "Event counts (Poisson or negative binomial).")
    control_rate: Positive = key(help="Planning event rate on control per unit of time.",
                                 scale="events per patient-time unit")
    follow_up: Positive = key(help="Planned follow-up per patient.", scale="time unit")
    overdispersion: Annotated[float, Field(ge=0)] = key(
        0.0, "Negative binomial k (Var = mu + k mu^2); 0 for Poisson.")
    dropout_rate: Annotated[float, Field(ge=0)] = key(
        0.0, "Dropout hazard per unit of time (shortens exposure).")
    layout: Literal["two_arm", "single_arm"] = key(
        "two_arm", "Two arms, or one arm against the control rate.")
    allocation: Positive = key(1.0, _ALLOCATION)
    better: Literal["higher", "lower"] = key("lower", "Whether a lower rate ratio is good.")
    variance_at: Literal["true_effect", "planning_ratio"] = key(
        "true_effect", "Standard error at each true rate ratio, or frozen at the planning one.")
    planning_rate_ratio: Positive | None = key(
        None, "Rate ratio for variance_at = 'planning_ratio' (none: the prior's centre).",
        scale="rate ratio")
    test_variance: Literal["observed_rates", "pooled_null"] = key(
        "observed_rates", "Variance in the test statistic: at the observed rates or at the "
        "pooled rates under no effect.")
    test: Literal["wald", "exact_conditional"] = key(
        "wald", "Wald test on the log rate ratio, or the exact conditional test (two arms, "
        "Poisson counts, no dropout; exact power).")
    control_rate_prior: PriorTable | None = key(
        None, "Prior on the control rate (a table written like any prior).",
        scale="events per patient-time unit")
    time_unit: Literal["days", "weeks", "months", "years"] | None = key(
        None, "Unit of time of control_rate and follow_up, for the memo (labels only).")


ENDPOINT_TABLES: dict[str, type[Table]] = {
    "continuous": ContinuousTable,
    "binary": BinaryTable,
    "time_to_event": TimeToEventTable,
    "counts": CountsTable,
}

# general analysis models (simulated trials fitted by a PyMC model): [endpoint] type = "model"
_MODEL_COMMON = "Treatment patients per control patient, > 0."
PriorOrNumber = Annotated[Any, Field(json_schema_extra={
    "description": "a prior table (written like [design_prior]) or a number (a fixed value)"})]


class _ModelTable(Table):
    type: Literal["model"] = key("model", "An analysis model fitted to simulated trials "
                                 "(PyMC).")
    better: Literal["higher", "lower"] = key("higher", "Which direction of the effect is good.")
    allocation: Positive = key(1.0, _MODEL_COMMON)


class AncovaTable(_ModelTable):
    """ANCOVA of the outcome on treatment with the baseline value as covariate."""

    model: Literal["ancova"] = key("ancova", "ANCOVA with a baseline covariate.")
    sd: Positive = key(help="SD of the outcome within an arm.", scale="outcome unit")
    correlation: Annotated[float, Field(gt=-1, lt=1)] = key(
        help="Assumed correlation of baseline and outcome within an arm (classical power).")
    correlation_prior: PriorOrNumber | None = key(
        None, "Design prior of that correlation (support inside (-1, 1)); none: fixed.")
    control_mean: float = key(0.0, "Mean outcome on control.", scale="outcome unit")
    baseline_mean: float = key(0.0, "Mean of the baseline value.", scale="baseline unit")
    baseline_sd: Positive | None = key(None, "SD of the baseline value (none: 'sd').",
                                       scale="baseline unit")
    unit: Unit | None = key(None, "The outcome's unit for the memo (labels only).")


class LogisticTable(_ModelTable):
    """Logistic regression of a response on treatment and a binary covariate."""

    model: Literal["logistic"] = key("logistic", "Logistic regression with a binary covariate.")
    control_rate: Annotated[float, Field(gt=0, lt=1)] = key(
        help="Assumed response rate on control over both strata (classical power).")
    control_rate_prior: PriorOrNumber | None = key(
        None, "Design prior of the control rate (support inside [0, 1]); none: fixed.")
    covariate_share: Annotated[float, Field(gt=0, lt=1)] = key(
        0.5, "Share of patients in the covariate's stratum.")
    covariate_log_odds: float = key(0.0, "Log odds ratio of a response in the covariate's "
                                    "stratum.", scale="log odds ratio")
    analysis_sd: Positive = key(2.5, "SD of the analysis model's normal priors on the "
                                "log-odds scale.", scale="log odds")


class RegionsTable(_ModelTable):
    """Regional effects around an overall effect; the overall effect is the target."""

    model: Literal["hierarchical_regions"] = key("hierarchical_regions",
                                                 "Hierarchical model over regions.")
    sd: Positive = key(help="SD of the outcome within a region and arm.", scale="outcome unit")
    regions: list[Unit] = key(help="Names of the regions (at least 2).", min_length=2,
                              max_length=50)
    region_shares: list[Positive] | None = key(
        None, "Share of patients from each region (normalised; none: equal).", max_length=50)
    region_sd: Annotated[float, Field(ge=0)] = key(
        0.0, "Assumed SD of the true regional effects around the overall effect.",
        scale="outcome unit")
    region_sd_prior: PriorOrNumber | None = key(
        None, "Design prior of that SD (support inside [0, inf)); none: fixed.")
    control_mean: float = key(0.0, "Mean outcome on control.", scale="outcome unit")
    region_mean_sd: Annotated[float, Field(ge=0)] = key(
        0.0, "SD of the regions' control means around control_mean.", scale="outcome unit")
    region_sd_scale: Positive | None = key(
        None, "Scale of the analysis prior (half-normal) on the between-region SD (none: "
        "sd / 4).", scale="outcome unit")
    unit: Unit | None = key(None, "The outcome's unit for the memo (labels only).")


class BorrowedControlTable(_ModelTable):
    """Two-arm normal outcome whose control mean borrows from a historical control arm."""

    model: Literal["borrowed_control"] = key("borrowed_control",
                                             "Borrowing from a historical control arm.")
    sd: Positive = key(help="SD of the outcome within an arm (known to the analysis).",
                       scale="outcome unit")
    historical_mean: float = key(help="Mean outcome of the historical control arm.",
                                 scale="outcome unit")
    historical_n: Annotated[int, Field(ge=1, le=10**7)] = key(
        help="Patients in the historical control arm.", scale="patients")
    historical_sd: Positive | None = key(None, "SD in the historical arm (none: 'sd').",
                                         scale="outcome unit")
    method: Literal["robust_mixture", "power_prior"] = key(
        "robust_mixture", "How the historical arm is borrowed.")
    weight: Annotated[float, Field(ge=0, le=1)] = key(
        0.5, "Robust mixture: weight of the historical part; power prior: the power on the "
        "historical likelihood (0: no borrowing).")
    vague_sd: Positive | None = key(None, "SD of the vague prior on the control mean (none: "
                                    "'sd').", scale="outcome unit")
    control_mean: float | None = key(None, "Assumed true control mean in the new trial "
                                     "(none: historical_mean).", scale="outcome unit")
    control_mean_prior: PriorOrNumber | None = key(
        None, "Design prior of the new control mean (drift from the historical arm); none: "
        "fixed.")
    unit: Unit | None = key(None, "The outcome's unit for the memo (labels only).")


MODEL_TABLES: dict[str, type[Table]] = {
    "ancova": AncovaTable,
    "logistic": LogisticTable,
    "hierarchical_regions": RegionsTable,
    "borrowed_control": BorrowedControlTable,
}


def _endpoint_tag(value: Any) -> str | None:
    kind = value.get("type", "continuous") if isinstance(value, dict) else getattr(
        value, "type", "continuous")
    if kind != "model":
        return _tag("type", "endpoint", "continuous").discriminator(value)
    model = value.get("model") if isinstance(value, dict) else getattr(value, "model", None)
    if model is None:
        return "model:"
    return f"model:{model}" if isinstance(model, str) else None


EndpointTable = Annotated[
    Annotated[ContinuousTable, Tag("endpoint:continuous")]
    | Annotated[BinaryTable, Tag("endpoint:binary")]
    | Annotated[TimeToEventTable, Tag("endpoint:time_to_event")]
    | Annotated[CountsTable, Tag("endpoint:counts")]
    | Annotated[AncovaTable, Tag("model:ancova")]
    | Annotated[LogisticTable, Tag("model:logistic")]
    | Annotated[RegionsTable, Tag("model:hierarchical_regions")]
    | Annotated[BorrowedControlTable, Tag("model:borrowed_control")],
    Discriminator(_endpoint_tag),
]

# ------------------------------------------------------------------------------------------
# success rules
# ------------------------------------------------------------------------------------------
_MIN_ESTIMATE = ("The observed effect must also reach this value (none: no such "
                 "condition).")


class SignificanceTable(Table):
    """Success when the test is significant in the favourable direction."""

    rule: Literal["significance"] = key("significance",
                                        "Significance of the test in the good direction.")
    alpha: Annotated[float, Field(gt=0, lt=0.5)] = key(0.025, "Type I error level.")
    sided: Literal["one", "two"] = key(
        "one", "'one': alpha is one-sided; 'two': alpha is two-sided, success only in the "
        "good direction.")
    margin: Annotated[float, Field(ge=0)] = key(
        0.0, "Non-inferiority margin (0: superiority); a ratio above 1 for ratio endpoints "
        "other than risk differences.", scale=_EFFECT_SCALE_TEXT)
    min_estimate: float | None = key(None, _MIN_ESTIMATE, scale=_EFFECT_SCALE_TEXT)


class PosteriorProbabilityTable(Table):
    """Success when the posterior probability of a good effect is high enough."""

    rule: Literal["posterior_probability"] = key(
        "posterior_probability", "Posterior probability under the analysis prior.")
    level: Probability = key(0.975, "Success needs P(effect better than 'beyond' | data) at "
                             "least this.")
    beyond: float | None = key(None, "Value the effect must beat (none: no effect).",
                               scale=_EFFECT_SCALE_TEXT)
    min_estimate: float | None = key(None, _MIN_ESTIMATE, scale=_EFFECT_SCALE_TEXT)


RULE_TABLES: dict[str, type[Table]] = {
    "significance": SignificanceTable,
    "posterior_probability": PosteriorProbabilityTable,
}

SuccessTable = Annotated[
    Annotated[SignificanceTable, Tag("rule:significance")]
    | Annotated[PosteriorProbabilityTable, Tag("rule:posterior_probability")],
    _tag("rule", "rule", "significance"),
]


# ------------------------------------------------------------------------------------------
# the rest
# ------------------------------------------------------------------------------------------
class EffectTable(Table):
    """Effects at which classical power is computed."""

    assumed: float | None = key(None, "The effect classical power is computed at (none: the "
                                "design prior's mean).", scale=_EFFECT_SCALE_TEXT)
    relevant: float | None = key(None, "Smallest clinically relevant effect (for conditional "
                                 "assurance).", scale=_EFFECT_SCALE_TEXT)
    also_power_at: list[float] = key([], "Further effects at which to show power.",
                                      scale=_EFFECT_SCALE_TEXT)


MAX_SIZES = 5000
Size = Annotated[int, Field(ge=1, le=MAX_TOTAL)]


class SizesTable(Table):
    """Total sample sizes to evaluate."""

    from_: Size | None = key(None, "Smallest total size.", alias="from", scale="patients")
    to: Size | None = key(None, "Largest total size.", scale="patients")
    step: Annotated[int, Field(ge=1)] | None = key(
        None, "Step between sizes (none: about 50 sizes).", scale="patients")
    list_: list[Size] | None = key(
        None, "Explicit total sizes instead of from/to/step.", alias="list", scale="patients",
        min_length=1, max_length=MAX_SIZES)
    planned: Size | None = key(
        None, "The total size the memo's decision box reports (none: the smallest size "
        "reaching the assurance target).", scale="patients")

    @model_validator(mode="after")
    def _one_form(self) -> SizesTable:
        ranged = [k for k in ("from_", "to", "step") if getattr(self, k) is not None]
        if self.list_ is not None:
            if ranged:
                raise ValueError("give either 'list' or 'from'/'to'/'step', not both")
            return self
        if not ranged:  # only 'planned' (or nothing): the sizes are chosen from the targets
            return self
        missing = [k.rstrip("_") for k in ("from_", "to") if getattr(self, k) is None]
        if missing:
            raise ValueError(f"needs {' and '.join(repr(m) for m in missing)} (or a 'list')")
        if self.to < self.from_:
            raise ValueError(f"'to' ({self.to}) must be >= 'from' ({self.from_})")
        step = self.step if self.step is not None else max(1, (self.to - self.from_) // 50)
        if (self.to - self.from_) // step + 1 > MAX_SIZES:
            raise ValueError(f"asks for {(self.to - self.from_) // step + 1} sizes; use a "
                             f"larger 'step' (at most {MAX_SIZES} sizes)")
        return self


class TargetsTable(Table):
    """Targets to solve the sample size for."""

    power: Probability | None = key(None, "Target classical power at the assumed effect.")
    assurance: Probability | None = key(None, "Target assurance (probability of success).")
    conditional_assurance: Probability | None = key(
        None, "Target P(success | effect at least the relevant one); needs effect.relevant.")


class ZonesTable(Table):
    """Go / consider / stop zones on the posterior of the effect."""

    min_acceptable: float = key(help="Minimum acceptable effect.", scale=_EFFECT_SCALE_TEXT)
    target: float = key(help="Target effect, better than min_acceptable.",
                        scale=_EFFECT_SCALE_TEXT)
    go_min_prob: Probability = key(0.9, "Go needs P(effect better than min_acceptable) at "
                                   "least this.")
    go_target_prob: Probability = key(0.5, "... and P(effect better than target) at least "
                                      "this.")
    stop_target_prob: Probability = key(0.1, "Stop when P(effect better than target) is "
                                        "below this.")


class PrecisionTable(Table):
    """Posterior interval width against n."""

    length: Positive = key(help="Target width of the posterior interval (of the log ratio "
                           "for ratio endpoints).", scale=_PRIOR_SCALE_TEXT)
    coverage: Probability = key(0.95, "Probability content of the interval.")
    interval: Literal["highest_density", "equal_tailed"] = key(
        "highest_density", "Kind of interval.")
    criteria: list[Literal["ALC", "ACC", "WOC", "MWOC"]] = key(
        ["ALC", "ACC", "WOC", "MWOC"], "Criteria to solve n for: average length, average "
        "coverage, worst outcome, modified worst outcome.", min_length=1)
    likely_share: Probability = key(0.95, "Share of likely data sets the modified worst "
                                    "outcome criterion covers.")


class SensitivityTable(Table):
    """How the memo's sensitivity section varies the design prior."""

    show: bool = key(True, "Compute the sensitivity section (false: leave it out).")
    centre_shift: Annotated[float, Field(gt=0, le=3)] = key(
        0.5, "The prior's centre is moved down and up by this many prior SDs.",
        scale="prior SDs")
    spread_factors: list[Annotated[float, Field(gt=0, le=10)]] = key(
        [0.5, 2.0], "The prior's spread is multiplied by each of these.", max_length=6)
    weight_change: Annotated[float, Field(gt=0, lt=1)] = key(
        0.1, "Weights of point masses and vague parts are moved down and up by this.")
    map_centres: Annotated[int, Field(ge=3, le=101)] = key(
        21, "Grid points along the prior centre in the sensitivity map.")
    map_spreads: Annotated[int, Field(ge=3, le=101)] = key(
        15, "Grid points along the prior spread in the sensitivity map.")


class SimulationTable(Table):
    """How the trials of an analysis model ([endpoint] type = "model") are simulated."""

    trials: Annotated[int, Field(ge=50, le=1_000_000)] = key(
        1000, "Simulated trials per size (and as many again for classical power).")
    nuts_check: Annotated[int, Field(ge=0, le=10_000)] = key(
        20, "Trials per size also fitted by NUTS to check the fast (Laplace) fit.")
    nuts_every: bool = key(False, "Fit every trial by NUTS (slow; the fast fit is not used).")
    coverage: Probability = key(0.95, "Probability content of the posterior intervals whose "
                                "widths are reported.")
    chunk: Annotated[int, Field(ge=1, le=100_000)] = key(
        50, "Trials per task: the unit of work given to a worker (numbers do not depend on "
        "the number of workers).")
    workers: Annotated[int, Field(ge=0, le=256)] = key(
        0, "Local worker processes (0: run in this process).")
    scheduler: Annotated[str, Field(min_length=1, max_length=300)] | None = key(
        None, "Address of a Dask scheduler (e.g. 'tcp://10.0.0.5:8786') to spread the trials "
        "over a cluster.")


class MonteCarloTable(Table):
    """Monte Carlo settings (used where no exact route exists)."""

    draws: Annotated[int, Field(ge=100, le=MAX_DRAWS)] = key(20_000, "Number of Monte Carlo "
                                                             "draws.")
    seed: Annotated[int, Field(ge=0)] = key(20260101, "Seed: the same seed gives the same "
                                            "numbers.")


class DesignFileModel(Table):
    """A whole design file."""

    title: Title | None = key(
        None, f"Name of the trial for the memo: one line of plain text, at most {MAX_TITLE} "
        "characters (none: the file's name).")
    endpoint: EndpointTable = key(help="What is measured and how it is analysed.")
    success: SuccessTable = key(default_factory=SignificanceTable,
                                help="When the trial counts as a success.")
    effect: EffectTable = key(default_factory=EffectTable,
                              help="Effects for classical power and relevance.")
    design_prior: PriorTable = key(help="What is believed about the true effect.")
    analysis_prior: PriorTable | None = key(
        None, "Prior used by the final analysis (posterior rules, zones, precision).")
    sd_prior: PriorTable | None = key(None, "Prior on the outcome SD (continuous only).")
    sizes: SizesTable | None = key(None, "Sizes to evaluate (none: chosen from the targets).")
    targets: TargetsTable = key(default_factory=TargetsTable, help="Targets to solve n for.")
    zones: ZonesTable | None = key(None, "Go / consider / stop zones.")
    precision: PrecisionTable | None = key(None, "Posterior interval width planning.")
    sensitivity: SensitivityTable = key(default_factory=SensitivityTable,
                                        help="Sensitivity of the answer to the design prior.")
    monte_carlo: MonteCarloTable = key(default_factory=MonteCarloTable,
                                       help="Monte Carlo settings.")
    simulation: SimulationTable | None = key(
        None, "Simulation settings of an analysis model (endpoint type 'model').")


#: tag of a discriminated table -> its model (used to find the keys a table allows)
TAGGED: dict[str, type[Table]] = {
    **{f"prior:{k}": v for k, v in PRIOR_TABLES.items()},
    **{f"part:{k}": v for k, v in _PARTS.items()},
    **{f"endpoint:{k}": v for k, v in ENDPOINT_TABLES.items()},
    **{f"model:{k}": v for k, v in MODEL_TABLES.items()},
    **{f"rule:{k}": v for k, v in RULE_TABLES.items()},
}
