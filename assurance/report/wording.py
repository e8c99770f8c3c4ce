"""Plain words for readers: numbers rounded for reading, effects with units, priors described.

Everything a person reads in the memo goes through here, so that no Python representation
(``normal(mean=...)``) and no long decimals reach a page. Results files keep full precision;
these functions only format.

Examples
--------
>>> import assurance as asr
>>> percent(0.7003), percent(0.9962), percent(0.99996)
('70%', '99.6%', '>99.9%')
>>> ep = asr.SurvivalEndpoint(control_median=12.0, accrual_time=24.0, follow_up_time=12.0,
...                           assumed_hazard_ratio=0.75,
...                           better="lower")
>>> effect_text(ep, 0.75)
'hazard ratio 0.75'
>>> prior_text(asr.Normal(-0.22314355, 0.15), ep)
'log-normal on the hazard ratio: median 0.80, 95% between 0.60 and 1.07'
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from typing import Any

__all__ = [
    "Z975",
    "number",
    "numbers_alike",
    "percent",
    "points",
    "ratio",
    "effect_text",
    "effect_unit",
    "prior_text",
    "sd_prior_text",
    "endpoint_text",
    "rule_text",
    "origin_text",
    "criterion_name",
]

#: the standard normal 97.5% quantile (scipy.stats.norm.ppf(0.975) = 1.959963984540054)
Z975 = 1.959963984540054

_CRITERIA = {"ALC": "average length (ALC)", "ACC": "average coverage (ACC)",
             "WOC": "worst-case length (WOC)",
             "MWOC": "worst length over the most likely data sets (MWOC)"}


# ------------------------------------------------------------------------------------------
# numbers
# ------------------------------------------------------------------------------------------
def _decimals(largest: float, digits: int) -> int:
    if not math.isfinite(largest) or largest == 0:
        return 0
    return max(0, digits - 1 - math.floor(math.log10(abs(largest))))


def _plain(value: float, decimals: int) -> str:
    text = f"{value:,.{decimals}f}"
    if text.startswith("-") and float(text.replace(",", "")) == 0:
        text = text[1:]  # no "-0.0"
    return text


def number(value: float, digits: int = 3) -> str:
    """``value`` rounded to ``digits`` significant figures, as a plain decimal.

    Whole numbers of ``digits`` or more figures are kept whole (``1,234``, never
    ``1.23e+03``); thousands are separated by commas.

    Examples
    --------
    >>> number(17.6), number(12.7279), number(-7.35), number(1234.4), number(0.000123456)
    ('17.6', '12.7', '-7.35', '1,234', '0.000123')
    >>> number(22.0), number(0.8)
    ('22', '0.8')
    """
    value = float(value)
    if not math.isfinite(value):
        return "not available"
    if value == 0:
        return "0"
    decimals = _decimals(value, digits)
    text = _plain(round(value, decimals), decimals)
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def numbers_alike(values: Sequence[float], digits: int = 3, *,
                  keep_zeros: bool = False) -> list[str]:
    """Several numbers rounded to the same decimal place, set by the largest of them.

    Examples
    --------
    >>> numbers_alike([17.6, -7.3546, 42.5477])
    ['17.6', '-7.4', '42.5']
    >>> numbers_alike([0.8, 0.6, 1.07], keep_zeros=True)
    ['0.80', '0.60', '1.07']
    """
    finite = [abs(float(v)) for v in values if math.isfinite(float(v))]
    decimals = _decimals(max(finite, default=0.0), digits)
    out = []
    for v in values:
        text = _plain(float(v), decimals) if math.isfinite(float(v)) else "not available"
        if not keep_zeros and "." in text:
            text = text.rstrip("0").rstrip(".")
        out.append(text)
    return out


def percent(p: float, decimals: int = 0) -> str:
    """A probability as a percentage, never rounded to 0% or 100% unless it is exactly that.

    Examples
    --------
    >>> percent(0.25), percent(0.2531, 1), percent(0.004), percent(0.0), percent(1.0)
    ('25%', '25.3%', '0.4%', '0%', '100%')
    >>> percent(0.99999), percent(0.00001)
    ('>99.9%', '<0.1%')
    """
    p = float(p)
    if not math.isfinite(p):
        return "not available"
    if p <= 0:
        return "0%"
    if p >= 1:
        return "100%"
    for d in range(decimals, max(decimals, 1) + 1):
        text = f"{100 * p:.{d}f}"
        if float(text) not in (0.0, 100.0):
            return f"{text}%"
    return "<0.1%" if p < 0.5 else ">99.9%"


def points(difference: float) -> str:
    """A difference of two probabilities in percentage points (whole points).

    Examples
    --------
    >>> points(0.2963), points(0.004), points(-0.12)
    ('30 percentage points', 'less than 1 percentage point', '-12 percentage points')
    """
    d = 100 * float(difference)
    if abs(d) < 0.5:
        return "less than 1 percentage point"
    whole = round(d)
    return f"{whole:d} percentage point{'' if abs(whole) == 1 else 's'}"


def ratio(value: float) -> str:
    """A ratio (hazard ratio, rate ratio) with two decimals between 0.1 and 10.

    Examples
    --------
    >>> ratio(0.8), ratio(1.0701), ratio(0.0512)
    ('0.80', '1.07', '0.0512')
    """
    value = float(value)
    if 0.1 <= abs(value) < 10:
        return f"{value:.2f}"
    return number(value)


# ------------------------------------------------------------------------------------------
# effects
# ------------------------------------------------------------------------------------------
def _kind(endpoint: Any) -> str:
    try:
        return str(endpoint.to_dict().get("kind", ""))
    except Exception:  # pragma: no cover - an endpoint without to_dict
        return ""


def _percentage_points(endpoint: Any) -> bool:
    return _kind(endpoint) == "binary" and not getattr(endpoint, "ratio_scale", False)


def effect_unit(endpoint: Any) -> str:
    """The unit an effect on the natural scale is written in ('' when it has none).

    Examples
    --------
    >>> import assurance as asr
    >>> effect_unit(asr.BinaryEndpoint(0.3))
    'percentage points'
    """
    if getattr(endpoint, "ratio_scale", False):
        return ""
    if _percentage_points(endpoint):
        return "percentage points"
    return str(getattr(endpoint, "unit", None) or "")


def _scaled(endpoint: Any, value: float) -> float:
    return 100.0 * value if _percentage_points(endpoint) else value


def effect_text(endpoint: Any, value: float) -> str:
    """An effect on the natural scale, named or with its unit.

    Examples
    --------
    >>> import assurance as asr
    >>> effect_text(asr.BinaryEndpoint(0.3), 0.15)
    '15 percentage points'
    >>> effect_text(asr.ContinuousEndpoint(sigma=60.0, unit="metres"), 22.0)
    '22 metres'
    """
    value = float(value)
    if getattr(endpoint, "ratio_scale", False):
        return f"{endpoint.effect_name} {ratio(value)}"
    unit = effect_unit(endpoint)
    text = number(_scaled(endpoint, value))
    return f"{text} {unit}" if unit else text


# ------------------------------------------------------------------------------------------
# priors
# ------------------------------------------------------------------------------------------
def _interval(prior: Any) -> tuple[float, float]:
    return float(prior.ppf(0.025)), float(prior.ppf(0.975))


def _natural(endpoint: Any, values: Sequence[float]) -> list[float]:
    """Analysis-scale values on the scale a reader knows (ratios, percentage points)."""
    if getattr(endpoint, "ratio_scale", False):
        return [math.exp(v) for v in values]
    return [_scaled(endpoint, v) for v in values]


def _format(endpoint: Any, values: Sequence[float]) -> list[str]:
    if getattr(endpoint, "ratio_scale", False):
        return [ratio(v) for v in values]
    return numbers_alike(values)


def _with_unit(endpoint: Any, text: str) -> str:
    unit = effect_unit(endpoint)
    return f"{text} {unit}" if unit else text


def _summary(prior: Any, endpoint: Any, centre: str = "median") -> str:
    """``median m, 95% between a and b`` on the natural scale (quantiles via ``ppf``)."""
    lo, hi = _interval(prior)
    if centre == "mean" and not getattr(endpoint, "ratio_scale", False):
        c = float(prior.mean())
    else:
        c = float(prior.ppf(0.5))
    c, lo, hi = _natural(endpoint, [c, lo, hi])
    a, b, m = _format(endpoint, [lo, hi, c])
    return f"{centre} {_with_unit(endpoint, m)}, 95% between {a} and {b}"


def _no_effect(endpoint: Any, value: float) -> str:
    if getattr(endpoint, "ratio_scale", False):
        shown = ratio(math.exp(value))
        return (f"no effect ({endpoint.effect_name} exactly 1)" if value == 0 else
                f"{endpoint.effect_name} exactly {shown}")
    if value == 0:
        return "no effect (exactly 0)"
    return f"exactly {_with_unit(endpoint, number(_scaled(endpoint, value)))}"


def _family_text(prior: Any, endpoint: Any, vague: bool = False) -> str:
    name = type(prior).__name__
    is_ratio = getattr(endpoint, "ratio_scale", False)
    on = f" on the {getattr(endpoint, 'effect_name', 'effect')}" if is_ratio else ""
    word = "vague " if vague else ""
    if name == "PointMass":
        return _no_effect(endpoint, float(prior.value))
    if name == "Normal":
        if is_ratio:
            return f"{word}log-normal{on}: {_summary(prior, endpoint)}"
        return f"{word}normal: {_summary(prior, endpoint, 'mean')}"
    if name == "StudentT":
        family = f"{word}{'log-' if is_ratio else ''}Student t with {number(prior.df)} degrees " \
                 "of freedom"
        return f"{family}{on}: {_summary(prior, endpoint)}"
    if name == "Uniform":
        lo, hi = _natural(endpoint, [prior.lower, prior.upper])
        a, b = _format(endpoint, [lo, hi])
        return f"{'log-' if is_ratio else ''}uniform{on} between {a} and " \
               f"{_with_unit(endpoint, b)}"
    if name == "TruncatedNormal":
        lo, hi = _natural(endpoint, [prior.lower, prior.upper])
        bounds = [x for x in (lo, hi) if math.isfinite(x)]
        shown = dict(zip([x for x in (lo, hi) if math.isfinite(x)],
                         _format(endpoint, bounds), strict=True))
        if math.isfinite(lo) and math.isfinite(hi):
            where = f"kept between {shown[lo]} and {shown[hi]}"
        elif math.isfinite(lo):
            where = f"kept above {shown[lo]}"
        elif math.isfinite(hi):
            where = f"kept below {shown[hi]}"
        else:
            where = "untruncated"
        return f"{'log-' if is_ratio else ''}normal{on} {where}: {_summary(prior, endpoint)}"
    if name == "BetaRates":
        return _beta_rates_text(prior, endpoint)
    if name == "FromScipy":
        dist = getattr(getattr(prior, "_dist", None), "dist", None)
        label = f"{getattr(dist, 'name', 'fitted')} distribution"
        return f"{label}{on}: {_summary(prior, endpoint)}"
    return f"{on.strip() + ': ' if on else ''}{_summary(prior, endpoint)}"


def _beta_rate(arm: Any) -> str:
    if getattr(arm, "fixed", False):
        return f"fixed at {percent(arm.value, 1)}"
    from scipy import special  # the Beta quantiles (scipy.stats is slow to import)

    lo, hi = special.betaincinv(arm.a, arm.b, [0.025, 0.975])
    size = arm.a + arm.b
    return (f"about {number(arm.a)} responders in {number(size)} "
            f"patient{'' if size == 1 else 's'}: mean "
            f"{percent(arm.mean, 1)}, 95% between {percent(lo, 1)} and "
            f"{percent(hi, 1)}")


def _beta_rates_text(prior: Any, endpoint: Any) -> str:
    parts = [f"response rate on control: {_beta_rate(prior.control_arm)}",
             f"on treatment: {_beta_rate(prior.treatment_arm)}"]
    effect = getattr(endpoint, "effect_name", "difference")
    parts.append(f"so the {effect}: {_summary(prior, endpoint)}")
    return "; ".join(parts)


def prior_text(prior: Any, endpoint: Any) -> str:
    """A prior for the effect in plain words, on the scale a reader knows.

    Ratio endpoints' priors live on the log ratio; they are described on the ratio itself
    (a normal prior there is a log-normal one on the ratio: median ``exp(mean)``, 95%
    between ``exp(mean -+ 1.96 sd)``). Mixtures are listed as weighted parts; a normal part
    at least twice as wide as the narrowest one is called vague.

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=60.0, unit="metres")
    >>> prior_text(asr.Normal(17.6, 12.7279), ep)
    'normal: mean 17.6 metres, 95% between -7.3 and 42.5'
    >>> prior_text(asr.Mixture([asr.PointMass(0.0), asr.Normal(-6.0, 3.0)], [0.2, 0.8]), ep)
    '20%: no effect (exactly 0); 80%: normal: mean -6 metres, 95% between -11.9 and -0.1'
    """
    if type(prior).__name__ == "Mixture":
        parts = prior.parts()
        widths = [p.sigma for _, p in parts if type(p).__name__ == "Normal"]
        narrow = min(widths, default=math.inf)
        texts = []
        for w, part in parts:
            vague = type(part).__name__ == "Normal" and len(widths) > 1 and \
                part.sigma >= 2 * narrow
            texts.append(f"{percent(w)}: {_family_text(part, endpoint, vague)}")
        return "; ".join(texts)
    return _family_text(prior, endpoint)


def sd_prior_text(prior: Any, unit: str | None = None) -> str:
    """A prior on the outcome's SD in plain words.

    Examples
    --------
    >>> import assurance as asr
    >>> sd_prior_text(asr.ScaledInvChiSquare(40, 12.0), "mmHg")  # doctest: +ELLIPSIS
    'as if estimated as 12 mmHg with 40 degrees of freedom (a pilot of about 41 ...'
    """
    unit_text = f" {unit}" if unit else ""
    lo, mid, hi = (float(prior.ppf(q)) for q in (0.025, 0.5, 0.975))
    m, a, b = numbers_alike([mid, lo, hi])
    summary = f"median {m}{unit_text}, 95% between {a} and {b}"
    if type(prior).__name__ == "ScaledInvChiSquare":
        return (f"as if estimated as {number(prior.scale)}{unit_text} with "
                f"{number(prior.df)} degrees of freedom (a pilot of about "
                f"{number(prior.df + 1)} patients): {summary}")
    return summary


# ------------------------------------------------------------------------------------------
# endpoint, rule, origin
# ------------------------------------------------------------------------------------------
def _cut(text: str, marker: str) -> tuple[str, str]:
    """``text`` without the clause starting at ``marker`` (up to the next '; '), and it."""
    start = text.find(marker)
    if start < 0:
        return text, ""
    end = text.find("; ", start + len(marker))
    clause = text[start:] if end < 0 else text[start:end]
    return text[:start] + ("" if end < 0 else text[end:]), clause


def endpoint_text(endpoint: Any) -> str:
    """The outcome, the layout and the analysis in plain words.

    Examples
    --------
    >>> import assurance as asr
    >>> text = endpoint_text(asr.ContinuousEndpoint(sigma=60.0, analysis="t", unit="metres"))
    >>> text.split("; ")[0], text.split("; ")[2]
    ('continuous outcome (metres), SD 60 metres', 't test (SD estimated from the data)')
    """
    kind = _kind(endpoint)
    if kind == "continuous":
        unit = getattr(endpoint, "unit", None)
        u = f" {unit}" if unit else ""
        shape = (endpoint.layout_text() if endpoint.layout == "two_arm"
                 else "single arm / paired differences against a fixed reference")
        test = ("t test (SD estimated from the data)" if endpoint.analysis == "t"
                else "z test (SD taken as known)")
        return (f"continuous outcome{f' ({unit})' if unit else ''}, SD {number(endpoint.sigma)}"
                f"{u}; {shape}; {test}; {endpoint.better} values are better")
    text = endpoint.describe()
    if kind == "time_to_event":
        text, clause = _cut(text, "; control median uncertain: ")
        prior = getattr(endpoint, "median_prior", None)
        if clause and prior is not None:
            text += (f"; the control median is uncertain: {_summary(prior, None)} "
                     f"{endpoint.time_unit}")
        return _no_code(text)
    if kind == "counts":
        text, clause = _cut(text, "; control rate uncertain: ")
        prior = getattr(endpoint, "control_rate_prior", None)
        text = text.replace(" per unit time", f" per {_singular(endpoint)}")
        if clause and prior is not None:
            text += f"; the control rate is uncertain: {_summary(prior, None)}"
        return _no_code(text)
    return _no_code(text)


def _singular(endpoint: Any) -> str:
    unit = getattr(endpoint, "time_unit", None)
    return unit[:-1] if unit else "unit of time"


_CODE = re.compile(r"\b([a-z_]+)\(([^()]*=[^()]*)\)")


def _no_code(text: str) -> str:
    """``name(a=1, b=2)`` left in a sentence becomes ``name (a 1, b 2)``."""
    return _CODE.sub(lambda m: f"{m.group(1).replace('_', ' ')} "
                               f"({m.group(2).replace('=', ' ')})", text)


def rule_text(rule: Any, endpoint: Any) -> str:
    """When the trial counts as a success, in plain words.

    Examples
    --------
    >>> import assurance as asr
    >>> ep = asr.ContinuousEndpoint(sigma=12.0, unit="mmHg", better="lower")
    >>> text = rule_text(asr.Significance(0.025, "one", margin=3.0), ep)
    >>> text.split(": ")[0], text.split(" shows ")[1]
    ('non-inferiority', 'the treatment is worse by less than the margin of 3 mmHg')
    """
    if type(rule).__name__ != "Significance":
        return _no_code(rule.describe())
    level = (f"a two-sided {percent(rule.alpha, 1).replace('.0%', '%')} test "
             f"(one-sided {percent(rule.one_sided_alpha, 1).replace('.0%', '%')})"
             if rule.sided == "two" else
             f"a one-sided {percent(rule.one_sided_alpha, 1).replace('.0%', '%')} test")
    if rule.margin > 0:
        margin = (ratio(rule.margin) if getattr(endpoint, "ratio_scale", False)
                  else effect_text(endpoint, rule.margin))
        text = (f"non-inferiority: {level} shows the treatment is worse by less than the "
                f"margin of {margin}")
    else:
        text = f"{level} shows the treatment is better"
    if getattr(rule, "min_estimate", None) is not None:
        text += f", and the observed effect is at least {effect_text(endpoint, rule.min_estimate)}"
    return text


def origin_text(origin: Any, endpoint: Any) -> str:
    """Where the design prior comes from, in plain words (no distribution written as code).

    Examples
    --------
    >>> origin_text("Team judgement, March workshop.", None)
    'Team judgement, March workshop.'
    """
    if origin is None:
        return ""
    if isinstance(origin, str):
        return origin
    text = origin.report()
    prior = getattr(origin, "prior", None)
    if prior is not None and not callable(prior) and endpoint is not None:
        text = text.replace(prior.describe(), prior_text(prior, endpoint))
    return _no_code(text)


def criterion_name(text: str) -> str:
    """The precision criterion named in ``text`` in plain words ('a criterion' if none).

    Examples
    --------
    >>> criterion_name("WOC is not available by simulation")
    'worst-case length (WOC)'
    """
    for key in ("MWOC", "WOC", "ALC", "ACC"):
        if re.search(rf"\b{key}\b", text):
            return _CRITERIA[key]
    return "a criterion"
