"""Precision planning: how wide the posterior interval will be, as n grows.

A significant result says an effect exists, not how big it is. For a model of the data and
two priors (the **analysis prior**, which the final posterior uses, and the **design
prior**, which generates the data; by default the same), this module reports for each
sample size the distribution of the posterior interval width over the prior predictive
distribution of the data, and finds the sample size meeting a precision target under the
criteria of Joseph, Wolfson & du Berger (1995) and Joseph & Belisle (1997):

* **ALC** (average length): fixed coverage, average width ``<= length``;
* **ACC** (average coverage): fixed length, average posterior coverage ``>= coverage``;
* **WOC** (worst outcome): width ``<= length`` for every possible data set;
* **MWOC** (modified worst outcome): the same over the most likely ``likely_share`` of data
  sets.

Models (each a small frozen dataclass):

* :class:`NormalMean`: a mean or a difference of means, SD known (exact, closed form);
* :class:`NormalMeanUnknownSD`: a mean, SD unknown, normal-gamma priors (exact up to
  quadrature);
* :class:`OneProportion`: one proportion, beta prior (exact enumeration, or simulation);
* :class:`TwoProportions`: difference or log odds ratio of two proportions (simulation);
* :class:`HazardRatio`: log hazard ratio (simulation);
* :class:`RateRatio`: log rate ratio of counts (simulation).

Entry points: :func:`interval_width_curve` (an ``xarray.Dataset`` over ``n``) and
:func:`solve_precision_n` (a :class:`PrecisionAnswer`).

Examples
--------
>>> from assurance.precision import BetaPrior, OneProportion, solve_precision_n
>>> model = OneProportion(prior=BetaPrior(1, 1))
>>> ans = solve_precision_n(model, length=0.2, criterion="ALC")
>>> ans.reached, ans.n_total
(True, 56)
"""

from __future__ import annotations

import json
import math
from abc import ABC, abstractmethod
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass
from typing import Any, ClassVar, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_int, check_real, check_real_array
from ..compute import interval_width as engine
from ..endpoints.base import TwoArmSizing
from ..errors import AssuranceInputError
from ..priors.families import Normal, Prior

__all__ = [
    "BetaPrior",
    "NormalGammaPrior",
    "PrecisionModel",
    "NormalMean",
    "NormalMeanUnknownSD",
    "OneProportion",
    "TwoProportions",
    "HazardRatio",
    "RateRatio",
    "PrecisionAnswer",
    "interval_width_curve",
    "solve_precision_n",
    "CRITERIA",
    "INTERVALS",
]

Interval = Literal["highest_density", "equal_tailed"]
Criterion = Literal["ALC", "ACC", "WOC", "MWOC"]
Method = Literal["auto", "exact", "simulation"]
INTERVALS: tuple[str, ...] = ("highest_density", "equal_tailed")
CRITERIA: tuple[str, ...] = ("ALC", "ACC", "WOC", "MWOC")
METHODS: tuple[str, ...] = ("auto", "exact", "simulation")

DEFAULT_DRAWS = 2000
DEFAULT_POSTERIOR_DRAWS = 2000
DEFAULT_SEED = 20260101
#: largest sample size for exact enumeration of a proportion (memory grows with n)
MAX_ENUMERATED_N = 2_000_000
#: outcomes enumerated per batch of sample sizes
_BATCH_OUTCOMES = 1_000_000
#: largest sample size any function accepts
MAX_N = 10**9

_INTERVAL_TEXT = {"highest_density": "highest-density", "equal_tailed": "equal-tailed"}
_SCALES = ("difference", "log_odds_ratio", "log_risk_ratio")


# ------------------------------------------------------------------------------------------
# prior families used here
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BetaPrior:
    """Beta(a, b) prior on a proportion: "worth" ``a + b`` patients, ``a`` of them responders.

    Examples
    --------
    >>> BetaPrior(3, 7).mean()
    0.3
    """

    a: float
    b: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "a", check_real(self.a, "a", "BetaPrior", low=0,
                                                 low_open=True))
        object.__setattr__(self, "b", check_real(self.b, "b", "BetaPrior", low=0,
                                                 low_open=True))

    def mean(self) -> float:
        """Prior mean ``a / (a + b)``."""
        return self.a / (self.a + self.b)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "beta", "a": self.a, "b": self.b}


@dataclass(frozen=True)
class NormalGammaPrior:
    """Normal-gamma prior on a normal mean and precision ``tau = 1 / sigma^2``.

    ``mean | tau ~ N(mean, 1 / (n0 tau))`` and ``tau ~ Gamma(shape, rate)``: the prior on the
    mean is "worth" ``n0`` observations; the precision prior is the summary of ``2 shape``
    observations with sum of squares ``2 rate`` (typical SD ``sqrt(rate / shape)``).

    Improper limits are allowed for an analysis prior: ``n0 = 0`` (flat on the mean),
    ``rate = 0`` and ``shape <= 0``; ``NormalGammaPrior(0, n0=0, shape=-0.5, rate=0)`` is the
    usual reference prior ``p(mean, sigma) ~ 1 / sigma``, whose posterior interval is the
    t interval. The posterior is then proper only from some sample size on.

    Examples
    --------
    >>> NormalGammaPrior(mean=0.0, n0=2.0, shape=3.0, rate=12.0).typical_sd()
    2.0
    """

    mean: float = 0.0
    n0: float = 1.0
    shape: float = 2.0
    rate: float = 2.0

    def __post_init__(self) -> None:
        owner = "NormalGammaPrior"
        object.__setattr__(self, "mean", check_real(self.mean, "mean", owner))
        object.__setattr__(self, "n0", check_real(self.n0, "n0", owner, low=0))
        object.__setattr__(self, "shape", check_real(self.shape, "shape", owner, low=-1e6))
        object.__setattr__(self, "rate", check_real(self.rate, "rate", owner, low=0))

    @property
    def proper(self) -> bool:
        """True when the prior is a probability distribution (``n0, shape, rate > 0``)."""
        return self.n0 > 0 and self.shape > 0 and self.rate > 0

    def typical_sd(self) -> float:
        """``sqrt(rate / shape)``: the SD at the prior mean of the precision."""
        if not (self.shape > 0 and self.rate > 0):
            raise AssuranceInputError(
                f"NormalGammaPrior(shape={self.shape:g}, rate={self.rate:g}) has no typical "
                "SD; give shape > 0 and rate > 0.")
        return math.sqrt(self.rate / self.shape)

    def params(self) -> engine.NormalGammaParams:
        return engine.NormalGammaParams(self.mean, self.n0, self.shape, self.rate)

    def to_dict(self) -> dict[str, Any]:
        return {"family": "normal_gamma", "mean": self.mean, "n0": self.n0,
                "shape": self.shape, "rate": self.rate}


def _rate_arm(value: Any, name: str, owner: str) -> BetaPrior | float:
    """A design arm: a :class:`BetaPrior` or a fixed rate in (0, 1)."""
    if isinstance(value, BetaPrior):
        return value
    if isinstance(value, int | float | np.floating | np.integer) and not isinstance(value, bool):
        return check_real(value, name, owner, low=0, high=1, low_open=True, high_open=True)
    raise AssuranceInputError(
        f"The '{name}' parameter of {owner} must be a BetaPrior(a, b) or a fixed rate in "
        f"(0, 1). Got {value!r} instead.")


def _arm_dict(value: BetaPrior | float) -> dict[str, Any]:
    return value.to_dict() if isinstance(value, BetaPrior) else {"family": "fixed",
                                                                 "value": value}


def _draw_rates(arm: BetaPrior | float, size: int, rng: np.random.Generator) -> np.ndarray:
    if isinstance(arm, BetaPrior):
        return rng.beta(arm.a, arm.b, size)
    return np.full(size, float(arm))


def _z(coverage: float) -> float:
    return float(special.ndtri(0.5 + coverage / 2))


# ------------------------------------------------------------------------------------------
# models
# ------------------------------------------------------------------------------------------
class PrecisionModel(ABC):
    """What :func:`interval_width_curve` and :func:`solve_precision_n` need from a model.

    Examples
    --------
    >>> m = OneProportion()
    >>> isinstance(m, PrecisionModel), m.methods, m.smallest_n
    (True, ('exact', 'simulation'), 1)
    """

    #: methods the model offers, the first being the default
    methods: ClassVar[tuple[str, ...]] = ("exact",)
    #: whether the worst outcome over all data sets is bounded (and computed exactly)
    worst_outcome: ClassVar[bool] = True
    #: whether highest-density and equal-tailed intervals coincide (symmetric posterior)
    symmetric: ClassVar[bool] = True

    @property
    @abstractmethod
    def smallest_n(self) -> int:
        """Fewest patients (all arms) for which the posterior is proper."""

    def split(self, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(treatment, control) sizes; one group: (n, 0)."""
        n = np.asarray(n, dtype=np.int64)
        return n.copy(), np.zeros_like(n)

    @abstractmethod
    def prior_width(self, coverage: float, interval: str) -> float:
        """Width of the analysis prior's own interval (inf for an improper prior)."""

    @abstractmethod
    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        """Width of the classical confidence interval at the assumed values."""

    def exact(self, n: np.ndarray, *, coverage: float, length: float | None, interval: str,
              likely_share: float, widths: bool = True) -> dict[str, np.ndarray]:
        """Exact summaries per n (models with ``"exact"`` in :attr:`methods`)."""
        raise NotImplementedError  # pragma: no cover - guarded by the public layer

    def simulate(self, n: int, *, coverage: float, length: float | None, interval: str,
                 likely_share: float, draws: int, posterior_draws: int, seed: int
                 ) -> dict[str, float]:
        """Monte Carlo summaries at one n (models with ``"simulation"`` in :attr:`methods`)."""
        raise NotImplementedError  # pragma: no cover - guarded by the public layer

    @abstractmethod
    def describe(self) -> str:
        """One line a planner can read."""

    @abstractmethod
    def to_dict(self) -> dict[str, Any]:
        """Plain description of every parameter (JSON-able)."""


def _parameter_rng(seed: int) -> np.random.Generator:
    """Generator for the design-prior draws: the same for every n (common random numbers)."""
    return np.random.default_rng([seed, 0])


def _data_rng(seed: int, n: int) -> np.random.Generator:
    """Generator for the data at size n: depends on (seed, n) only, so a size gives the same
    numbers in a curve and in the solver."""
    return np.random.default_rng([seed, 1, int(n)])


def _normal_posterior_summary(post_sd: np.ndarray, coverage: float, length: float | None,
                              likely_share: float) -> dict[str, float]:
    """Monte Carlo summaries when each data set's posterior is normal with sd ``post_sd``."""
    width = 2 * _z(coverage) * post_sd
    cover = None
    if length is not None:
        cover = 1.0 - 2.0 * special.ndtr(-0.5 * length / post_sd)
    return engine.summarise_simulated(width, cover, likely_share)


@dataclass(frozen=True)
class NormalMean(TwoArmSizing, PrecisionModel):
    """Mean of a normal outcome (or difference of two means) with known SD.

    Parameters
    ----------
    sigma
        Outcome SD per patient, > 0 (known).
    prior
        Analysis prior on the mean (one group) or on the difference treatment minus
        control (two arms): a :class:`~assurance.Normal`, or None for a flat prior.
    design_prior
        Design prior on the same quantity (any prior). With sigma known the posterior width
        does not depend on the data, so it does not change any result; it is kept for the
        record.
    layout
        ``"two_arm"`` (difference of means; the level of the control mean has a flat prior)
        or ``"single_arm"`` (one mean).
    allocation
        Treatment patients per control patient (two arms), > 0.

    Notes
    -----
    Posterior variance ``1 / (1/v0 + 1/(sigma^2 k(n)))`` with ``k = 1/n`` (one group) or
    ``1/n_t + 1/n_c``; every data set gives the same width ``2 z sd_post``, so ALC, ACC, WOC
    and MWOC coincide. One group with ``v0 = sigma^2 / n0``:
    ``n = (2 z sigma / l)^2 - n0`` (Joseph & Belisle 1997).

    Examples
    --------
    >>> from assurance import Normal
    >>> m = NormalMean(sigma=1.0, prior=Normal(0.0, 0.5), layout="single_arm")
    >>> round(float(m.frequentist_width(np.array([100]), 0.95)[0]), 4)
    0.392
    """

    sigma: float
    prior: Normal | None = None
    design_prior: Prior | None = None
    layout: Literal["two_arm", "single_arm"] = "two_arm"
    allocation: float = 1.0

    def __post_init__(self) -> None:
        owner = "NormalMean"
        object.__setattr__(self, "sigma", check_real(self.sigma, "sigma", owner, low=0,
                                                     low_open=True))
        if self.prior is not None and not isinstance(self.prior, Normal):
            raise AssuranceInputError(
                f"The 'prior' parameter of {owner} must be a Normal prior (conjugate) or None "
                f"for a flat prior. Got {self.prior!r} instead.")
        if self.design_prior is not None and not isinstance(self.design_prior, Prior):
            raise AssuranceInputError(
                f"The 'design_prior' parameter of {owner} must be a prior or None. Got "
                f"{self.design_prior!r} instead.")
        check_choice(self.layout, "layout", owner, ["two_arm", "single_arm"])
        object.__setattr__(self, "allocation", check_real(self.allocation, "allocation",
                                                          owner, low=0, low_open=True))

    @property
    def smallest_n(self) -> int:
        return 2 if self.layout == "two_arm" else 1

    def split(self, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self.arm_sizes(n)

    def _k(self, n: np.ndarray) -> np.ndarray:
        n_t, n_c = self.split(n)
        if self.layout == "single_arm":
            return 1.0 / n_t
        return 1.0 / n_t + 1.0 / n_c

    def posterior_sd(self, n: np.ndarray) -> np.ndarray:
        """Posterior SD of the mean (or difference) at each total n."""
        data_var = self.sigma**2 * self._k(n)
        if self.prior is None:
            return np.sqrt(data_var)
        return np.sqrt(1.0 / (1.0 / self.prior.sigma**2 + 1.0 / data_var))

    def prior_width(self, coverage: float, interval: str) -> float:
        return math.inf if self.prior is None else 2 * _z(coverage) * self.prior.sigma

    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        return 2 * _z(coverage) * self.sigma * np.sqrt(self._k(n))

    def exact(self, n, *, coverage, length, interval, likely_share, widths=True):
        sd = self.posterior_sd(n)
        width = 2 * _z(coverage) * sd
        out = {key: width.copy() for key in ("width_mean", "width_median", "width_q90",
                                             "width_worst", "width_worst_likely")}
        if length is not None:
            cov = 1.0 - 2.0 * special.ndtr(-0.5 * length / sd)
            out.update({key: cov.copy() for key in ("coverage_mean", "coverage_worst",
                                                    "coverage_worst_likely")})
        return out

    def describe(self) -> str:
        what = "difference of two normal means" if self.layout == "two_arm" else "normal mean"
        prior = "flat" if self.prior is None else self.prior.describe()
        return f"{what}, SD {self.sigma:g} known; analysis prior {prior}"

    def to_dict(self) -> dict[str, Any]:
        return {"model": "normal_mean", "sigma": self.sigma,
                "prior": None if self.prior is None else self.prior.to_dict(),
                "design_prior": None if self.design_prior is None
                else self.design_prior.to_dict(),
                "layout": self.layout, "allocation": self.allocation}


@dataclass(frozen=True)
class NormalMeanUnknownSD(PrecisionModel):
    """Mean of a normal outcome with unknown SD, normal-gamma priors (one group).

    Parameters
    ----------
    prior
        Analysis prior (:class:`NormalGammaPrior`; may be improper, e.g. the reference prior
        ``NormalGammaPrior(0, n0=0, shape=-0.5, rate=0)``).
    design_prior
        Proper normal-gamma prior that generates the data; default the analysis prior.
        Its ``shape`` must exceed 1/2 for the average width to be finite.
    assumed_sd
        SD for the classical t interval's width; default the design prior's
        ``sqrt(rate / shape)``.

    Notes
    -----
    Posterior ``t_{2 a_n}(m_n, b_n / (a_n k_n))``; the width depends on the data through
    ``b_n`` only, whose prior predictive distribution is integrated numerically (see
    :func:`assurance.compute.interval_width.normal_gamma_width`). Some data sets have
    arbitrarily large spread, so the worst outcome (WOC) is unbounded; MWOC uses the
    ``likely_share`` quantile of the width.

    Examples
    --------
    >>> m = NormalMeanUnknownSD(NormalGammaPrior(mean=0.0, n0=1.0, shape=3.0, rate=3.0))
    >>> m.smallest_n
    1
    """

    prior: NormalGammaPrior
    design_prior: NormalGammaPrior | None = None
    assumed_sd: float | None = None

    worst_outcome: ClassVar[bool] = False

    def __post_init__(self) -> None:
        owner = "NormalMeanUnknownSD"
        if not isinstance(self.prior, NormalGammaPrior):
            raise AssuranceInputError(
                f"The 'prior' parameter of {owner} must be a NormalGammaPrior. Got "
                f"{self.prior!r} instead.")
        design, name = (self.design_prior, "design_prior") if self.design_prior is not None \
            else (self.prior, "prior")
        if not isinstance(design, NormalGammaPrior):
            raise AssuranceInputError(
                f"The 'design_prior' parameter of {owner} must be a NormalGammaPrior or None. "
                f"Got {design!r} instead.")
        if not design.proper:
            what = "" if name == "design_prior" else \
                " (with no design_prior, the analysis prior also generates the data)"
            raise AssuranceInputError(
                f"The '{name}' parameter of {owner} must be a proper normal-gamma prior "
                f"(n0 > 0, shape > 0, rate > 0) to generate data{what}. Got {design!r} "
                "instead.")
        if design.shape <= 0.5:
            raise AssuranceInputError(
                f"The '{name}' parameter of {owner} must have shape > 0.5: with shape "
                f"{design.shape:g} the SD is so uncertain that the average interval width is "
                f"infinite. Got {design!r} instead.")
        if self.assumed_sd is not None:
            object.__setattr__(self, "assumed_sd", check_real(
                self.assumed_sd, "assumed_sd", owner, low=0, low_open=True))

    @property
    def design(self) -> NormalGammaPrior:
        return self.prior if self.design_prior is None else self.design_prior

    @property
    def smallest_n(self) -> int:
        p = self.prior
        # shape + n/2 > 0, and the posterior rate positive: b0 > 0, n0 > 0, or a spread (n >= 2)
        n = max(1, math.floor(-2 * p.shape) + 1)
        return n if (p.rate > 0 or p.n0 > 0) else max(n, 2)

    def prior_width(self, coverage: float, interval: str) -> float:
        p = self.prior
        if not p.proper:
            return math.inf
        scale = math.sqrt(p.rate / (p.shape * p.n0))
        return float(2 * special.stdtrit(2 * p.shape, 0.5 + coverage / 2) * scale)

    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        sd = self.assumed_sd if self.assumed_sd is not None else self.design.typical_sd()
        n = np.asarray(n, dtype=float)
        out = np.full(n.shape, np.inf)  # one observation: no t interval
        ok = n >= 2
        out[ok] = 2 * special.stdtrit(n[ok] - 1, 0.5 + coverage / 2) * sd / np.sqrt(n[ok])
        return out

    def exact(self, n, *, coverage, length, interval, likely_share, widths=True):
        return engine.normal_gamma_width(np.asarray(n), analysis=self.prior.params(),
                                         design=self.design.params(), coverage=coverage,
                                         length=length, likely_share=likely_share)

    def describe(self) -> str:
        return ("normal mean, SD unknown; analysis prior normal-gamma"
                f"(mean={self.prior.mean:g}, n0={self.prior.n0:g}, shape={self.prior.shape:g},"
                f" rate={self.prior.rate:g})")

    def to_dict(self) -> dict[str, Any]:
        return {"model": "normal_mean_unknown_sd", "prior": self.prior.to_dict(),
                "design_prior": self.design.to_dict(), "assumed_sd": self.assumed_sd}


@dataclass(frozen=True)
class OneProportion(PrecisionModel):
    """One proportion with a beta prior.

    Parameters
    ----------
    prior
        Analysis prior (:class:`BetaPrior`).
    design_prior
        Prior generating the data: a :class:`BetaPrior` (beta-binomial prior predictive) or a
        fixed rate; default the analysis prior.
    assumed_rate
        Rate for the classical (Wald) interval's width; default the design prior's mean.

    Notes
    -----
    Exact: every outcome ``x = 0..n`` with its beta-binomial probability and the
    Beta(a + x, b + n - x) posterior's highest-density (shortest) or equal-tailed interval
    (Joseph, Wolfson & du Berger 1995). Simulation: data sets drawn from the design prior,
    each posterior's interval computed exactly (no posterior draws, whose noise would bias
    the width quantiles); kept mainly as a check on the simulation engines.

    Examples
    --------
    >>> OneProportion(BetaPrior(2, 8)).frequentist_width(np.array([100]), 0.95).round(4)
    array([0.1568])
    """

    prior: BetaPrior = BetaPrior(1.0, 1.0)
    design_prior: BetaPrior | float | None = None
    assumed_rate: float | None = None

    methods: ClassVar[tuple[str, ...]] = ("exact", "simulation")
    symmetric: ClassVar[bool] = False

    def __post_init__(self) -> None:
        owner = "OneProportion"
        if not isinstance(self.prior, BetaPrior):
            raise AssuranceInputError(
                f"The 'prior' parameter of {owner} must be a BetaPrior(a, b). Got "
                f"{self.prior!r} instead.")
        if self.design_prior is not None:
            object.__setattr__(self, "design_prior",
                               _rate_arm(self.design_prior, "design_prior", owner))
        if self.assumed_rate is not None:
            object.__setattr__(self, "assumed_rate", check_real(
                self.assumed_rate, "assumed_rate", owner, low=0, high=1, low_open=True,
                high_open=True))

    @property
    def design(self) -> BetaPrior | float:
        return self.prior if self.design_prior is None else self.design_prior

    @property
    def smallest_n(self) -> int:
        return 1

    def prior_width(self, coverage: float, interval: str) -> float:
        a, b = np.array([self.prior.a]), np.array([self.prior.b])
        if interval == "highest_density":
            lo, hi = engine.beta_shortest_interval(a, b, coverage)
        else:
            lo, hi = engine.beta_equal_tailed_interval(a, b, coverage)
        return float(hi[0] - lo[0])

    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        design = self.design
        p = self.assumed_rate if self.assumed_rate is not None else (
            design.mean() if isinstance(design, BetaPrior) else design)
        return 2 * _z(coverage) * np.sqrt(p * (1 - p) / np.asarray(n, dtype=float))

    def exact(self, n, *, coverage, length, interval, likely_share, widths=True):
        design = self.design
        design_arg = (design.a, design.b) if isinstance(design, BetaPrior) else float(design)
        parts = []
        for batch in _batches(np.asarray(n, dtype=np.int64)):
            parts.append(engine.binomial_enumeration(
                batch, prior=(self.prior.a, self.prior.b), design=design_arg,
                coverage=coverage, length=length, interval=interval,
                likely_share=likely_share, widths=widths))
        return {key: np.concatenate([p[key] for p in parts]) for key in parts[0]}

    def simulate(self, n, *, coverage, length, interval, likely_share, draws,
                 posterior_draws, seed):
        rate = _draw_rates(self.design, draws, _parameter_rng(seed))
        rng = _data_rng(seed, n)
        x = rng.binomial(n, rate)
        # each data set's posterior interval exactly (no posterior draws: their noise
        # would widen the distribution of widths and bias its quantiles)
        a, b = self.prior.a + x, self.prior.b + n - x
        hd = interval == "highest_density"
        lo, hi = (engine.beta_shortest_interval if hd
                  else engine.beta_equal_tailed_interval)(a, b, coverage)
        cover = None
        if length is not None:
            cover = (engine.beta_best_coverage if hd
                     else engine.beta_equal_tailed_coverage)(a, b, length)
        return engine.summarise_simulated(hi - lo, cover, likely_share)

    def describe(self) -> str:
        return f"one proportion; analysis prior beta({self.prior.a:g}, {self.prior.b:g})"

    def to_dict(self) -> dict[str, Any]:
        return {"model": "one_proportion", "prior": self.prior.to_dict(),
                "design_prior": _arm_dict(self.design), "assumed_rate": self.assumed_rate}


def _batches(n: np.ndarray) -> list[np.ndarray]:
    """Split sizes so that each batch enumerates at most about a million outcomes."""
    out, start, total = [], 0, 0
    for i, ni in enumerate(n):
        total += int(ni) + 1
        if total > _BATCH_OUTCOMES and i > start:
            out.append(n[start:i])
            start, total = i, int(ni) + 1
    out.append(n[start:])
    return out


def _posterior_draw_stats(sampler: Callable[[np.ndarray, np.random.Generator], np.ndarray],
                          draws: int, rng: np.random.Generator, coverage: float,
                          length: float | None, interval: str
                          ) -> tuple[np.ndarray, np.ndarray | None]:
    """Width (and fixed-length coverage) for each data set from its posterior draws."""
    width = np.empty(draws)
    cover = np.empty(draws) if length is not None else None
    for start in range(0, draws, 250):
        rows = np.arange(start, min(start + 250, draws))
        post = sampler(rows, rng)
        width[rows] = engine.widths_from_draws(post, coverage, interval)
        if cover is not None:
            cover[rows] = engine.coverage_from_draws(post, length, interval)
    return width, cover


@dataclass(frozen=True)
class TwoProportions(TwoArmSizing, PrecisionModel):
    """Difference of two proportions, or their log odds / risk ratio, beta priors per arm.

    Parameters
    ----------
    control_prior, treatment_prior
        Analysis priors on the two rates (:class:`BetaPrior`).
    scale
        ``"difference"`` (``p_t - p_c``), ``"log_odds_ratio"`` or ``"log_risk_ratio"``
        (``log(p_t / p_c)``).
    design_control, design_treatment
        Priors generating each arm's rate: :class:`BetaPrior` or a fixed rate; default the
        analysis priors.
    design_effect
        Alternatively to ``design_treatment``: a prior on the effect (on ``scale``), the
        treatment rate following from the control rate and the effect. Pairs of rates
        outside (0, 1) are redrawn, which conditions the prior on valid rates (as the
        binary endpoint drops that mass).
    allocation
        Treatment patients per control patient, > 0.
    assumed_rates
        ``(control, treatment)`` rates for the classical (Wald) interval; default the design
        means.

    Notes
    -----
    By simulation: rates from the design priors, binomial counts, the conjugate
    Beta posterior of each arm, and the effect's interval computed from its distribution
    function, one integral over the narrower arm's posterior
    (:func:`assurance.compute.interval_width.effect_interval_widths`): no posterior draws,
    so the width quantiles (and MWOC) are unbiased. For the highest-density interval, data
    sets whose two posteriors both have an infinite peak on the scale (prior shapes below
    1 with no responders, or all, in both arms) take ``posterior_draws`` draws of the
    effect instead (``arviz.hdi`` with a finite-draw correction). The analysis prior's own
    interval (for checking a target length) is computed from 200 000 prior draws.

    Examples
    --------
    >>> m = TwoProportions(BetaPrior(3, 7), BetaPrior(5, 5))
    >>> m.frequentist_width(np.array([200]), 0.95).round(3)  # 2 z sqrt(.21/100 + .25/100)
    array([0.266])
    """

    control_prior: BetaPrior = BetaPrior(1.0, 1.0)
    treatment_prior: BetaPrior = BetaPrior(1.0, 1.0)
    scale: Literal["difference", "log_odds_ratio", "log_risk_ratio"] = "difference"
    design_control: BetaPrior | float | None = None
    design_treatment: BetaPrior | float | None = None
    design_effect: Prior | None = None
    allocation: float = 1.0
    assumed_rates: tuple[float, float] | None = None

    layout: ClassVar[str] = "two_arm"
    methods: ClassVar[tuple[str, ...]] = ("simulation",)
    worst_outcome: ClassVar[bool] = False
    symmetric: ClassVar[bool] = False

    def __post_init__(self) -> None:
        owner = "TwoProportions"
        for name in ("control_prior", "treatment_prior"):
            if not isinstance(getattr(self, name), BetaPrior):
                raise AssuranceInputError(
                    f"The '{name}' parameter of {owner} must be a BetaPrior(a, b). Got "
                    f"{getattr(self, name)!r} instead.")
        check_choice(self.scale, "scale", owner, list(_SCALES))
        for name in ("design_control", "design_treatment"):
            if getattr(self, name) is not None:
                object.__setattr__(self, name, _rate_arm(getattr(self, name), name, owner))
        if self.design_effect is not None:
            if not isinstance(self.design_effect, Prior):
                raise AssuranceInputError(
                    f"The 'design_effect' parameter of {owner} must be a prior on the "
                    f"{self.scale.replace('_', ' ')} or None. Got {self.design_effect!r} "
                    "instead.")
            if self.design_treatment is not None:
                raise AssuranceInputError(
                    f"The 'design_treatment' parameter of {owner} must be None when "
                    "design_effect is given (the effect and the control rate set the "
                    f"treatment rate). Got {self.design_treatment!r} instead.")
        object.__setattr__(self, "allocation", check_real(self.allocation, "allocation",
                                                          owner, low=0, low_open=True))
        if self.assumed_rates is not None:
            rates = self.assumed_rates
            if isinstance(rates, str) or not isinstance(rates, Sequence) or len(rates) != 2:
                raise AssuranceInputError(
                    f"The 'assumed_rates' parameter of {owner} must be a pair (control, "
                    f"treatment) of rates in (0, 1). Got {rates!r} instead.")
            object.__setattr__(self, "assumed_rates", tuple(
                check_real(r, "assumed_rates", owner, low=0, high=1, low_open=True,
                           high_open=True) for r in rates))

    @property
    def arms_design(self) -> tuple[BetaPrior | float, BetaPrior | float]:
        return (self.control_prior if self.design_control is None else self.design_control,
                self.treatment_prior if self.design_treatment is None
                else self.design_treatment)

    @property
    def smallest_n(self) -> int:
        return 2

    def split(self, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self.arm_sizes(n)

    def _effect(self, p_t: np.ndarray, p_c: np.ndarray) -> np.ndarray:
        if self.scale == "difference":
            return p_t - p_c
        p_t = np.clip(p_t, 1e-300, 1 - 1e-16)
        p_c = np.clip(p_c, 1e-300, 1 - 1e-16)
        if self.scale == "log_risk_ratio":
            return np.log(p_t) - np.log(p_c)
        return special.logit(p_t) - special.logit(p_c)

    def _treatment_rate(self, effect: np.ndarray, p_c: np.ndarray) -> np.ndarray:
        if self.scale == "difference":
            return p_c + effect
        if self.scale == "log_risk_ratio":
            return p_c * np.exp(np.clip(effect, -700, 700))
        return special.expit(special.logit(p_c) + effect)

    def _design_rates(self, draws: int, rng: np.random.Generator
                      ) -> tuple[np.ndarray, np.ndarray]:
        """(control, treatment) rates from the design priors."""
        design_c, design_t = self.arms_design
        if self.design_effect is None:
            return _draw_rates(design_c, draws, rng), _draw_rates(design_t, draws, rng)
        rate_c, rate_t = np.empty(0), np.empty(0)
        tried = 0
        while rate_c.size < draws:
            batch = 2 * (draws - rate_c.size) + 16
            p_c = _draw_rates(design_c, batch, rng)
            p_t = self._treatment_rate(self.design_effect.sample(batch, rng), p_c)
            ok = (p_t > 0) & (p_t < 1)
            rate_c, rate_t = np.r_[rate_c, p_c[ok]], np.r_[rate_t, p_t[ok]]
            tried += batch
            if tried > 1000 * draws:
                raise AssuranceInputError(
                    "The 'design_effect' parameter of TwoProportions puts almost all its "
                    f"mass where the treatment rate leaves (0, 1) (kept {rate_c.size} of "
                    f"{tried} draws). Got {self.design_effect!r} instead.")
        return rate_c[:draws], rate_t[:draws]

    def prior_width(self, coverage: float, interval: str) -> float:
        rng = np.random.default_rng(20260101)
        size = 200_000
        eff = self._effect(rng.beta(self.treatment_prior.a, self.treatment_prior.b, size),
                           rng.beta(self.control_prior.a, self.control_prior.b, size))
        return float(engine.widths_from_draws(eff[None, :], coverage, interval)[0])

    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        if self.assumed_rates is not None:
            p_c, p_t = self.assumed_rates
        else:
            p_c, p_t = (arm.mean() if isinstance(arm, BetaPrior) else arm
                        for arm in self.arms_design)
            if self.design_effect is not None:
                p_t = float(self._treatment_rate(np.array(self.design_effect.mean()),
                                                 np.array(p_c)))
                if not 0 < p_t < 1:
                    raise AssuranceInputError(
                        "The 'assumed_rates' parameter of TwoProportions must be given when "
                        "the design prior's mean effect puts the treatment rate outside "
                        f"(0, 1) ({p_t:g}). Got None instead.")
        n_t, n_c = (v.astype(float) for v in self.split(n))
        if self.scale == "difference":
            var = p_t * (1 - p_t) / n_t + p_c * (1 - p_c) / n_c
        elif self.scale == "log_risk_ratio":
            var = (1 - p_t) / (n_t * p_t) + (1 - p_c) / (n_c * p_c)
        else:
            var = 1 / (n_t * p_t * (1 - p_t)) + 1 / (n_c * p_c * (1 - p_c))
        return 2 * _z(coverage) * np.sqrt(var)

    def simulate(self, n, *, coverage, length, interval, likely_share, draws,
                 posterior_draws, seed):
        (n_t,), (n_c,) = self.split(np.array([n]))
        rate_c, rate_t = self._design_rates(draws, _parameter_rng(seed))
        rng = _data_rng(seed, n)
        x_c = rng.binomial(n_c, rate_c)
        x_t = rng.binomial(n_t, rate_t)
        pc, pt = self.control_prior, self.treatment_prior
        width, cover = self._exact_per_data_set(x_t, x_c, int(n_t), int(n_c), coverage,
                                                length, interval)
        # data sets whose effect density is not known to be unimodal (both posteriors with an
        # infinite peak on the scale: prior shapes below 1 and no responders, or all, in
        # both arms) take posterior draws for the highest-density interval
        rest = np.flatnonzero(~np.isfinite(width) | (
            ~np.isfinite(cover) if cover is not None else False))
        if rest.size:
            def sampler(rows: np.ndarray, r: np.random.Generator) -> np.ndarray:
                k = rest[rows]
                shape = (rows.size, posterior_draws)
                post_t = r.beta(pt.a + x_t[k, None], pt.b + n_t - x_t[k, None], shape)
                post_c = r.beta(pc.a + x_c[k, None], pc.b + n_c - x_c[k, None], shape)
                return self._effect(post_t, post_c)

            w_rest, c_rest = _posterior_draw_stats(sampler, rest.size, rng, coverage, length,
                                                   interval)
            width[rest] = w_rest
            if cover is not None:
                cover[rest] = c_rest
        return engine.summarise_simulated(width, cover, likely_share)

    def _exact_per_data_set(self, x_t: np.ndarray, x_c: np.ndarray, n_t: int, n_c: int,
                            coverage: float, length: float | None, interval: str
                            ) -> tuple[np.ndarray, np.ndarray | None]:
        """Each data set's interval width (and fixed-length coverage) from its two beta
        posteriors by quadrature (NaN where it does not apply); each distinct pair of counts
        is computed once."""
        pc, pt = self.control_prior, self.treatment_prior
        pairs, back = np.unique(np.stack([x_t, x_c]), axis=1, return_inverse=True)
        back = back.ravel()
        a_t, b_t = pt.a + pairs[0], pt.b + n_t - pairs[0]
        a_c, b_c = pc.a + pairs[1], pc.b + n_c - pairs[1]
        width, _ = engine.effect_interval_widths(a_t, b_t, a_c, b_c, scale=self.scale,
                                                 coverage=coverage, interval=interval)
        cover = None
        if length is not None:
            cover = engine.effect_window_coverage(a_t, b_t, a_c, b_c, scale=self.scale,
                                                  length=length, interval=interval)[0][back]
        return width[back], cover

    def describe(self) -> str:
        what = {"difference": "difference of two proportions",
                "log_odds_ratio": "log odds ratio of two proportions",
                "log_risk_ratio": "log risk ratio of two proportions"}[self.scale]
        return (f"{what}; analysis priors beta({self.control_prior.a:g}, "
                f"{self.control_prior.b:g}) control, beta({self.treatment_prior.a:g}, "
                f"{self.treatment_prior.b:g}) treatment")

    def to_dict(self) -> dict[str, Any]:
        design_c, design_t = self.arms_design
        return {"model": "two_proportions", "scale": self.scale,
                "control_prior": self.control_prior.to_dict(),
                "treatment_prior": self.treatment_prior.to_dict(),
                "design_control": _arm_dict(design_c),
                "design_treatment": None if self.design_effect is not None
                else _arm_dict(design_t),
                "design_effect": None if self.design_effect is None
                else self.design_effect.to_dict(),
                "allocation": self.allocation,
                "assumed_rates": None if self.assumed_rates is None
                else list(self.assumed_rates)}


class _LogRatioModel(TwoArmSizing, PrecisionModel):
    """Shared parts of the log hazard ratio and log rate ratio models."""

    layout: ClassVar[str] = "two_arm"
    methods: ClassVar[tuple[str, ...]] = ("simulation",)
    worst_outcome: ClassVar[bool] = False
    prior: Normal
    design_prior: Prior | None
    allocation: float

    def _check_priors(self, owner: str) -> None:
        if not isinstance(self.prior, Normal):
            raise AssuranceInputError(
                f"The 'prior' parameter of {owner} must be a Normal prior on the log ratio "
                f"(use a wide one for little prior information). Got {self.prior!r} instead.")
        if self.design_prior is not None and not isinstance(self.design_prior, Prior):
            raise AssuranceInputError(
                f"The 'design_prior' parameter of {owner} must be a prior on the log ratio or "
                f"None. Got {self.design_prior!r} instead.")
        object.__setattr__(self, "allocation", check_real(self.allocation, "allocation",
                                                          owner, low=0, low_open=True))

    @property
    def design(self) -> Prior:
        return self.prior if self.design_prior is None else self.design_prior

    @property
    def smallest_n(self) -> int:
        return 2

    def split(self, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self.arm_sizes(n)

    def prior_width(self, coverage: float, interval: str) -> float:
        return 2 * _z(coverage) * self.prior.sigma

    def _posterior_sd(self, data_var: np.ndarray) -> np.ndarray:
        v0 = self.prior.sigma**2
        with np.errstate(divide="ignore"):
            return np.sqrt(1.0 / (1.0 / v0 + 1.0 / data_var))


@dataclass(frozen=True)
class HazardRatio(_LogRatioModel):
    """Log hazard ratio (treatment / control), normal approximation on the log scale.

    Parameters
    ----------
    prior
        Analysis prior on the log hazard ratio (:class:`~assurance.Normal`).
    event_probability
        Probability that a control patient's event is observed by the analysis, in (0, 1);
        a treatment patient's is ``1 - (1 - p)^HR`` (proportional hazards, the same
        follow-up). Or a function mapping an array of hazard ratios to event probabilities
        (hazard ratio 1 gives the control arm), e.g.
        ``SurvivalEndpoint(...).event_probability`` for staggered entry and dropout.
    design_prior
        Prior on the log hazard ratio generating the data; default the analysis prior.
    allocation
        Treatment patients per control patient, > 0.
    assumed_hazard_ratio
        Hazard ratio for the classical interval's width; default ``exp`` of the design
        prior's mean.

    Notes
    -----
    By simulation: a log hazard ratio from the design prior, binomial event counts
    ``d_t, d_c`` per arm, the estimate's variance ``1/d_t + 1/d_c`` (exponential model, as
    for a log-rank or Cox estimate with ``d p (1 - p)`` information), and the normal
    posterior under the normal analysis prior (normal approximation of the likelihood on
    the log scale). An arm without events gives no information: the posterior is the prior.
    The posterior is normal, so both interval kinds coincide and need no posterior draws.

    Examples
    --------
    >>> from assurance import Normal
    >>> m = HazardRatio(Normal(0.0, 1.0), event_probability=0.5)
    >>> m.frequentist_width(np.array([400]), 0.95).round(3)  # 2 z sqrt(1/100 + 1/100)
    array([0.554])
    """

    prior: Normal
    event_probability: float | Callable[[np.ndarray], np.ndarray]
    design_prior: Prior | None = None
    allocation: float = 1.0
    assumed_hazard_ratio: float | None = None

    def __post_init__(self) -> None:
        owner = "HazardRatio"
        self._check_priors(owner)
        if not callable(self.event_probability):
            object.__setattr__(self, "event_probability", check_real(
                self.event_probability, "event_probability", owner, low=0, high=1,
                low_open=True, high_open=True))
        if self.assumed_hazard_ratio is not None:
            object.__setattr__(self, "assumed_hazard_ratio", check_real(
                self.assumed_hazard_ratio, "assumed_hazard_ratio", owner, low=0,
                low_open=True))

    def event_probabilities(self, hazard_ratio: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(treatment, control) event probabilities at each hazard ratio."""
        hr = np.asarray(hazard_ratio, dtype=float)
        if callable(self.event_probability):
            p_t = np.asarray(self.event_probability(hr), dtype=float)
            p_c = np.broadcast_to(np.asarray(self.event_probability(np.ones(1)), dtype=float),
                                  hr.shape)
        else:
            p = float(self.event_probability)
            p_t = -np.expm1(hr * math.log1p(-p))
            p_c = np.full(hr.shape, p)
        if not (np.all((p_t > 0) & (p_t <= 1)) and np.all((p_c > 0) & (p_c <= 1))):
            raise AssuranceInputError(
                "The 'event_probability' parameter of HazardRatio must give probabilities in "
                f"(0, 1]. Got values from {float(np.min(p_t)):g} to {float(np.max(p_t)):g}.")
        return np.clip(p_t, 0.0, 1.0), np.clip(p_c, 0.0, 1.0)

    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        hr = self.assumed_hazard_ratio if self.assumed_hazard_ratio is not None \
            else math.exp(self.design.mean())
        p_t, p_c = self.event_probabilities(np.array([hr]))
        n_t, n_c = (v.astype(float) for v in self.split(n))
        return 2 * _z(coverage) * np.sqrt(1 / (n_t * p_t[0]) + 1 / (n_c * p_c[0]))

    def simulate(self, n, *, coverage, length, interval, likely_share, draws,
                 posterior_draws, seed):
        (n_t,), (n_c,) = self.split(np.array([n]))
        log_hr = self.design.sample(draws, _parameter_rng(seed))
        p_t, p_c = self.event_probabilities(np.exp(np.clip(log_hr, -50, 50)))
        rng = _data_rng(seed, n)
        d_t = rng.binomial(n_t, p_t).astype(float)
        d_c = rng.binomial(n_c, p_c).astype(float)
        with np.errstate(divide="ignore"):
            data_var = 1 / d_t + 1 / d_c
        return _normal_posterior_summary(self._posterior_sd(data_var), coverage, length,
                                         likely_share)

    def describe(self) -> str:
        return f"log hazard ratio; analysis prior {self.prior.describe()}"

    def to_dict(self) -> dict[str, Any]:
        ep = self.event_probability
        return {"model": "hazard_ratio", "prior": self.prior.to_dict(),
                "design_prior": self.design.to_dict(),
                "event_probability": "function" if callable(ep) else ep,
                "allocation": self.allocation,
                "assumed_hazard_ratio": self.assumed_hazard_ratio}


@dataclass(frozen=True)
class RateRatio(_LogRatioModel):
    """Log rate ratio of Poisson or negative binomial counts, normal approximation.

    Parameters
    ----------
    prior
        Analysis prior on the log rate ratio (:class:`~assurance.Normal`).
    control_rate
        Control event rate per unit time, > 0.
    exposure
        Follow-up per patient, > 0 (mean count per control patient ``control_rate *
        exposure``).
    overdispersion
        Negative binomial ``k >= 0`` (``Var = mu + k mu^2``), taken as known; 0: Poisson.
    design_prior
        Prior on the log rate ratio generating the data; default the analysis prior.
    allocation
        Treatment patients per control patient, > 0.
    assumed_rate_ratio
        Rate ratio for the classical interval's width; default ``exp`` of the design prior's
        mean.

    Notes
    -----
    By simulation: a log rate ratio from the design prior, each arm's total count (Poisson,
    or negative binomial with size ``n / k``), the estimate's variance
    ``(1/n_t)(1/mu_t + k) + (1/n_c)(1/mu_c + k)`` at the observed mean counts (Zhu & Lakkis
    2014), and the normal posterior under the normal analysis prior. An arm without events
    gives no information: the posterior is the prior.

    Examples
    --------
    >>> from assurance import Normal
    >>> m = RateRatio(Normal(0.0, 1.0), control_rate=1.0)
    >>> m.frequentist_width(np.array([200]), 0.95).round(3)  # 2 z sqrt(2 / 100)
    array([0.554])
    """

    prior: Normal
    control_rate: float = 1.0
    exposure: float = 1.0
    overdispersion: float = 0.0
    design_prior: Prior | None = None
    allocation: float = 1.0
    assumed_rate_ratio: float | None = None

    def __post_init__(self) -> None:
        owner = "RateRatio"
        self._check_priors(owner)
        for name in ("control_rate", "exposure"):
            object.__setattr__(self, name, check_real(getattr(self, name), name, owner,
                                                      low=0, low_open=True))
        object.__setattr__(self, "overdispersion", check_real(
            self.overdispersion, "overdispersion", owner, low=0))
        if self.assumed_rate_ratio is not None:
            object.__setattr__(self, "assumed_rate_ratio", check_real(
                self.assumed_rate_ratio, "assumed_rate_ratio", owner, low=0, low_open=True))

    def _variance(self, mu_t: np.ndarray, mu_c: np.ndarray, n_t: float, n_c: float
                  ) -> np.ndarray:
        k = self.overdispersion
        with np.errstate(divide="ignore"):
            return (1 / mu_t + k) / n_t + (1 / mu_c + k) / n_c

    def frequentist_width(self, n: np.ndarray, coverage: float) -> np.ndarray:
        rr = self.assumed_rate_ratio if self.assumed_rate_ratio is not None \
            else math.exp(self.design.mean())
        mu_c = self.control_rate * self.exposure
        n_t, n_c = (v.astype(float) for v in self.split(n))
        return 2 * _z(coverage) * np.sqrt(self._variance(mu_c * rr, mu_c, n_t, n_c))

    def _totals(self, n: int, mu: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        if self.overdispersion == 0:
            return rng.poisson(n * mu).astype(float)
        size = n / self.overdispersion
        return rng.negative_binomial(size, size / (size + n * mu)).astype(float)

    def simulate(self, n, *, coverage, length, interval, likely_share, draws,
                 posterior_draws, seed):
        (n_t,), (n_c,) = self.split(np.array([n]))
        log_rr = self.design.sample(draws, _parameter_rng(seed))
        mu_c = self.control_rate * self.exposure
        mu_t = mu_c * np.exp(np.clip(log_rr, -50, 50))
        rng = _data_rng(seed, n)
        y_t = self._totals(int(n_t), mu_t, rng)
        y_c = self._totals(int(n_c), np.full(draws, mu_c), rng)
        data_var = self._variance(y_t / n_t, y_c / n_c, float(n_t), float(n_c))
        return _normal_posterior_summary(self._posterior_sd(data_var), coverage, length,
                                         likely_share)

    def describe(self) -> str:
        counts = "Poisson" if self.overdispersion == 0 else \
            f"negative binomial (k={self.overdispersion:g})"
        return f"log rate ratio of {counts} counts; analysis prior {self.prior.describe()}"

    def to_dict(self) -> dict[str, Any]:
        return {"model": "rate_ratio", "prior": self.prior.to_dict(),
                "design_prior": self.design.to_dict(), "control_rate": self.control_rate,
                "exposure": self.exposure, "overdispersion": self.overdispersion,
                "allocation": self.allocation,
                "assumed_rate_ratio": self.assumed_rate_ratio}


# ------------------------------------------------------------------------------------------
# shared argument checks
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Settings:
    coverage: float
    length: float | None
    interval: str
    likely_share: float
    method: str
    draws: int
    posterior_draws: int
    seed: int


def _settings(model: Any, owner: str, *, coverage: Any, length: Any, interval: Any,
              likely_share: Any, method: Any, draws: Any, posterior_draws: Any, seed: Any
              ) -> _Settings:
    if not isinstance(model, PrecisionModel):
        raise AssuranceInputError(
            f"The 'model' parameter of {owner} must be a precision model (NormalMean, "
            "NormalMeanUnknownSD, OneProportion, TwoProportions, HazardRatio, RateRatio). "
            f"Got {model!r} instead.")
    coverage = check_real(coverage, "coverage", owner, low=0, high=1, low_open=True,
                          high_open=True)
    check_choice(interval, "interval", owner, INTERVALS)
    likely_share = check_real(likely_share, "likely_share", owner, low=0, high=1,
                              low_open=True, high_open=True)
    check_choice(method, "method", owner, METHODS)
    if method == "auto":
        method = model.methods[0]
    elif method not in model.methods:
        offered = " or ".join(repr(m) for m in model.methods)
        raise AssuranceInputError(
            f"The 'method' parameter of {owner} must be 'auto' or {offered} for "
            f"{type(model).__name__}. Got {method!r} instead.")
    draws = check_int(draws, "draws", owner, low=100, high=10**7)
    posterior_draws = check_int(posterior_draws, "posterior_draws", owner, low=1000,
                                high=10**6)
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    seed = check_int(seed, "seed", owner, low=0)
    if length is not None:
        length = check_real(length, "length", owner, low=0, low_open=True)
        limit = model.prior_width(coverage, interval)
        if length >= limit:
            raise AssuranceInputError(
                f"The 'length' parameter of {owner} must be a number in (0, {limit:.6g}): "
                f"shorter than the analysis prior's own {coverage:.4g} "
                f"{_INTERVAL_TEXT[interval]} interval ({limit:.6g}), since a longer target is "
                f"met before any data are seen. Got {length!r} instead.")
    return _Settings(coverage, length, interval, likely_share, method, draws,
                     posterior_draws, seed)


def _compute(model: PrecisionModel, n: np.ndarray, s: _Settings, *, widths: bool = True
             ) -> dict[str, np.ndarray]:
    """Per-n summaries (arrays over ``n``), exact or by simulation."""
    if s.method == "exact":
        return model.exact(n, coverage=s.coverage, length=s.length, interval=s.interval,
                           likely_share=s.likely_share, widths=widths)
    rows = [model.simulate(int(ni), coverage=s.coverage, length=s.length,
                           interval=s.interval, likely_share=s.likely_share, draws=s.draws,
                           posterior_draws=s.posterior_draws, seed=s.seed) for ni in n]
    return {key: np.array([r[key] for r in rows]) for key in rows[0]}


_LABELS = {
    "width_mean": "average posterior interval width over the prior predictive (ALC)",
    "width_median": "median posterior interval width",
    "width_q90": "90th centile of the posterior interval width",
    "width_worst": "widest posterior interval over all possible data sets (WOC)",
    "width_worst_likely": "widest posterior interval over the most likely data sets (MWOC)",
    "coverage_mean": "average posterior probability of the best interval of the target "
                     "length (ACC)",
    "coverage_worst": "lowest posterior probability of an interval of the target length over "
                      "all data sets",
    "coverage_worst_likely": "lowest posterior probability of an interval of the target "
                             "length over the most likely data sets",
    "frequentist_ci_width": "width of the classical confidence interval at the assumed values",
}


# ------------------------------------------------------------------------------------------
# public functions
# ------------------------------------------------------------------------------------------
def interval_width_curve(
    model: PrecisionModel,
    sizes: Sequence[int] | np.ndarray,
    *,
    coverage: float = 0.95,
    length: float | None = None,
    interval: Interval = "highest_density",
    likely_share: float = 0.95,
    method: Method = "auto",
    draws: int = DEFAULT_DRAWS,
    posterior_draws: int = DEFAULT_POSTERIOR_DRAWS,
    seed: int | None = DEFAULT_SEED,
) -> Any:
    """Distribution of the posterior interval width over the prior predictive, per n.

    Parameters
    ----------
    model
        A precision model (:class:`NormalMean`, :class:`NormalMeanUnknownSD`,
        :class:`OneProportion`, :class:`TwoProportions`, :class:`HazardRatio`,
        :class:`RateRatio`).
    sizes
        Total sample sizes (all arms), whole numbers at or above ``model.smallest_n``.
    coverage
        Posterior probability of the interval, in (0, 1).
    length
        Optional target length: adds the average and worst posterior coverage of the best
        interval of that length (the ACC side). Must be shorter than the analysis prior's
        own interval.
    interval
        ``"highest_density"`` (shortest) or ``"equal_tailed"``; the same for symmetric
        posteriors (normal, t).
    likely_share
        Share of data sets, most likely first, over which ``width_worst_likely`` (MWOC) is
        taken, in (0, 1); ``1 - likely_share`` is the gamma of Joseph et al.
    method
        ``"auto"`` (exact where the model offers it), ``"exact"`` or ``"simulation"``.
    draws, posterior_draws, seed
        Simulation: data sets per n, posterior draws per data set, and the seed (the same
        seed and n always give the same numbers; design-prior draws are shared by all n).

    Returns
    -------
    xarray.Dataset
        Dimension ``n`` with coordinates ``n_treatment``, ``n_control``; variables
        ``width_mean``, ``width_median``, ``width_q90``, ``width_worst_likely``,
        ``width_worst`` (exact models with a bounded worst case), ``frequentist_ci_width``
        and, with a length, ``coverage_mean``, ``coverage_worst_likely`` (and
        ``coverage_worst``); ``*_mcse`` Monte Carlo standard errors under simulation.
        ``attrs`` hold the model (JSON), settings, the analysis prior's own interval width
        and the package version.

    Notes
    -----
    Width summaries are over data drawn from the design prior, each data set analysed with
    the analysis prior (Joseph, Wolfson & du Berger 1995; Joseph & Belisle 1997). For a
    discrete outcome the "most likely share" ranks data sets by prior predictive
    probability; for continuous outcomes and simulations it is the ``likely_share``
    quantile of the width (the data sets with the shortest intervals).

    References
    ----------
    Joseph L, Wolfson DB, du Berger R (1995). Sample size calculations for binomial
    proportions via highest posterior density intervals. The Statistician 44:143-154.
    Joseph L, Belisle P (1997). Bayesian sample size determination for normal means and
    differences between normal means. The Statistician 46:209-226.

    Examples
    --------
    >>> from assurance.precision import BetaPrior, OneProportion, interval_width_curve
    >>> ds = interval_width_curve(OneProportion(BetaPrior(2, 8)), [20, 80, 320])
    >>> bool((ds.width_mean.diff("n") < 0).all())
    True
    """
    import xarray as xr

    from .. import __version__

    owner = "interval_width_curve"
    s = _settings(model, owner, coverage=coverage, length=length, interval=interval,
                  likely_share=likely_share, method=method, draws=draws,
                  posterior_draws=posterior_draws, seed=seed)
    n = _check_sizes(model, sizes, owner, s.method)
    values = _compute(model, n, s)
    values["frequentist_ci_width"] = model.frequentist_width(n, s.coverage)
    n_t, n_c = model.split(n)
    data_vars = {key: ("n", np.asarray(val, dtype=float)) for key, val in values.items()}
    attrs: dict[str, Any] = {
        "model": json.dumps(model.to_dict()),
        "description": model.describe(),
        "coverage": s.coverage,
        "interval": s.interval,
        "likely_share": s.likely_share,
        "method": s.method,
        "draws": s.draws if s.method == "simulation" else 0,
        "posterior_draws": s.posterior_draws if s.method == "simulation" else 0,
        "seed": s.seed if s.method == "simulation" else -1,
        "prior_interval_width": model.prior_width(s.coverage, s.interval),
        "package_version": __version__,
    }
    if s.length is not None:
        attrs["length"] = s.length
    ds = xr.Dataset(data_vars, coords={"n": n, "n_treatment": ("n", n_t),
                                       "n_control": ("n", n_c)}, attrs=attrs)
    for name, var in ds.data_vars.items():
        base = name.removesuffix("_mcse")
        text = _LABELS.get(base, base)
        var.attrs["long_name"] = (f"Monte Carlo standard error of {text}"
                                  if name.endswith("_mcse") else text)
    return ds


def _check_sizes(model: PrecisionModel, sizes: Any, owner: str, method: str) -> np.ndarray:
    high = MAX_ENUMERATED_N if (isinstance(model, OneProportion) and method == "exact") \
        else MAX_N
    arr = check_real_array(sizes, "sizes", owner, low=1, high=high)
    if np.any(arr != np.round(arr)):
        raise AssuranceInputError(
            f"The 'sizes' parameter of {owner} must hold whole numbers of patients. Got "
            f"{sizes!r} instead.")
    if arr.min() < model.smallest_n:
        raise AssuranceInputError(
            f"The 'sizes' parameter of {owner} must be >= {model.smallest_n} for "
            f"{type(model).__name__}: with fewer patients the posterior is improper (or an "
            f"arm is empty). Got {sizes!r} instead.")
    return np.unique(arr.astype(np.int64))


@dataclass(frozen=True)
class PrecisionAnswer:
    """The smallest sample size meeting a precision criterion, or why none does.

    ``achieved`` is the criterion's quantity at ``n_total`` (average width for ALC, average
    coverage for ACC, worst width for WOC / MWOC) and ``previous`` the same one patient
    fewer, which misses the target.

    Examples
    --------
    >>> ans = solve_precision_n(OneProportion(BetaPrior(2, 2)), length=0.3, criterion="ACC")
    >>> ans.reached, ans.achieved >= 0.95 > ans.previous
    (True, True)
    """

    criterion: str
    length: float
    coverage: float
    interval: str
    method: str
    reached: bool
    n_total: int | None
    n_treatment: int | None
    n_control: int | None
    achieved: float | None
    achieved_mcse: float | None
    previous: float | None
    message: str

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


_QUANTITY = {"ALC": "width_mean", "ACC": "coverage_mean", "WOC": "width_worst",
             "MWOC": "width_worst_likely"}
_WHAT = {"ALC": "average width", "ACC": "average coverage", "WOC": "worst-case width",
         "MWOC": "worst width over the most likely data sets"}


def solve_precision_n(
    model: PrecisionModel,
    *,
    length: float,
    criterion: Criterion = "ALC",
    coverage: float = 0.95,
    interval: Interval = "highest_density",
    likely_share: float = 0.95,
    method: Method = "auto",
    max_n: int = 100_000,
    draws: int = DEFAULT_DRAWS,
    posterior_draws: int = DEFAULT_POSTERIOR_DRAWS,
    seed: int | None = DEFAULT_SEED,
) -> PrecisionAnswer:
    """Smallest total sample size meeting a precision criterion.

    Parameters
    ----------
    model
        A precision model.
    length
        Target interval length, > 0 and shorter than the analysis prior's own interval.
    criterion
        ``"ALC"``: average width of the ``coverage`` interval ``<= length``. ``"ACC"``:
        average posterior coverage of the best interval of ``length`` ``>= coverage``.
        ``"WOC"``: width ``<= length`` for every data set (exact models with a bounded worst
        case only). ``"MWOC"``: the same over the most likely ``likely_share`` of data sets.
    coverage, interval, likely_share, method, draws, posterior_draws, seed
        As in :func:`interval_width_curve`.
    max_n
        Largest total sample size searched.

    Returns
    -------
    PrecisionAnswer
        ``reached`` False with the reason in ``message`` when no n up to ``max_n`` meets the
        criterion, or no n can (the worst case of a normal mean with unknown SD).

    Notes
    -----
    Doubling from the smallest size until the criterion is met, then bisection, so the
    answer meets it and one patient fewer does not. For discrete data the criteria are not
    exactly monotone in n (Joseph, Wolfson & du Berger 1995), so a smaller n can
    occasionally meet it too; under simulation the figures carry Monte Carlo error
    (``achieved_mcse``), and the same seed gives the same answer.

    Examples
    --------
    >>> from assurance import Normal
    >>> from assurance.precision import NormalMean, solve_precision_n
    >>> m = NormalMean(sigma=1.0, prior=Normal(0.0, 1.0), layout="single_arm")
    >>> solve_precision_n(m, length=0.2, criterion="ACC").n_total  # (2 z / 0.2)^2 - 1
    384
    """
    owner = "solve_precision_n"
    check_choice(criterion, "criterion", owner, CRITERIA)
    if length is None:
        raise AssuranceInputError(
            f"The 'length' parameter of {owner} must be a number > 0. Got None instead.")
    s = _settings(model, owner, coverage=coverage, length=length, interval=interval,
                  likely_share=likely_share, method=method, draws=draws,
                  posterior_draws=posterior_draws, seed=seed)
    high = MAX_ENUMERATED_N if (isinstance(model, OneProportion) and s.method == "exact") \
        else MAX_N
    max_n = check_int(max_n, "max_n", owner, low=model.smallest_n, high=high)
    key = _QUANTITY[criterion]
    label = f"{s.coverage:.4g} {_INTERVAL_TEXT[s.interval]}"

    def answer(reached: bool, n: int | None, value: float | None, mcse: float | None,
               previous: float | None, message: str) -> PrecisionAnswer:
        n_t = n_c = None
        if n is not None:
            arms = model.split(np.array([n]))
            n_t, n_c = int(arms[0][0]), int(arms[1][0])
        return PrecisionAnswer(criterion, s.length, s.coverage, s.interval, s.method,
                               reached, n, n_t, n_c, value, mcse, previous, message)

    if criterion == "WOC" and (s.method == "simulation" or not model.worst_outcome):
        if s.method == "simulation":
            raise AssuranceInputError(
                f"The 'criterion' parameter of {owner} cannot be 'WOC' for "
                f"{type(model).__name__} by simulation: the worst outcome over every "
                "possible data set is not something simulated data sets can show. Use "
                "'MWOC' (worst over the most likely share of data sets). Got 'WOC' instead.")
        return answer(False, None, None, None, None,
                      "No sample size meets the worst outcome criterion: with the SD unknown "
                      "some data sets have arbitrarily large spread, so their intervals are "
                      "wider than any target. Use 'MWOC' (the worst over the most likely "
                      "share of data sets).")

    cache: dict[int, tuple[float, float | None]] = {}

    def value_at(n: int) -> tuple[float, float | None]:
        if n not in cache:
            res = _compute(model, np.array([n], dtype=np.int64), s,
                           widths=criterion != "ACC")
            mcse = res.get(key + "_mcse")
            cache[n] = (float(res[key][0]), None if mcse is None else float(mcse[0]))
        return cache[n]

    def met(n: int) -> bool:
        value = value_at(n)[0]
        return value >= s.coverage if criterion == "ACC" else value <= s.length

    target = f"coverage {s.coverage:.4g}" if criterion == "ACC" else f"length {s.length:.6g}"
    low = model.smallest_n
    if met(low):
        v, e = value_at(low)
        return answer(True, low, v, e, None,
                      f"{criterion}: met already at the smallest size ({low}); {_WHAT[criterion]}"
                      f" {v:.6g} for target {target}.")
    high_n = low
    while not met(high_n):
        if high_n >= max_n:
            v, e = value_at(high_n)
            return answer(False, None, None, None, None,
                          f"{criterion}: not met by {max_n} patients ({_WHAT[criterion]} "
                          f"{v:.6g} there, target {target}). Raise max_n or revisit the "
                          "target.")
        low, high_n = high_n, min(max(2 * high_n, high_n + 1), max_n)
    while high_n - low > 1:
        mid = (low + high_n) // 2
        if met(mid):
            high_n = mid
        else:
            low = mid
    v, e = value_at(high_n)
    prev = value_at(high_n - 1)[0]
    err = "" if e is None else f" (Monte Carlo SE {e:.2g})"
    return answer(True, high_n, v, e, prev,
                  f"{criterion} with {label} intervals: n = {high_n} gives "
                  f"{_WHAT[criterion]} {v:.6g}{err} for target {target}; n = {high_n - 1} "
                  f"gives {prev:.6g}.")
