"""Built-in analysis models: ANCOVA, logistic regression, regions, borrowed control.

Each function returns a :class:`~assurance.general.model.GeneralModel`: a data simulator
drawing one trial's data from a draw of the true parameters, a PyMC analysis model built on
``pm.Data`` containers with a variable named ``effect``, a design prior (one prior per true
parameter) and the point values for classical power. The design prior generates the data;
the analysis model, with its own vague but proper priors, fits them.

The simulators and builders are small frozen dataclasses with ``__call__`` (never lambdas or
closures), so a model can be sent to worker processes or a Dask cluster; two models built
with the same settings compare equal and hash alike.

============================  =====================================  ======================
function                      true parameters (design prior keys)    effect scale
============================  =====================================  ======================
:func:`ancova`                ``effect``, ``correlation``            difference in means
:func:`logistic`              ``effect``, ``control_rate``           log odds ratio
:func:`hierarchical_regions`  ``effect``, ``region_sd``              difference in means
:func:`borrowed_control`      ``effect``, ``control_mean``           difference in means
============================  =====================================  ======================

:data:`MODEL_KEYS` lists, per model, the design-file keys of ``[endpoint]`` (besides
``type = "model"`` and ``model = "<name>"``) with their defaults and one sentence of help; the
effect's design prior is the file's ``[design_prior]`` table and its assumed value
``[effect] assumed``, as for the other endpoints.

PyMC is imported only inside the builders (when an analysis model is built).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from .._validation import check_choice, check_int, check_real, check_text
from ..errors import AssuranceInputError
from ..priors.families import PointMass, Prior, as_prior

if TYPE_CHECKING:  # pragma: no cover
    from .model import GeneralModel

__all__ = [
    "ancova",
    "logistic",
    "hierarchical_regions",
    "borrowed_control",
    "MODEL_KEYS",
    "BUILTIN_MODELS",
]

Better = Literal["higher", "lower"]

#: How vague the analysis priors are: location parameters get a normal prior with this many
#: outcome SDs as its SD (proper, and flat over any plausible value).
VAGUE = 10.0

#: Design-file keys of each built-in model, in ``[endpoint]`` beside ``type = "model"`` and
#: ``model = "<name>"``: ``{model: {key: (default, help)}}``; a default of ``None`` means the
#: key is required (or, where the help says so, derived from another key). Ranges and scales
#: are stated in the help; prior-valued keys take the same table form as ``[design_prior]``
#: (``{ family = "uniform", lower = 0.3, upper = 0.7 }``) or a number (a fixed value).
#: Every model also reads ``[endpoint] better`` (default "higher") and ``allocation``
#: (default 1.0), the effect's prior from ``[design_prior]`` and its assumed value from
#: ``[effect] assumed``.
MODEL_KEYS: dict[str, dict[str, tuple[Any, str]]] = {
    "ancova": {
        "sd": (None, "SD of the outcome within an arm (> 0, outcome units); also sets the "
                     "scale of the analysis model's vague priors."),
        "correlation": (None, "Assumed correlation between the baseline value and the outcome "
                              "within an arm, in (-1, 1), for classical power."),
        "correlation_prior": (None, "Design prior of that correlation (support inside "
                                    "(-1, 1)); default: fixed at 'correlation'."),
        "control_mean": (0.0, "Mean outcome on control (outcome units)."),
        "baseline_mean": (0.0, "Mean of the baseline value (baseline units)."),
        "baseline_sd": (None, "SD of the baseline value (> 0, baseline units); default: 'sd'."),
    },
    "logistic": {
        "control_rate": (None, "Assumed response rate on control over both strata, in "
                               "(0, 1), for classical power."),
        "control_rate_prior": (None, "Design prior of the control response rate (support "
                                     "inside [0, 1], e.g. a beta); default: fixed at "
                                     "'control_rate'."),
        "covariate_share": (0.5, "Share of patients in the covariate's stratum, in (0, 1); "
                                 "each arm is stratified to this share."),
        "covariate_log_odds": (0.0, "Log odds ratio of a response for the covariate's "
                                    "stratum (any real; 0 = no effect of the covariate)."),
        "analysis_sd": (2.5, "SD of the analysis model's normal priors on the intercept "
                             "(centred at the control rate's logit) and on each log odds "
                             "ratio (> 0, log-odds scale)."),
    },
    "hierarchical_regions": {
        "sd": (None, "SD of the outcome within a region and arm (> 0, outcome units)."),
        "regions": (None, "Names of the regions (at least 2)."),
        "region_shares": (None, "Share of patients from each region (> 0, normalised to sum "
                                "1); default: equal shares."),
        "region_sd": (0.0, "Assumed SD of the true regional effects around the overall "
                           "effect (>= 0, outcome units), for classical power."),
        "region_sd_prior": (None, "Design prior of that SD (support inside [0, inf)); "
                                  "default: fixed at 'region_sd'."),
        "control_mean": (0.0, "Mean outcome on control (outcome units)."),
        "region_mean_sd": (0.0, "SD of the regions' control means around 'control_mean' "
                                "(>= 0, outcome units): a new draw per simulated trial."),
        "region_sd_scale": (None, "Scale of the analysis model's half-normal prior on the "
                                  "between-region SD (> 0, outcome units); default: sd / 4."),
    },
    "borrowed_control": {
        "sd": (None, "SD of the outcome within an arm, taken as known in the analysis "
                     "(> 0, outcome units)."),
        "historical_mean": (None, "Mean outcome of the historical control arm."),
        "historical_n": (None, "Patients in the historical control arm (whole number >= 1)."),
        "historical_sd": (None, "SD of the outcome in the historical control arm (> 0); "
                                "default: 'sd'."),
        "method": ("robust_mixture", "How the historical arm is borrowed: 'robust_mixture' "
                                     "or 'power_prior'."),
        "weight": (0.5, "Robust mixture: prior weight of the historical component; power "
                        "prior: the power on the historical likelihood; in [0, 1] "
                        "(0 = no borrowing)."),
        "vague_sd": (None, "SD of the vague prior on the control mean (the robust "
                           "mixture's second component, centred at 'historical_mean'; > 0); "
                           "default: 'sd' (one patient's worth of information)."),
        "control_mean": (None, "Assumed true mean on the new trial's control arm, for "
                               "classical power; default: 'historical_mean'."),
        "control_mean_prior": (None, "Design prior of the new control mean (drift from the "
                                     "historical arm); default: fixed at 'control_mean'."),
    },
}


# ---------------------------------------------------------------------------------------
# shared helpers
# ---------------------------------------------------------------------------------------

def _general_model(**kwargs: Any) -> GeneralModel:
    from .model import GeneralModel

    return GeneralModel(**kwargs)


def _prior_inside(value: Any, name: str, owner: str, low: float, high: float,
                  allowed: str) -> Prior:
    prior = as_prior(value, name, owner)
    lo, hi = prior.support()
    if lo < low or hi > high:
        raise AssuranceInputError(
            f"The '{name}' parameter of {owner} must be a prior whose support lies inside "
            f"{allowed}. Got {prior.describe()} (support {lo:g} to {hi:g}) instead.")
    return prior


def _check_better(better: object, owner: str) -> str:
    return check_choice(better, "better", owner, ("higher", "lower"))


def _split(n: int, shares: np.ndarray) -> np.ndarray:
    """Whole counts summing to ``n`` in proportion to ``shares`` (largest remainders)."""
    raw = n * shares
    counts = np.floor(raw).astype(np.int64)
    left = n - int(counts.sum())
    if left > 0:
        order = np.argsort(-(raw - counts), kind="stable")
        counts[order[:left]] += 1
    return counts


def _arm_indicator(n_treatment: int, n_control: int) -> np.ndarray:
    return np.concatenate([np.ones(n_treatment), np.zeros(n_control)])


def _expit(x: Any) -> Any:
    return 0.5 * (1.0 + np.tanh(0.5 * np.asarray(x, dtype=float)))


def _logit(p: float) -> float:
    return math.log(p) - math.log1p(-p)


@lru_cache(maxsize=1024)
def intercept_for_rate(rate: float, share: float, log_odds: float) -> float:
    """Log odds ``a`` of stratum 0 with ``share * expit(a + g) + (1 - share) * expit(a) = rate``.

    Solved by bisection to about 1e-13 in scalar arithmetic (one call per simulated trial
    when the control rate varies; answers are kept for repeated arguments).

    Examples
    --------
    >>> a = intercept_for_rate(0.3, 0.4, 1.0)
    >>> round(0.4 * float(_expit(a + 1.0)) + 0.6 * float(_expit(a)), 12)
    0.3
    """
    rate = min(max(float(rate), 1e-300), 1.0 - 1e-16)
    share, log_odds = float(share), float(log_odds)
    if log_odds == 0.0 or share == 0.0:
        return _logit(rate)
    tanh = math.tanh
    lo, hi = -750.0, 750.0
    mid = 0.0
    for _ in range(200):  # bisection: the marginal rate rises with a
        mid = 0.5 * (lo + hi)
        value = 0.5 * (1.0 + share * tanh(0.5 * (mid + log_odds))
                       + (1.0 - share) * tanh(0.5 * mid))
        if value < rate:
            lo = mid
        else:
            hi = mid
        if hi - lo < 1e-13 * max(1.0, abs(mid)):
            break
    return 0.5 * (lo + hi)


# ---------------------------------------------------------------------------------------
# ANCOVA
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class AncovaData:
    """Simulator of one ANCOVA trial (see :func:`ancova`)."""

    sd: float
    control_mean: float
    baseline_mean: float
    baseline_sd: float

    def __call__(self, rng: np.random.Generator, n_treatment: int, n_control: int,
                 truth: Mapping[str, float]) -> dict[str, np.ndarray]:
        rho = float(truth["correlation"])
        n = n_treatment + n_control
        treated = _arm_indicator(n_treatment, n_control)
        z = rng.standard_normal(n)
        noise = rng.standard_normal(n)
        y = (self.control_mean + float(truth["effect"]) * treated
             + self.sd * (rho * z + math.sqrt(max(1.0 - rho * rho, 0.0)) * noise))
        return {"y": y, "baseline": self.baseline_mean + self.baseline_sd * z,
                "treated": treated}


@dataclass(frozen=True)
class AncovaModel:
    """Analysis model of :func:`ancova`: a normal linear regression with vague priors."""

    sd: float
    control_mean: float
    baseline_mean: float
    baseline_sd: float

    def __call__(self, data: Mapping[str, np.ndarray]) -> Any:
        import pymc as pm

        scale = VAGUE * self.sd
        with pm.Model() as model:
            y = pm.Data("y", data["y"])
            baseline = pm.Data("baseline", data["baseline"])
            treated = pm.Data("treated", data["treated"])
            control = pm.Normal("control_mean", mu=self.control_mean, sigma=scale)
            effect = pm.Normal("effect", mu=0.0, sigma=scale)
            slope = pm.Normal("slope", mu=0.0, sigma=scale)  # per baseline SD
            sigma = pm.HalfNormal("sigma", sigma=scale)
            covariate = (baseline - self.baseline_mean) / self.baseline_sd
            pm.Normal("outcome", mu=control + effect * treated + slope * covariate,
                      sigma=sigma, observed=y)
        return model


def ancova(
    effect_prior: Prior | float,
    assumed_effect: float,
    *,
    sd: float,
    correlation: float,
    correlation_prior: Prior | float | None = None,
    control_mean: float = 0.0,
    baseline_mean: float = 0.0,
    baseline_sd: float | None = None,
    better: Better = "higher",
    allocation: float = 1.0,
) -> GeneralModel:
    """ANCOVA of the outcome on treatment with the baseline value as covariate.

    Parameters
    ----------
    effect_prior
        Design prior of the treatment effect (treatment minus control mean outcome).
    assumed_effect
        The effect for classical power.
    sd
        SD of the outcome within an arm (> 0).
    correlation
        Assumed correlation of baseline and outcome within an arm, in (-1, 1).
    correlation_prior
        Design prior of the correlation (support inside (-1, 1)); default: fixed at
        ``correlation``.
    control_mean, baseline_mean, baseline_sd
        Mean outcome on control; mean and SD of the baseline value (``baseline_sd``
        defaults to ``sd``).
    better, allocation
        Direction of benefit; treatment patients per control patient.

    Returns
    -------
    GeneralModel
        Data ``y``, ``baseline``, ``treated`` (1 = treatment); true parameters ``effect``,
        ``correlation``.

    Notes
    -----
    Simulation: ``b = baseline_mean + baseline_sd z`` and
    ``y = control_mean + effect t + sd (rho z + sqrt(1 - rho^2) e)`` with ``z, e ~ N(0, 1)``,
    so the outcome has SD ``sd`` in each arm and correlation ``rho`` with the baseline.
    Analysis: ``y ~ N(mu + effect t + beta (b - baseline_mean) / baseline_sd, sigma)`` with
    ``mu, effect, beta ~ N(., 10 sd)`` and ``sigma ~ HalfNormal(10 sd)``.
    Adjusting for the baseline shrinks the variance of the effect estimate by
    ``1 - rho^2``: with 1:1 allocation and ``n`` patients in all,
    ``Var = 4 sd^2 (1 - rho^2) / n`` (Borm, Fransen & Lemmens 2007).

    References
    ----------
    Borm GF, Fransen J, Lemmens WAJG. A simple sample size formula for analysis of
    covariance in randomized clinical trials. J Clin Epidemiol 2007;60:1234-1238.

    Examples
    --------
    >>> from assurance.priors import Normal, Uniform
    >>> m = ancova(Normal(3.0, 1.5), 3.0, sd=10.0, correlation=0.5,
    ...            correlation_prior=Uniform(0.3, 0.7))
    >>> sorted(m.design_prior), m.assumed["correlation"]
    (['correlation', 'effect'], 0.5)
    """
    owner = "ancova"
    sd = check_real(sd, "sd", owner, low=0.0, low_open=True)
    rho = check_real(correlation, "correlation", owner, low=-1.0, high=1.0,
                     low_open=True, high_open=True)
    rho_prior = (PointMass(rho) if correlation_prior is None else
                 _prior_inside(correlation_prior, "correlation_prior", owner, -1.0, 1.0,
                               "[-1, 1]"))
    control_mean = check_real(control_mean, "control_mean", owner)
    baseline_mean = check_real(baseline_mean, "baseline_mean", owner)
    baseline_sd = sd if baseline_sd is None else check_real(
        baseline_sd, "baseline_sd", owner, low=0.0, low_open=True)
    settings = (sd, control_mean, baseline_mean, baseline_sd)
    return _general_model(
        name=f"ANCOVA with the baseline value as covariate (outcome SD {sd:g})",
        simulate=AncovaData(*settings),
        build=AncovaModel(*settings),
        design_prior={"effect": as_prior(effect_prior, "effect_prior", owner),
                      "correlation": rho_prior},
        assumed={"effect": check_real(assumed_effect, "assumed_effect", owner),
                 "correlation": rho},
        better=_check_better(better, owner),
        allocation=check_real(allocation, "allocation", owner, low=0.0, low_open=True),
        smallest_total=8,
        effect_scale="difference in means adjusted for the baseline value",
    )


# ---------------------------------------------------------------------------------------
# logistic regression with a binary covariate
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class LogisticData:
    """Simulator of one trial with a binary outcome and a binary covariate."""

    covariate_share: float
    covariate_log_odds: float

    def covariate(self, n_treatment: int, n_control: int) -> np.ndarray:
        """Covariate column: each arm stratified to ``covariate_share`` (rounded)."""
        parts = []
        for n in (n_treatment, n_control):
            k = int(round(self.covariate_share * n))
            parts += [np.ones(k), np.zeros(n - k)]
        return np.concatenate(parts)

    def __call__(self, rng: np.random.Generator, n_treatment: int, n_control: int,
                 truth: Mapping[str, float]) -> dict[str, np.ndarray]:
        a = intercept_for_rate(float(truth["control_rate"]), self.covariate_share,
                               self.covariate_log_odds)
        treated = _arm_indicator(n_treatment, n_control)
        x = self.covariate(n_treatment, n_control)
        p = _expit(a + float(truth["effect"]) * treated + self.covariate_log_odds * x)
        y = (rng.random(treated.size) < p).astype(np.int64)
        return {"y": y, "treated": treated, "covariate": x}


@dataclass(frozen=True)
class LogisticModel:
    """Analysis model of :func:`logistic`: logistic regression with normal priors."""

    intercept_centre: float
    analysis_sd: float

    def __call__(self, data: Mapping[str, np.ndarray]) -> Any:
        import pymc as pm

        with pm.Model() as model:
            y = pm.Data("y", data["y"])
            treated = pm.Data("treated", data["treated"])
            covariate = pm.Data("covariate", data["covariate"])
            intercept = pm.Normal("intercept", mu=self.intercept_centre,
                                  sigma=self.analysis_sd)
            effect = pm.Normal("effect", mu=0.0, sigma=self.analysis_sd)
            slope = pm.Normal("covariate_log_odds", mu=0.0, sigma=self.analysis_sd)
            pm.Bernoulli("outcome", logit_p=intercept + effect * treated + slope * covariate,
                         observed=y)
        return model


def logistic(
    log_odds_ratio_prior: Prior | float,
    assumed_log_odds_ratio: float,
    *,
    control_rate: float,
    control_rate_prior: Prior | float | None = None,
    covariate_share: float = 0.5,
    covariate_log_odds: float = 0.0,
    analysis_sd: float = 2.5,
    better: Better = "higher",
    allocation: float = 1.0,
) -> GeneralModel:
    """Logistic regression of a binary outcome on treatment and a binary covariate.

    Parameters
    ----------
    log_odds_ratio_prior
        Design prior of the treatment's log odds ratio (given the covariate).
    assumed_log_odds_ratio
        The log odds ratio for classical power.
    control_rate
        Assumed response rate on control over both strata, in (0, 1).
    control_rate_prior
        Design prior of that rate (support inside [0, 1]); default: fixed at
        ``control_rate``.
    covariate_share
        Share of patients with the covariate, in (0, 1); each arm is stratified to it.
    covariate_log_odds
        Log odds ratio of a response with the covariate.
    analysis_sd
        SD of the analysis priors on the log-odds scale (> 0).
    better, allocation
        Direction of benefit (a response is good: "higher"); treatment per control patient.

    Returns
    -------
    GeneralModel
        Data ``y`` (0/1), ``treated``, ``covariate``; true parameters ``effect`` (log odds
        ratio) and ``control_rate``.

    Notes
    -----
    Simulation: ``logit P(y = 1) = a + effect t + g x`` with ``a`` chosen so that control
    patients respond at ``control_rate`` over both strata:
    ``s expit(a + g) + (1 - s) expit(a) = control_rate``. Analysis: the same regression with
    ``a ~ N(logit(control_rate), analysis_sd)`` and ``effect, g ~ N(0, analysis_sd)``; the
    log posterior is concave, so the posterior mode is unique.

    Examples
    --------
    >>> from assurance.priors import Normal
    >>> m = logistic(Normal(0.6, 0.3), 0.6, control_rate=0.3, covariate_share=0.4,
    ...              covariate_log_odds=0.8)
    >>> m.effect_scale
    'log odds ratio'
    """
    owner = "logistic"
    rate = check_real(control_rate, "control_rate", owner, low=0.0, high=1.0,
                      low_open=True, high_open=True)
    rate_prior = (PointMass(rate) if control_rate_prior is None else
                  _prior_inside(control_rate_prior, "control_rate_prior", owner, 0.0, 1.0,
                                "[0, 1]"))
    share = check_real(covariate_share, "covariate_share", owner, low=0.0, high=1.0,
                       low_open=True, high_open=True)
    g = check_real(covariate_log_odds, "covariate_log_odds", owner)
    analysis_sd = check_real(analysis_sd, "analysis_sd", owner, low=0.0, low_open=True)
    return _general_model(
        name=f"Logistic regression with a binary covariate (share {share:g})",
        simulate=LogisticData(share, g),
        build=LogisticModel(intercept_for_rate(rate, share, g), analysis_sd),
        design_prior={"effect": as_prior(log_odds_ratio_prior, "log_odds_ratio_prior", owner),
                      "control_rate": rate_prior},
        assumed={"effect": check_real(assumed_log_odds_ratio, "assumed_log_odds_ratio",
                                      owner),
                 "control_rate": rate},
        better=_check_better(better, owner),
        allocation=check_real(allocation, "allocation", owner, low=0.0, low_open=True),
        smallest_total=8,
        effect_scale="log odds ratio",
    )


# ---------------------------------------------------------------------------------------
# hierarchical model over regions
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class RegionsData:
    """Simulator of one multi-regional trial (see :func:`hierarchical_regions`)."""

    sd: float
    shares: tuple[float, ...]
    control_mean: float
    region_mean_sd: float

    def region(self, n_treatment: int, n_control: int) -> np.ndarray:
        """Region index per patient: each arm split by the shares (largest remainders)."""
        shares = np.asarray(self.shares)
        index = np.arange(shares.size)
        return np.concatenate([np.repeat(index, _split(n, shares))
                               for n in (n_treatment, n_control)])

    def __call__(self, rng: np.random.Generator, n_treatment: int, n_control: int,
                 truth: Mapping[str, float]) -> dict[str, np.ndarray]:
        k = len(self.shares)
        region_effect = float(truth["effect"]) + float(truth["region_sd"]) * \
            rng.standard_normal(k)
        region_mean = self.control_mean + self.region_mean_sd * rng.standard_normal(k)
        treated = _arm_indicator(n_treatment, n_control)
        region = self.region(n_treatment, n_control)
        y = (region_mean[region] + region_effect[region] * treated
             + self.sd * rng.standard_normal(treated.size))
        return {"y": y, "treated": treated, "region": region}


@dataclass(frozen=True)
class RegionsModel:
    """Analysis model of :func:`hierarchical_regions` (non-centred regional effects)."""

    sd: float
    regions: int
    control_mean: float
    region_sd_scale: float

    def __call__(self, data: Mapping[str, np.ndarray]) -> Any:
        import pymc as pm

        scale = VAGUE * self.sd
        with pm.Model() as model:
            y = pm.Data("y", data["y"])
            treated = pm.Data("treated", data["treated"])
            region = pm.Data("region", data["region"])
            mean = pm.Normal("region_control_mean", mu=self.control_mean, sigma=scale,
                             shape=self.regions)
            effect = pm.Normal("effect", mu=0.0, sigma=scale)
            tau = pm.HalfNormal("region_sd", sigma=self.region_sd_scale)
            z = pm.Normal("region_z", mu=0.0, sigma=1.0, shape=self.regions)
            region_effect = pm.Deterministic("region_effect", effect + tau * z)
            sigma = pm.HalfNormal("sigma", sigma=scale)
            pm.Normal("outcome", mu=mean[region] + region_effect[region] * treated,
                      sigma=sigma, observed=y)
        return model


def hierarchical_regions(
    effect_prior: Prior | float,
    assumed_effect: float,
    *,
    sd: float,
    regions: Mapping[str, float] | Sequence[str],
    region_sd: float = 0.0,
    region_sd_prior: Prior | float | None = None,
    control_mean: float = 0.0,
    region_mean_sd: float = 0.0,
    region_sd_scale: float | None = None,
    better: Better = "higher",
    allocation: float = 1.0,
) -> GeneralModel:
    """Regional effects drawn around an overall effect; the overall effect is the target.

    Parameters
    ----------
    effect_prior
        Design prior of the overall effect (the mean of the regional effects).
    assumed_effect
        The overall effect for classical power.
    sd
        SD of the outcome within a region and arm (> 0).
    regions
        Region names with their shares of patients (a mapping; shares > 0, normalised), or
        a sequence of names (equal shares). At least two regions.
    region_sd, region_sd_prior
        Assumed SD of the true regional effects around the overall effect (>= 0), and its
        design prior (support inside [0, inf); default: fixed at ``region_sd``).
    control_mean, region_mean_sd
        Mean outcome on control, and the SD of the regions' control means around it
        (drawn anew for each simulated trial; default 0).
    region_sd_scale
        Scale of the analysis model's half-normal prior on the between-region SD (> 0);
        default ``sd / 4``.
    better, allocation
        Direction of benefit; treatment patients per control patient.

    Returns
    -------
    GeneralModel
        Data ``y``, ``treated``, ``region`` (0-based index); true parameters ``effect``,
        ``region_sd``.

    Notes
    -----
    Simulation: ``theta_r = effect + region_sd u_r``, ``m_r = control_mean +
    region_mean_sd v_r`` (``u_r, v_r ~ N(0, 1)``), ``y = m_r + theta_r t + sd e``; each arm
    is split over the regions by the shares (largest remainders). Analysis (non-centred,
    so the log posterior stays smooth as the between-region SD nears 0):
    ``theta_r = effect + tau z_r``, ``z_r ~ N(0, 1)``, ``tau ~ HalfNormal(region_sd_scale)``,
    ``m_r, effect ~ N(., 10 sd)``, ``sigma ~ HalfNormal(10 sd)``.

    Examples
    --------
    >>> from assurance.priors import Normal, Uniform
    >>> m = hierarchical_regions(Normal(2.0, 1.0), 2.0, sd=8.0,
    ...                          regions={"Europe": 0.5, "Americas": 0.3, "Asia": 0.2},
    ...                          region_sd=1.0, region_sd_prior=Uniform(0.0, 2.0))
    >>> m.simulate.region(5, 5).tolist()
    [0, 0, 0, 1, 2, 0, 0, 0, 1, 2]
    """
    owner = "hierarchical_regions"
    sd = check_real(sd, "sd", owner, low=0.0, low_open=True)
    if isinstance(regions, Mapping):
        names = list(regions)
        for name in names:
            check_text(name, "regions", owner, max_length=80)
        shares = np.array([check_real(v, "regions", owner, low=0.0, low_open=True)
                           for v in regions.values()])
    elif isinstance(regions, Sequence) and not isinstance(regions, str):
        names = [check_text(name, "regions", owner, max_length=80) for name in regions]
        shares = np.ones(len(names))
    else:
        raise AssuranceInputError(
            f"The 'regions' parameter of {owner} must be a mapping of region names to "
            f"shares or a list of region names. Got {regions!r} instead.")
    if len(names) < 2 or len(set(names)) != len(names):
        raise AssuranceInputError(
            f"The 'regions' parameter of {owner} must name at least 2 different regions. "
            f"Got {names!r} instead.")
    shares = shares / shares.sum()
    tau = check_real(region_sd, "region_sd", owner, low=0.0)
    tau_prior = (PointMass(tau) if region_sd_prior is None else
                 _prior_inside(region_sd_prior, "region_sd_prior", owner, 0.0, math.inf,
                               "[0, inf)"))
    control_mean = check_real(control_mean, "control_mean", owner)
    region_mean_sd = check_real(region_mean_sd, "region_mean_sd", owner, low=0.0)
    tau_scale = sd / 4.0 if region_sd_scale is None else check_real(
        region_sd_scale, "region_sd_scale", owner, low=0.0, low_open=True)
    # every region gets a patient in each arm once n_arm * smallest share >= 1
    per_arm = math.ceil(1.0 / float(shares.min()))
    return _general_model(
        name=f"Regional effects around an overall effect ({len(names)} regions: "
             f"{', '.join(names)})",
        simulate=RegionsData(sd, tuple(float(s) for s in shares), control_mean,
                             region_mean_sd),
        build=RegionsModel(sd, len(names), control_mean, tau_scale),
        design_prior={"effect": as_prior(effect_prior, "effect_prior", owner),
                      "region_sd": tau_prior},
        assumed={"effect": check_real(assumed_effect, "assumed_effect", owner),
                 "region_sd": tau},
        better=_check_better(better, owner),
        allocation=check_real(allocation, "allocation", owner, low=0.0, low_open=True),
        smallest_total=max(2 * per_arm, 4),
        effect_scale="overall difference in means",
    )


# ---------------------------------------------------------------------------------------
# borrowed historical control
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class TwoArmNormalData:
    """Simulator of a two-arm trial with a normal outcome (see :func:`borrowed_control`)."""

    sd: float

    def __call__(self, rng: np.random.Generator, n_treatment: int, n_control: int,
                 truth: Mapping[str, float]) -> dict[str, np.ndarray]:
        treated = _arm_indicator(n_treatment, n_control)
        y = (float(truth["control_mean"]) + float(truth["effect"]) * treated
             + self.sd * rng.standard_normal(treated.size))
        return {"y": y, "treated": treated}


@dataclass(frozen=True)
class BorrowedControlModel:
    """Analysis model of :func:`borrowed_control` (known outcome SD)."""

    sd: float
    historical_mean: float
    historical_se: float
    method: str
    weight: float
    vague_sd: float

    def __call__(self, data: Mapping[str, np.ndarray]) -> Any:
        import pymc as pm

        m, s_h, v = self.historical_mean, self.historical_se, self.vague_sd
        with pm.Model() as model:
            y = pm.Data("y", data["y"])
            treated = pm.Data("treated", data["treated"])
            if self.weight == 0.0:  # no borrowing: exactly the model without the history
                control = pm.Normal("control_mean", mu=m, sigma=v)
            elif self.method == "robust_mixture":
                if self.weight == 1.0:
                    control = pm.Normal("control_mean", mu=m, sigma=s_h)
                else:
                    control = pm.NormalMixture("control_mean",
                                               w=np.array([self.weight, 1.0 - self.weight]),
                                               mu=np.array([m, m]), sigma=np.array([s_h, v]))
            else:  # power prior: the historical likelihood raised to the weight
                control = pm.Normal("control_mean", mu=m, sigma=v)
                pm.Potential("historical", self.weight * pm.logp(
                    pm.Normal.dist(mu=control, sigma=s_h), m))
            effect = pm.Normal("effect", mu=0.0, sigma=VAGUE * self.sd)
            pm.Normal("outcome", mu=control + effect * treated, sigma=self.sd, observed=y)
        return model


def borrowed_control(
    effect_prior: Prior | float,
    assumed_effect: float,
    *,
    sd: float,
    historical_mean: float,
    historical_n: int,
    historical_sd: float | None = None,
    method: Literal["robust_mixture", "power_prior"] = "robust_mixture",
    weight: float = 0.5,
    vague_sd: float | None = None,
    control_mean: float | None = None,
    control_mean_prior: Prior | float | None = None,
    better: Better = "higher",
    allocation: float = 1.0,
) -> GeneralModel:
    """Two-arm normal outcome whose control mean borrows from a historical control arm.

    The outcome SD is taken as known in the analysis (as in a z analysis), so each
    posterior has a closed form to check against.

    Parameters
    ----------
    effect_prior
        Design prior of the treatment effect (difference in means).
    assumed_effect
        The effect for classical power.
    sd
        SD of the outcome within an arm (> 0), known to the analysis.
    historical_mean, historical_n, historical_sd
        The historical control arm: mean outcome, patients (>= 1) and SD (default ``sd``).
    method
        ``"robust_mixture"``: the control mean's prior is ``weight N(m_h, s_h) + (1 - weight)
        N(m_h, vague_sd)`` with ``s_h = historical_sd / sqrt(historical_n)``;
        ``"power_prior"``: ``N(m_h, vague_sd)`` times the historical likelihood raised to
        ``weight``.
    weight
        In [0, 1]; 0 means no borrowing (the control mean gets the vague prior alone).
    vague_sd
        SD of the vague prior on the control mean (> 0); default ``sd`` (one patient's worth
        of information).
    control_mean, control_mean_prior
        Assumed true control mean of the new trial (default ``historical_mean``) and its
        design prior (default: fixed at ``control_mean``). A prior spread here is drift
        between the historical and the new control arm.
    better, allocation
        Direction of benefit; treatment patients per control patient.

    Returns
    -------
    GeneralModel
        Data ``y``, ``treated``; true parameters ``effect`` and ``control_mean``.

    Notes
    -----
    With ``n_c`` control patients of mean ``ybar_c``, the power prior gives the control mean
    the normal posterior of precision ``1 / vague_sd^2 + weight / s_h^2 + n_c / sd^2``. The
    robust mixture gives a two-component normal mixture whose weights follow each
    component's prior predictive density of ``ybar_c`` (Schmidli et al. 2014): when the new
    control data conflict with the historical arm, the vague component takes over and
    borrowing stops. That posterior can have two modes; the Laplace fast path then follows
    one of them, and the NUTS check on a subset of trials shows the disagreement.

    References
    ----------
    Schmidli H, Gsteiger S, Roychoudhury S, O'Hagan A, Spiegelhalter D, Neuenschwander B.
    Robust meta-analytic-predictive priors in clinical trials with historical control
    information. Biometrics 2014;70:1023-1032. Ibrahim JG, Chen M-H. Power prior
    distributions for regression models. Stat Sci 2000;15:46-60.

    Examples
    --------
    >>> from assurance.priors import Normal
    >>> m = borrowed_control(Normal(4.0, 2.0), 4.0, sd=12.0, historical_mean=20.0,
    ...                      historical_n=150, weight=0.8)
    >>> m.assumed
    {'effect': 4.0, 'control_mean': 20.0}
    """
    owner = "borrowed_control"
    sd = check_real(sd, "sd", owner, low=0.0, low_open=True)
    m_h = check_real(historical_mean, "historical_mean", owner)
    n_h = check_int(historical_n, "historical_n", owner, low=1)
    sd_h = sd if historical_sd is None else check_real(
        historical_sd, "historical_sd", owner, low=0.0, low_open=True)
    method = check_choice(method, "method", owner, ("robust_mixture", "power_prior"))
    weight = check_real(weight, "weight", owner, low=0.0, high=1.0)
    vague = sd if vague_sd is None else check_real(vague_sd, "vague_sd", owner, low=0.0,
                                                   low_open=True)
    assumed_control = m_h if control_mean is None else check_real(
        control_mean, "control_mean", owner)
    control_prior = (PointMass(assumed_control) if control_mean_prior is None else
                     as_prior(control_mean_prior, "control_mean_prior", owner))
    words = {"robust_mixture": "robust mixture prior", "power_prior": "power prior"}[method]
    return _general_model(
        name=f"Borrowed control: {words}, weight {weight:g}, on {n_h} historical patients",
        simulate=TwoArmNormalData(sd),
        build=BorrowedControlModel(sd, m_h, sd_h / math.sqrt(n_h), method, weight, vague),
        design_prior={"effect": as_prior(effect_prior, "effect_prior", owner),
                      "control_mean": control_prior},
        assumed={"effect": check_real(assumed_effect, "assumed_effect", owner),
                 "control_mean": assumed_control},
        better=_check_better(better, owner),
        allocation=check_real(allocation, "allocation", owner, low=0.0, low_open=True),
        smallest_total=4,
        effect_scale="difference in means",
    )


#: The built-in models by design-file name.
BUILTIN_MODELS = {
    "ancova": ancova,
    "logistic": logistic,
    "hierarchical_regions": hierarchical_regions,
    "borrowed_control": borrowed_control,
}
