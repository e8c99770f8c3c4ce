"""Binary endpoint: response rates, compared between two arms or with a fixed reference.

The trial counts responders. Two arms compare the treatment rate ``p_t`` with the control
rate ``p_c``; a single arm compares ``p_t`` with a fixed reference rate. The effect is, in
the endpoint's *analysis scale*, the difference ``p_t - p_c``, the log risk ratio
``log(p_t / p_c)`` or the log odds ratio; a design prior is a prior on that scale (for a
ratio, on its logarithm), exactly as for the other endpoints.

Two ways to say what is believed about the rates:

* :class:`BetaRates` -- independent beta priors on the two rates (or a fixed rate for one of
  them). It is a genuine :class:`~assurance.priors.Prior` over the effect (so the ceiling,
  the prior probability of a relevant effect and the prior plot work unchanged), and the
  binary calculator recognises it and uses the arm-level beta priors directly: the prior
  predictive of each arm is beta-binomial and assurance is an exact finite sum.
* any other prior on the effect, with the control rate fixed at its planning value or
  given a beta prior (``control_prior``): assurance integrates over both by quadrature.

The final analysis is a test (:class:`~assurance.Significance`) or a posterior
probability (:class:`~assurance.PosteriorProbability`) under beta analysis priors on the
rates, given as a :class:`BetaRates` ``analysis_prior`` (None: uniform beta(1, 1) priors).
See :mod:`assurance.compute.binary_exact` for the tests, the posterior rule and the exact
enumeration.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from numbers import Real
from typing import Any, Literal

import numpy as np
from scipy import special

from .._roots import brent_root
from .._validation import check_choice, check_int, check_real
from ..compute.binary_exact import (
    POSTERIOR_NODES,
    SCALES,
    TESTS,
    PosteriorSpec,
    RateArm,
    SuccessRegion,
    TestSpec,
    beta_binomial_pmf,
    binomial_pmf,
    control_breakpoints,
    control_rate,
    effect_bounds,
    natural_effect,
    normal_power,
    posterior_below,
    smoothed_rule,
    success_runs,
    treatment_breakpoints,
    treatment_rate,
)
from ..compute.normal_outcome import SuccessProbabilities
from ..errors import AssuranceInputError, AssuranceWarning
from ..priors.families import PointMass, Prior
from ..rules.posterior import PosteriorProbability
from ..rules.significance import Significance
from .base import Endpoint, SuccessCalculator

__all__ = ["BinaryEndpoint", "BetaRates"]

Layout = Literal["two_arm", "single_arm"]
Scale = Literal["difference", "risk_ratio", "odds_ratio"]
Test = Literal["z", "unpooled_z", "chi_square", "fisher_exact", "exact_binomial"]

#: Gauss-Legendre nodes per block for the distribution function of a BetaRates prior
QUAD_NODES = 64
#: largest outcome grid (tables) enumerated exactly; larger trials use the normal approximation
MAX_TABLES = 2_000_000
#: prior mass dropped (rate pairs outside [0, 1]) above which a warning is given
DROPPED_MASS_WARNING = 1e-3

_EFFECT_NAMES = {
    "difference": "difference in response rates",
    "risk_ratio": "risk ratio",
    "odds_ratio": "odds ratio",
}
_TEST_TEXT = {
    "z": "pooled two-proportion z test",
    "unpooled_z": "unpooled (Wald) two-proportion z test",
    "chi_square": "chi-square test (same decisions as the pooled z test: chi-square = z^2)",
    "fisher_exact": "Fisher's exact test (one-sided)",
    "exact_binomial": "exact binomial test (one-sided)",
}


def _node_count(spread: float, n_max: int) -> int:
    """Gauss-Legendre nodes per block over a prior on a rate with SD ``spread``.

    Power changes with a rate on the scale of its standard error ``~ 1/(2 sqrt(n))`` (and
    the exact power of a discrete test has a sawtooth on that scale), so the nodes grow in
    proportion to prior SD / standard error: ``24 + 16 spread sqrt(n)``, rounded up to
    32, 64, ..., 512.
    """
    need = 24 + 16 * spread * math.sqrt(max(n_max, 1))
    for k in (32, 64, 128, 256, 512):
        if k >= need:
            return k
    return 512


# ------------------------------------------------------------------------------------------
# the prior built from beta priors on the two rates
# ------------------------------------------------------------------------------------------
def _arm(value: Any, name: str, owner: str) -> RateArm:
    if isinstance(value, Real | np.floating) and not isinstance(value, bool):
        return RateArm.fixed_at(check_real(value, name, owner, low=0, high=1, low_open=True,
                                           high_open=True))
    if isinstance(value, Sequence | np.ndarray) and not isinstance(value, str) \
            and len(value) == 2:
        a, b = (check_real(v, name, owner, low=0, low_open=True) for v in value)
        return RateArm.beta(a, b)
    raise AssuranceInputError(
        f"The '{name}' parameter of {owner} must be a pair (a, b) of beta parameters > 0, or "
        f"a fixed rate in (0, 1). Got {value!r} instead."
    )


class BetaRates(Prior):
    """Independent beta priors on the control and treatment rates, as a prior on the effect.

    The effect is ``p_t - p_c`` (``scale="difference"``), ``log(p_t / p_c)``
    (``"risk_ratio"``) or ``logit(p_t) - logit(p_c)`` (``"odds_ratio"``): the analysis scale
    of a :class:`BinaryEndpoint` with that scale.

    Parameters
    ----------
    control, treatment
        ``(a, b)``: the rate is Beta(a, b) (a prior "worth" ``a + b`` patients with ``a``
        responders), or a number in (0, 1): the rate is known (the reference rate of a
        single-arm trial, say).
    scale
        Scale of the effect, as the endpoint's.

    Notes
    -----
    With one arm's rate ``q`` fixed, the distribution function is closed form; otherwise
    ``P(effect <= x) = E_q[P(other rate on the right side of the boundary | q)]``, integrated
    by Gauss-Legendre quadrature on the probability scale of the arm with the smaller prior
    SD (the other arm's beta distribution function is smooth on the scale of its own, larger
    SD), split where the boundary leaves [0, 1]. The density uses the same quadrature with
    the Jacobian of the effect in the rate. Mean and variance are closed form:
    ``E log p = psi(a) - psi(a + b)``, ``Var log p = psi'(a) - psi'(a + b)``,
    ``E logit p = psi(a) - psi(b)``, ``Var logit p = psi'(a) + psi'(b)``.

    A :class:`BinaryEndpoint` recognises this prior: the prior predictive of each arm is then
    beta-binomial and assurance is an exact sum over the outcomes.

    Examples
    --------
    >>> prior = BetaRates(control=(6, 14), treatment=(9, 11))
    >>> round(prior.mean(), 3)  # 0.45 - 0.30
    0.15
    >>> round(prior.prob_above(0.0), 3)  # P(p_t > p_c)
    0.843
    """

    def __init__(self, control: Any, treatment: Any, scale: Scale = "difference", *,
                 _negated: bool = False):
        owner = "BetaRates"
        self.scale = check_choice(scale, "scale", owner, list(SCALES))
        self.control_arm = _arm(control, "control", owner)
        self.treatment_arm = _arm(treatment, "treatment", owner)
        self.negated_copy = bool(_negated)

    # ---- plain attributes ----------------------------------------------------------------
    @property
    def control(self) -> tuple[float, float] | float:
        """The control rate's ``(a, b)`` or fixed value."""
        arm = self.control_arm
        return arm.value if arm.fixed else (arm.a, arm.b)

    @property
    def treatment(self) -> tuple[float, float] | float:
        """The treatment rate's ``(a, b)`` or fixed value."""
        arm = self.treatment_arm
        return arm.value if arm.fixed else (arm.a, arm.b)

    @property
    def _s(self) -> float:
        return -1.0 if self.negated_copy else 1.0

    def _fixed_effect(self) -> float:
        return float(self._s * natural_effect(self.treatment_arm.value, self.control_arm.value,
                                              self.scale))

    def _both_fixed(self) -> bool:
        return self.control_arm.fixed and self.treatment_arm.fixed

    def _outer_is_control(self) -> bool:
        return self.control_arm.sd <= self.treatment_arm.sd

    # ---- distribution of the natural effect G (before any negation) ----------------------
    def _integrate(self, y: np.ndarray, integrand) -> np.ndarray:
        """``E_outer[integrand(outer rate, y)]`` by blocks of Gauss-Legendre nodes."""
        outer_control = self._outer_is_control()
        outer = self.control_arm if outer_control else self.treatment_arm
        if outer.fixed:
            return integrand(np.full(y.shape + (1,), outer.value), y[..., None])[..., 0]
        if outer_control:
            breaks = _breaks(y, self.scale, control_breakpoints)
        else:
            breaks = _breaks(y, self.scale, treatment_breakpoints)
        edges = [np.zeros_like(y), breaks[..., 0], breaks[..., 1], np.ones_like(y)]
        total = np.zeros_like(y)
        for lo, hi in zip(edges[:-1], edges[1:], strict=True):
            q, w = outer.nodes(lo, hi, QUAD_NODES)
            total += np.sum(w * integrand(q, y[..., None]), axis=-1)
        return total

    def _cdf_natural(self, y: np.ndarray) -> np.ndarray:
        if self._outer_is_control():
            arm = self.treatment_arm
            return self._integrate(y, lambda q, yy: arm.cdf(treatment_rate(yy, q, self.scale)))
        arm = self.control_arm
        return self._integrate(y, lambda q, yy: 1.0 - arm.cdf(control_rate(yy, q, self.scale)))

    def _pdf_natural(self, y: np.ndarray) -> np.ndarray:
        scale = self.scale

        def jacobian(rate: np.ndarray) -> np.ndarray:
            return {"difference": np.ones_like(rate), "risk_ratio": rate,
                    "odds_ratio": rate * (1.0 - rate)}[scale]

        if self._outer_is_control():
            arm = self.treatment_arm

            def f(q, yy):
                r = treatment_rate(yy, q, scale)
                return arm.pdf(r) * jacobian(r)
        else:
            arm = self.control_arm

            def f(q, yy):
                r = control_rate(yy, q, scale)
                return arm.pdf(r) * jacobian(r)
        return self._integrate(y, f)

    # ---- the Prior interface -------------------------------------------------------------
    def cdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        if self._both_fixed():
            return np.where(x >= self._fixed_effect(), 1.0, 0.0)
        if self.negated_copy:
            out = 1.0 - self._cdf_natural(-x)
        else:
            out = self._cdf_natural(x)
        return np.clip(out, 0.0, 1.0)

    def pdf(self, x: Any) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        if self._both_fixed():
            return np.zeros_like(x)
        return self._pdf_natural(self._s * x)

    def atoms(self) -> list[tuple[float, float]]:
        return [(self._fixed_effect(), 1.0)] if self._both_fixed() else []

    def _moments(self, arm: RateArm) -> tuple[float, float]:
        if self.scale == "difference":
            return arm.mean, arm.sd**2
        if arm.fixed:
            v = arm.value
            return (math.log(v) if self.scale == "risk_ratio" else math.log(v / (1 - v))), 0.0
        a, b = arm.a, arm.b
        if self.scale == "risk_ratio":
            return (float(special.digamma(a) - special.digamma(a + b)),
                    float(special.polygamma(1, a) - special.polygamma(1, a + b)))
        return (float(special.digamma(a) - special.digamma(b)),
                float(special.polygamma(1, a) + special.polygamma(1, b)))

    def mean(self) -> float:
        (mt, _), (mc, _) = self._moments(self.treatment_arm), self._moments(self.control_arm)
        return self._s * (mt - mc)

    def var(self) -> float:
        return self._moments(self.treatment_arm)[1] + self._moments(self.control_arm)[1]

    def sample(self, size: int, seed: Any = None) -> np.ndarray:
        rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)

        def draw(arm: RateArm) -> np.ndarray:
            if arm.fixed:
                return np.full(size, arm.value)
            return np.clip(rng.beta(arm.a, arm.b, size), 1e-300, 1.0 - 1e-16)

        p_c = draw(self.control_arm)
        p_t = draw(self.treatment_arm)
        return self._s * natural_effect(p_t, p_c, self.scale)

    def support(self) -> tuple[float, float]:
        def ends(arm: RateArm) -> tuple[float, float]:
            return (arm.value, arm.value) if arm.fixed else (0.0, 1.0)

        (tl, th), (cl, ch) = ends(self.treatment_arm), ends(self.control_arm)
        with np.errstate(divide="ignore"):
            if self.scale == "difference":
                lo, hi = tl - ch, th - cl
            elif self.scale == "risk_ratio":
                lo, hi = float(np.log(tl) - np.log(ch)), float(np.log(th) - np.log(cl))
            else:
                lo = float(special.logit(tl) - special.logit(ch))
                hi = float(special.logit(th) - special.logit(cl))
        return (lo, hi) if not self.negated_copy else (-hi, -lo)

    def ppf(self, q: float) -> float:
        q = check_real(q, "q", "BetaRates.ppf", low=0, high=1, low_open=True, high_open=True)
        if self._both_fixed():
            return self._fixed_effect()
        lo, hi = self.support()
        m, s = self.mean(), max(self.sd(), 1e-12)
        lo = lo if math.isfinite(lo) else m - 10 * s
        hi = hi if math.isfinite(hi) else m + 10 * s
        while float(self.cdf(lo)) > q:
            lo -= 10 * s
        while float(self.cdf(hi)) < q:
            hi += 10 * s
        return brent_root(lambda x: float(self.cdf(x)) - q, lo, hi, xtol=1e-13,
                          rtol=4 * np.finfo(float).eps)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"family": "beta_rates",
                               "control": self.control_arm.describe(),
                               "treatment": self.treatment_arm.describe(),
                               "scale": self.scale}
        if self.negated_copy:
            out["negated"] = True
        return out

    def negated(self) -> BetaRates:
        """The same rates with the effect read the other way (a flagged copy)."""
        return BetaRates(self.control, self.treatment, self.scale,
                         _negated=not self.negated_copy)


def _breaks(y: np.ndarray, scale: str, finder) -> np.ndarray:
    """Per-effect breakpoints as an array ``y.shape + (2,)`` sorted, within [0, 1]."""
    out = np.empty(y.shape + (2,))
    flat_y, flat_out = y.ravel(), out.reshape(-1, 2)
    for i, value in enumerate(flat_y.tolist()):
        pts = sorted(finder(value, scale)) if math.isfinite(value) else []
        pts = (pts + [1.0, 1.0])[:2]
        flat_out[i] = pts
    return out


def _check_analysis_arms(ep: BinaryEndpoint, rates: BetaRates, owner: str) -> None:
    """The arms of a BetaRates analysis prior must suit the endpoint's layout."""
    if ep.layout == "single_arm":
        arm = rates.control_arm
        if not (arm.fixed and abs(arm.value - ep.control_rate) <= 1e-12):
            raise AssuranceInputError(
                f"The 'analysis_prior' parameter of {owner} must fix the control rate at the "
                f"reference rate {ep.control_rate:g} for a single arm, as in BetaRates("
                f"control={ep.control_rate:g}, treatment=(a, b)). Got control="
                f"{rates.control!r} instead.")
        if rates.treatment_arm.fixed:
            raise AssuranceInputError(
                f"The 'analysis_prior' parameter of {owner} must give the treatment rate a "
                "beta prior (a, b): the analysis learns it from the data. Got treatment="
                f"{rates.treatment!r} instead.")
    elif rates.control_arm.fixed and rates.treatment_arm.fixed:
        raise AssuranceInputError(
            f"The 'analysis_prior' parameter of {owner} must give at least one arm a beta "
            "prior (a, b); with both rates fixed the data could not change the posterior. Got "
            f"control={rates.control!r}, treatment={rates.treatment!r} instead.")


# ------------------------------------------------------------------------------------------
# the endpoint
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BinaryEndpoint(Endpoint):
    """A response (yes/no) outcome: rates compared between two arms or with a reference.

    Parameters
    ----------
    control_rate
        Planning value of the control arm's response rate, in (0, 1); for a single arm, the
        fixed reference rate the treatment rate is tested against. Classical power uses it.
    layout
        ``"two_arm"`` (parallel groups) or ``"single_arm"`` (against ``control_rate``).
    allocation
        Patients on treatment per patient on control (two arms), > 0.
    scale
        ``"difference"`` (``p_t - p_c``), ``"risk_ratio"`` or ``"odds_ratio"``. For a ratio
        the design prior is on its logarithm and assumed/relevant effects are ratios.
    test
        The final analysis, one-sided in the favourable direction at the rule's one-sided
        level: ``"z"`` (pooled two-proportion z test; single arm: score z test against the
        reference), ``"unpooled_z"`` (two arms: the Wald z test, whose standard error uses
        each arm's observed rate; its exact type I error can exceed the level, and the
        results report it per size), ``"chi_square"`` (Pearson's chi-square: ``chi2 =
        z^2``, so a two-sided chi-square test with a favourable result decides exactly as the
        pooled z test at half the level; with ``Significance(alpha, sided="two")`` the two
        agree; with ``sided="one"`` the chi-square test is used one-sidedly, which is the z
        test), ``"fisher_exact"`` (two arms) or ``"exact_binomial"`` (single arm;
        ``scipy.stats.binomtest``).
    continuity_correction
        Yates' correction for ``"z"`` / ``"unpooled_z"`` / ``"chi_square"``: ``(1/n_t +
        1/n_c)/2`` (single arm ``1/(2n)``) is taken off the observed difference.
    better
        ``"higher"`` (response: default) or ``"lower"`` (an adverse outcome).
    control_prior
        Optional ``(a, b)``: a Beta(a, b) prior on the control rate (two arms). Assurance
        then averages over it together with the design prior on the effect. Not with a
        :class:`BetaRates` design prior, which carries its own control prior.
    exact_up_to
        Outcomes are enumerated exactly while the smaller arm has at most this many patients
        (and the outcome grid at most 2 million tables); beyond it the normal approximation
        of :func:`~assurance.compute.binary_exact.normal_power` is used. 0 means the normal
        approximation throughout.

    Notes
    -----
    **Exact enumeration.** For arm sizes ``(n_t, n_c)`` the success region ``R`` (outcomes
    ``(x_t, x_c)`` at which the test succeeds) is computed once, as runs of treatment counts
    per control count (:class:`~assurance.compute.binary_exact.SuccessRegion`): without a
    margin every test's region is a staircase ``x_t >= t(x_c)`` (``x_t <= u(x_c)`` when lower
    is better) whose steps are found from a few exact decisions per control count (guess
    from the continuous boundary, then bisection where it misses), and every sum over ``R``
    below is a sum of prefix sums along ``x_t`` -- no dense matrix, no matrix product.
    Classical power at rates ``(p_t, p_c)`` is ``sum_R Bin(x_t; n_t, p_t) Bin(x_c; n_c,
    p_c)``. Under a
    :class:`BetaRates` prior the prior predictive of each arm is beta-binomial and assurance
    ``= sum_R BB(x_t; n_t, a_t, b_t) BB(x_c; n_c, a_c, b_c)``, exact, no simulation
    (O'Hagan, Stevens & Campbell 2005 in its exact binomial form).

    **Decomposition.** ``P(success and benefit > a)`` needs the joint law of outcome and
    rates: with ``q`` the rate of the arm whose prior is narrower (say control) and ``h(a,
    q)`` the treatment rate at which the effect equals ``a``,

    ``P(success, benefit > a) = int f_c(q) sum_{x_t} BB_t(x_t) P(p_t > h(a, q) | x_t)
    sum_{x_c} R[x_t, x_c] Bin(x_c; n_c, q) dq``,

    where ``P(p_t > h | x_t)`` is the tail of the beta posterior ``Beta(a_t + x_t, b_t + n_t
    - x_t)`` (regularised incomplete beta, by a recurrence in ``x_t``). The integral over
    ``q`` is Gauss-Legendre on the prior's probability scale (after a smoothing substitution
    that removes the endpoint singularities of the beta quantile function), split where
    ``h`` leaves [0, 1], with ``24 + 16 sd sqrt(n)`` nodes rounded up to 32, 64, ..., 512
    (the exact power oscillates in a rate on the scale of its standard error). Integrating
    over the narrower prior keeps the integrand smooth on the node spacing. Observed error
    against 512-node rules and independent ``scipy.integrate.quad``: below 1e-8.

    **Other priors on the effect.** With the control rate fixed at ``control_rate`` (or
    given ``control_prior``), assurance ``= E[power(p_t, p_c)]`` over ``p_c`` and the effect
    ``e``, ``p_t = h(e, p_c)``: Gauss-Legendre nodes on the control prior's probability
    scale (one node when fixed) and, for each, on each prior part's probability scale
    between the effects that keep ``p_t`` in [0, 1] (point masses exactly). Pairs ``(p_c,
    e)`` giving a treatment rate outside [0, 1] (possible on the difference and risk-ratio
    scales) are **dropped and the rest renormalised**: the joint prior is conditioned on
    valid rates. The dropped share is stated in the method text of the results and warned
    about above 0.1%; the odds-ratio scale never drops anything. The ceiling and prior
    probabilities reported by :class:`~assurance.TrialDesign` use the design prior as
    given.

    **Normal approximation** (beyond ``exact_up_to``): the same quadrature over the rates
    with :func:`~assurance.compute.binary_exact.normal_power` at each node (Fleiss, Tytun &
    Ury 1980); Fisher's test is approximated by the continuity-corrected z test and the
    exact binomial test by the corrected score test.

    **Posterior-probability rules** (:class:`~assurance.PosteriorProbability`): the final
    analysis updates independent beta priors on the rates -- the design's
    ``analysis_prior``, a :class:`BetaRates` (for a single arm with the control rate fixed at
    the reference rate); None means uniform beta(1, 1) priors on each arm's rate -- and the
    trial succeeds iff ``P(benefit > beyond | x_t, x_c) >= level``. The benefit is the
    difference, log risk ratio or log odds ratio (the endpoint's scale) times the sign, so
    the event is ``p_t > h(p_c)`` (``p_t < h(p_c)`` when lower is better) with ``h(q)`` the
    treatment rate at the boundary effect. With beta posteriors ``Beta(a + x, b + n - x)``
    per arm, ``P = int f_c(q | x_c) (1 - I_{h(q)}(a_t + x_t, b_t + n_t - x_t)) dq`` (``I``
    the regularised incomplete beta function), integrated over whichever posterior is
    narrower by Gauss-Legendre on its probability scale (closed form for a single arm). The
    probability rises with ``x_t`` and falls with ``x_c``, so the region is a staircase
    found by bisection over ``x_t``, with brackets from neighbouring ``x_c`` (about two
    tables evaluated per ``x_c``). Power, assurance and the decomposition then sum over the
    region exactly as for a test. With the uniform prior and level ``1 - alpha`` the type I
    error at ``p_t = p_c`` is close to, but not exactly, ``alpha`` (no exact test is being
    inverted). Beyond ``exact_up_to`` the posterior on the effect scale is taken as normal,
    with the beta posteriors' moments at the expected counts
    (:func:`~assurance.compute.binary_exact.posterior_normal_power`). The endpoint's
    ``test`` is not used with a posterior rule.

    **Non-inferiority** margins (``Significance(margin=...)``) are supported for two arms on
    the difference scale with the z test (variance at the Farrington-Manning restricted
    rates) or the unpooled z test (Wald: observed rates; a trial with no responders in
    either arm then succeeds, which its reported type I error shows), and for a single arm
    on any scale (the reference rate is shifted by the margin). Two-arm ratio margins and
    margins with the chi-square or Fisher test are refused.

    **Type I error.** The results' ``type_one_error`` is the exact probability of success
    with both rates at the null (the treatment rate at the control rate, shifted by any
    margin), enumerated over the test's own region: for Fisher's test it stays below the
    level, for the unpooled z test it can exceed it in small trials (0.047 at 10 per arm,
    control rate 0.3, one-sided 0.025). Beyond ``exact_up_to`` it is the normal
    approximation's: the level for the z tests (below it with a continuity correction),
    close to it with a margin.

    References
    ----------
    O'Hagan, A., Stevens, J. W. & Campbell, M. J. (2005). Assurance in clinical trial design.
    Pharmaceutical Statistics 4, 187-201.

    Fleiss, J. L., Tytun, A. & Ury, H. K. (1980). A simple approximation for calculating
    sample sizes for comparing independent proportions. Biometrics 36, 343-346.

    Farrington, C. P. & Manning, G. (1990). Test statistics and sample size formulae for
    comparative binomial trials with null hypothesis of non-zero risk difference or
    non-unity relative risk. Statistics in Medicine 9, 1447-1454.

    Examples
    --------
    >>> from assurance import Significance, TrialDesign, evaluate
    >>> ep = BinaryEndpoint(control_rate=0.3)
    >>> design = TrialDesign(ep, BetaRates(control=(30, 70), treatment=(45, 55)),
    ...                      rule=Significance(0.05, sided="two"))
    >>> ds = evaluate(design, [100, 200])
    >>> bool((ds.assurance <= ds.ceiling).all())
    True
    """

    control_rate: float
    layout: Layout = "two_arm"
    allocation: float = 1.0
    scale: Scale = "difference"
    test: Test = "z"
    continuity_correction: bool = False
    better: Literal["higher", "lower"] = "higher"
    control_prior: tuple[float, float] | None = None
    exact_up_to: int = 500

    def __post_init__(self) -> None:
        owner = "BinaryEndpoint"
        object.__setattr__(self, "control_rate", check_real(
            self.control_rate, "control_rate", owner, low=0, high=1, low_open=True,
            high_open=True))
        check_choice(self.layout, "layout", owner, ["two_arm", "single_arm"])
        object.__setattr__(self, "allocation", check_real(self.allocation, "allocation", owner,
                                                          low=0, low_open=True))
        check_choice(self.scale, "scale", owner, list(SCALES))
        check_choice(self.test, "test", owner, list(TESTS))
        if self.layout == "two_arm" and self.test == "exact_binomial":
            raise AssuranceInputError(
                f"The 'test' parameter of {owner} must be 'z', 'unpooled_z', 'chi_square' or "
                "'fisher_exact' for two arms ('exact_binomial' compares one arm with a "
                "reference). Got 'exact_binomial' instead.")
        if self.layout == "single_arm" and self.test in ("fisher_exact", "unpooled_z"):
            raise AssuranceInputError(
                f"The 'test' parameter of {owner} must be 'z', 'chi_square' or "
                f"'exact_binomial' for a single arm ({self.test!r} compares two arms). Got "
                f"{self.test!r} instead.")
        if not isinstance(self.continuity_correction, bool | np.bool_):
            raise AssuranceInputError(
                f"The 'continuity_correction' parameter of {owner} must be true or false. "
                f"Got {self.continuity_correction!r} instead.")
        if self.continuity_correction and self.test not in ("z", "unpooled_z", "chi_square"):
            raise AssuranceInputError(
                f"The 'continuity_correction' parameter of {owner} must be false with the "
                f"exact test {self.test!r} (it applies to 'z', 'unpooled_z' and "
                "'chi_square'). Got True instead.")
        check_choice(self.better, "better", owner, ["higher", "lower"])
        if self.control_prior is not None:
            if self.layout == "single_arm":
                raise AssuranceInputError(
                    f"The 'control_prior' parameter of {owner} must be None for a single arm "
                    "(the reference rate is fixed). Got "
                    f"{self.control_prior!r} instead.")
            arm = _arm(self.control_prior, "control_prior", owner)
            if arm.fixed:
                raise AssuranceInputError(
                    f"The 'control_prior' parameter of {owner} must be a pair (a, b) of beta "
                    f"parameters > 0. Got {self.control_prior!r} instead.")
            object.__setattr__(self, "control_prior", (arm.a, arm.b))
        object.__setattr__(self, "exact_up_to", check_int(self.exact_up_to, "exact_up_to",
                                                          owner, low=0, high=100_000))

    # ---- what the planning machinery asks ------------------------------------------------
    @property
    def effect_name(self) -> str:  # type: ignore[override]
        """Name of the effect in plain words (``"risk ratio"``, say)."""
        return _EFFECT_NAMES[self.scale]

    @property
    def ratio_scale(self) -> bool:  # type: ignore[override]
        """True for the risk ratio and odds ratio (the analysis scale is their logarithm)."""
        return self.scale != "difference"

    @property
    def smallest_total(self) -> int:
        """One patient per arm."""
        return 2 if self.layout == "two_arm" else 1

    def rates(self, effect: float, control: float | None = None) -> tuple[float, float]:
        """(treatment rate, control rate) for a natural-scale effect at the planning rate.

        Examples
        --------
        >>> BinaryEndpoint(0.2, scale="risk_ratio").rates(1.5)
        (0.30000000000000004, 0.2)
        """
        effect = check_real(effect, "effect", "BinaryEndpoint.rates",
                            low=0 if self.ratio_scale else None,
                            low_open=self.ratio_scale)
        p_c = self.control_rate if control is None else control
        x = math.log(effect) if self.ratio_scale else effect
        return float(treatment_rate(x, p_c, self.scale)), p_c

    def describe(self) -> str:
        """Plain description for memos."""
        if self.layout == "two_arm":
            rate = f"control response rate {self.control_rate:g} (planning value"
            rate += (f"; beta({self.control_prior[0]:g}, {self.control_prior[1]:g}) prior "
                     "for assurance)" if self.control_prior else ")")
        else:
            rate = f"reference rate {self.control_rate:g}"
        test = _TEST_TEXT[self.test]
        if self.layout == "single_arm" and self.test in ("z", "chi_square"):
            test = "one-sample score z test against the reference rate"
        if self.continuity_correction:
            test += " with continuity correction"
        return (f"binary outcome, {rate}; {self.layout_text()}; {test}; effect: "
                f"{_EFFECT_NAMES[self.scale]}; {self.better} rates are better")

    def to_dict(self) -> dict[str, Any]:
        return {"kind": "binary", "control_rate": self.control_rate, "layout": self.layout,
                "allocation": self.allocation, "scale": self.scale, "test": self.test,
                "continuity_correction": bool(self.continuity_correction),
                "better": self.better,
                "control_prior": None if self.control_prior is None
                else list(self.control_prior),
                "exact_up_to": self.exact_up_to}

    def calculator(self, prior_benefit: Prior,
                   rule_benefit: Significance | PosteriorProbability, *, draws: int,
                   seed: int | None, nuisance: Prior | None = None) -> SuccessCalculator:
        """Exact (enumeration) calculator; ``draws`` and ``seed`` are not used.

        Uncertainty about the control rate comes through ``control_prior`` or a
        :class:`BetaRates` design prior, not through ``nuisance``.
        """
        if nuisance is not None:
            raise AssuranceInputError(
                "The 'nuisance' parameter of BinaryEndpoint.calculator must be None: give a "
                "beta prior on the control rate as BinaryEndpoint(control_prior=(a, b)) or "
                f"use a BetaRates design prior. Got {nuisance!r} instead.")
        if not isinstance(rule_benefit, Significance | PosteriorProbability):
            raise AssuranceInputError(
                "The 'rule' of a design with a BinaryEndpoint must be a Significance rule (the "
                "exact tests decide success) or a PosteriorProbability rule (beta analysis "
                "priors on the rates). Got "
                f"{getattr(rule_benefit, 'describe', lambda: repr(rule_benefit))()!r} instead.")
        return _BinaryCalculator(self, prior_benefit, rule_benefit)

    def check_analysis_prior(self, prior: Prior) -> Prior:
        """Accept an analysis prior for a :class:`~assurance.PosteriorProbability` rule.

        A :class:`BetaRates` prior: independent beta priors on the rates the final analysis
        updates (for a single arm the control rate fixed at the reference rate). Its effect
        scale is taken from the endpoint, since the beta priors on the rates do not depend
        on it. A design without an analysis prior (None) analyses with uniform beta(1, 1)
        priors on each arm's rate. Normal priors on the effect are accepted for a
        :class:`~assurance.Significance` rule, which does not use them, and refused by the
        calculator with a posterior-probability rule.

        Examples
        --------
        >>> ep = BinaryEndpoint(0.3)
        >>> ep.check_analysis_prior(BetaRates((1, 1), (1, 1))).describe()
        'beta_rates(control=[1.0, 1.0], treatment=[1.0, 1.0], scale=difference)'
        """
        owner = "TrialDesign"
        if isinstance(prior, BetaRates):
            rates = BetaRates(prior.control, prior.treatment, self.scale)
            _check_analysis_arms(self, rates, owner)
            return rates
        if any(isinstance(part, BetaRates) for _, part in prior.parts()):
            raise AssuranceInputError(
                f"The 'analysis_prior' parameter of {owner} must be a single BetaRates prior "
                "(one beta prior per arm) with a BinaryEndpoint; mixtures of beta priors are "
                f"not supported for the analysis. Got {prior.describe()} instead.")
        return super().check_analysis_prior(prior)

    def exact_at(self, n_t: int, n_c: int) -> bool:
        """Whether arm sizes ``(n_t, n_c)`` are enumerated exactly (else normal approx.)."""
        if self.layout == "single_arm":
            return n_t <= self.exact_up_to and n_t + 1 <= MAX_TABLES
        return min(n_t, n_c) <= self.exact_up_to and (n_t + 1) * (n_c + 1) <= MAX_TABLES


# ------------------------------------------------------------------------------------------
# the calculator
# ------------------------------------------------------------------------------------------
@dataclass
class _Nodes:
    """Quadrature nodes over (control rate, treatment rate) with their weights."""

    control: np.ndarray  # distinct control rates (K,)
    index: np.ndarray  # control-rate index of each node (m,)
    treatment: np.ndarray  # (m,)
    weight: np.ndarray  # (m,)

    @classmethod
    def from_grid(cls, control: np.ndarray, treatment: np.ndarray, weight: np.ndarray
                  ) -> _Nodes:
        """From ``(K,)`` control rates and ``(K, J)`` treatment rates and weights."""
        index = np.broadcast_to(np.arange(control.size)[:, None], treatment.shape)
        keep = weight.ravel() > 0
        return cls(control, index.ravel()[keep], treatment.ravel()[keep], weight.ravel()[keep])

    @classmethod
    def join(cls, parts: list[_Nodes]) -> _Nodes:
        offsets = np.cumsum([0] + [p.control.size for p in parts[:-1]])
        return cls(np.concatenate([p.control for p in parts]),
                   np.concatenate([p.index + o for p, o in zip(parts, offsets, strict=True)]),
                   np.concatenate([p.treatment for p in parts]),
                   np.concatenate([p.weight for p in parts]))


def _inverse_cdf(part: Prior, u: np.ndarray) -> np.ndarray:
    """Vectorised quantile of a continuous prior by bisection on its distribution function."""
    try:
        lo, hi = float(part.ppf(1e-15)), float(part.ppf(1.0 - 1e-15))
    except (ArithmeticError, ValueError, NotImplementedError):
        lo, hi = part.support()
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        m, s = part.mean(), part.sd()
        lo, hi = m - 40 * s, m + 40 * s
    a, b = np.full(u.shape, lo), np.full(u.shape, hi)
    for _ in range(200):
        mid = 0.5 * (a + b)
        below = np.asarray(part.cdf(mid)) < u
        a, b = np.where(below, mid, a), np.where(below, b, mid)
        if float(np.max(b - a, initial=0.0)) <= 1e-14 * max(1.0, abs(lo), abs(hi)):
            break
    return 0.5 * (a + b)


class _BinaryCalculator(SuccessCalculator):
    """Exact success probabilities of a binary endpoint (normal approximation for big n)."""

    monte_carlo = False

    def __init__(self, endpoint: BinaryEndpoint, prior: Prior,
                 rule: Significance | PosteriorProbability):
        self.ep = endpoint
        self.sign = endpoint.sign
        self.spec = self._test_spec(rule)
        self.parts = prior.parts()
        beta = [isinstance(part, BetaRates) for _, part in self.parts]
        self.beta_rates = all(beta)
        if any(beta) and not self.beta_rates:
            raise AssuranceInputError(
                "A design prior that mixes BetaRates with other priors cannot be used with "
                "BinaryEndpoint: make every part a BetaRates prior (a mixture of beta priors) "
                "or none of them.")
        if self.beta_rates:
            self._check_beta_parts()
        reference = endpoint.control_rate
        self.control = (RateArm.beta(*endpoint.control_prior) if endpoint.control_prior
                        else RateArm.fixed_at(reference))
        self._regions: dict[tuple[int, int], np.ndarray] = {}
        self._node_sets: dict[tuple[Any, ...], _Nodes] = {}
        self._outer_nodes: dict[tuple[Any, ...], tuple[Any, ...]] = {}
        self.dropped = 0.0 if self.beta_rates else self._dropped_mass()
        self.effect_spread = 0.0 if self.beta_rates else self._effect_spread()

    # ---- set-up ---------------------------------------------------------------------------
    def _test_spec(self, rule: Significance | PosteriorProbability
                   ) -> TestSpec | PosteriorSpec:
        if isinstance(rule, PosteriorProbability):
            return self._posterior_spec(rule)
        ep = self.ep
        margin = float(rule.margin)
        if margin > 0 and ep.layout == "two_arm":
            if ep.scale != "difference" or ep.test not in ("z", "unpooled_z"):
                raise AssuranceInputError(
                    "A non-inferiority margin with two arms needs the z test on the difference "
                    "scale (Farrington-Manning, or the unpooled Wald test); got test "
                    f"{ep.test!r} on the {ep.scale!r} scale. Use scale='difference', test='z' "
                    "or 'unpooled_z'.")
        spec = TestSpec(test=ep.test, alpha=rule.one_sided_alpha, sign=self.sign,
                        scale=ep.scale, two_arm=ep.layout == "two_arm",
                        null_shift=-self.sign * margin if margin else 0.0,
                        reference=None if ep.layout == "two_arm" else ep.control_rate,
                        continuity=bool(ep.continuity_correction),
                        min_estimate=rule.min_estimate)
        if not spec.two_arm and not 0.0 < spec.null_rate < 1.0:
            raise AssuranceInputError(
                f"The margin {margin:g} moves the reference rate {ep.control_rate:g} to "
                f"{spec.null_rate:.4g}, outside (0, 1). Use a smaller margin.")
        return spec

    def _posterior_spec(self, rule: PosteriorProbability) -> PosteriorSpec:
        """The posterior-probability rule (benefit scale) as a "test" for the enumeration."""
        ep = self.ep
        prior = rule.analysis_prior
        if prior is None:  # documented default: uniform beta(1, 1) priors on the rates
            control = (RateArm.beta(1.0, 1.0) if ep.layout == "two_arm"
                       else RateArm.fixed_at(ep.control_rate))
            prior = BetaRates(control.describe(), (1.0, 1.0), ep.scale,
                              _negated=self.sign < 0)
        if not isinstance(prior, BetaRates):
            raise AssuranceInputError(
                "The 'analysis_prior' of a design with a BinaryEndpoint and a "
                "PosteriorProbability rule must be None (uniform beta(1, 1) priors on each "
                "arm's rate) or a BetaRates prior (one beta prior per arm); the posterior is "
                f"computed exactly from beta posteriors. Got {prior.describe()} instead.")
        if prior.negated_copy != (self.sign < 0):
            raise AssuranceInputError(
                "The BetaRates analysis prior passed to the calculator must be on the benefit "
                "scale (negated exactly when lower rates are better), as "
                "PosteriorProbability.on_benefit_scale gives it.")
        rates = BetaRates(prior.control, prior.treatment, ep.scale)
        _check_analysis_arms(ep, rates, "TrialDesign")
        if ep.continuity_correction:
            raise AssuranceInputError(
                "The 'continuity_correction' parameter of BinaryEndpoint must be false with a "
                "PosteriorProbability rule (the posterior is exact; the correction belongs to "
                "the z and chi-square tests). Got True instead.")
        spec = PosteriorSpec(level=rule.level, beyond=float(rule.null_value), sign=self.sign,
                             scale=ep.scale, two_arm=ep.layout == "two_arm",
                             treatment=rates.treatment_arm, control=rates.control_arm)
        natural = ep.from_benefit(spec.beyond)
        if ep.scale == "difference" and not -1.0 < spec.boundary < 1.0:
            raise AssuranceInputError(
                f"The 'beyond' parameter of PosteriorProbability must be a difference in "
                f"rates strictly between -1 and 1. Got {natural:g} instead.")
        if not spec.two_arm:
            rate = float(treatment_rate(spec.boundary, ep.control_rate, ep.scale))
            if not 0.0 < rate < 1.0:
                raise AssuranceInputError(
                    f"The 'beyond' parameter of PosteriorProbability ({natural:g}) moves the "
                    f"reference rate {ep.control_rate:g} to {rate:.4g}, outside (0, 1): no "
                    "outcome could ever (or always would) succeed. Use a smaller value.")
        return spec

    def _check_beta_parts(self) -> None:
        ep = self.ep
        for _, part in self.parts:
            if part.scale != ep.scale:
                raise AssuranceInputError(
                    f"The BetaRates design prior is on the {part.scale!r} scale but the "
                    f"endpoint's scale is {ep.scale!r}; they must agree. Use BetaRates(..., "
                    f"scale={ep.scale!r}) (in a design file: scale = \"{ep.scale}\" in "
                    "[design_prior]).")
            if part.negated_copy != (self.sign < 0):
                raise AssuranceInputError(
                    "The BetaRates prior passed to the calculator must be on the benefit "
                    "scale (negated exactly when lower rates are better).")
            if ep.layout == "single_arm" and not (
                    part.control_arm.fixed and abs(part.control_arm.value - ep.control_rate)
                    <= 1e-12):
                raise AssuranceInputError(
                    "For a single arm the BetaRates design prior must fix the control rate at "
                    f"the reference rate {ep.control_rate:g} (control={ep.control_rate:g}). "
                    f"Got control={part.control!r}.")
        if ep.control_prior is not None:
            raise AssuranceInputError(
                "BinaryEndpoint(control_prior=...) cannot be combined with a BetaRates design "
                "prior, which already holds a prior on the control rate.")

    def _dropped_mass(self) -> float:
        nodes = self._effect_nodes(8, QUAD_NODES, None, normalise=False)
        mass = float(nodes.weight.sum())
        if mass <= 1e-9:
            raise AssuranceInputError(
                "The design prior puts (almost) no probability on effects that keep the "
                f"treatment rate in [0, 1] with control rate {self.ep.control_rate:g}; check "
                "the prior's scale.")
        self.mass = mass
        dropped = 1.0 - mass if 1.0 - mass > 1e-9 else 0.0  # quadrature rounding is not a drop
        if dropped > DROPPED_MASS_WARNING:
            warnings.warn(
                f"{dropped:.2%} of the design prior gives a treatment rate outside [0, 1] "
                "(given the control rate); those values are dropped and the rest renormalised. "
                "Consider the odds-ratio scale or a narrower prior.",
                AssuranceWarning, stacklevel=4)
        return dropped

    def _effect_spread(self) -> float:
        """Spread of the effect prior carried over to the treatment rate (for node counts).

        Per continuous part the interquartile range / 1.349 (an SD that exists for heavy
        tails too), times the slope of the treatment rate in the effect at the planning
        control rate: 1 (difference), ``p`` (log risk ratio), ``p (1 - p)`` (log odds ratio).
        """
        p = self.ep.control_rate
        slope = {"difference": 1.0, "risk_ratio": p, "odds_ratio": p * (1.0 - p)}[self.ep.scale]
        spread = 0.0
        for _, part in self.parts:
            if isinstance(part, PointMass):
                continue
            iqr = float(part.ppf(0.75)) - float(part.ppf(0.25))
            spread = max(spread, iqr / 1.349)
        return min(spread * slope, 1.0)

    # ---- nodes over the rates -------------------------------------------------------------
    def _effect_nodes(self, j: int, k: int, cut: Any, *, normalise: bool = True) -> _Nodes:
        """Nodes for a prior on the effect plus a fixed or beta control rate.

        Outer: the control rate (its fixed value, or Gauss-Legendre blocks on its beta
        probability scale, split where a point mass or the cut leaves [0, 1]). Inner: each
        prior part; a continuous part by Gauss-Legendre on its probability scale between the
        effects that keep ``p_t`` in [0, 1] (and beyond the cut).
        """
        key = ("effect", j, k, None if cut is None else (cut.value, cut.inclusive), normalise)
        if key in self._node_sets:
            return self._node_sets[key]
        sign, scale = self.sign, self.ep.scale
        breaks: list[float] = []
        for _, part in self.parts:
            if isinstance(part, PointMass):
                breaks += control_breakpoints(sign * part.value, scale)
        if cut is not None:
            breaks += control_breakpoints(sign * cut.value, scale)
        pc, wc = self.control.split_nodes(breaks, k)
        x_lo, x_hi = effect_bounds(pc, scale)
        e_lo, e_hi = (x_lo, x_hi) if sign > 0 else (-x_hi, -x_lo)
        if cut is not None:
            e_lo = np.maximum(e_lo, cut.value)
        tt, tw = smoothed_rule(j)
        pieces = []
        for w, part in self.parts:
            if isinstance(part, PointMass):
                e0 = part.value
                valid = (sign * e0 >= x_lo) & (sign * e0 <= x_hi)
                if cut is not None and not (e0 >= cut.value if cut.inclusive
                                            else e0 > cut.value):
                    valid = np.zeros_like(valid)
                p_t = np.clip(treatment_rate(sign * e0, pc, scale), 0.0, 1.0)
                pieces.append(_Nodes.from_grid(pc, p_t[:, None], (w * wc * valid)[:, None]))
                continue
            u0 = np.asarray(part.cdf(e_lo), dtype=float)
            u1 = np.asarray(part.cdf(e_hi), dtype=float)
            width = np.maximum(u1 - u0, 0.0)
            u = u0[:, None] + width[:, None] * tt[None, :]
            effect = _inverse_cdf(part, u)
            effect = np.clip(effect, e_lo[:, None], e_hi[:, None])
            p_t = np.clip(treatment_rate(sign * effect, pc[:, None], scale), 0.0, 1.0)
            pieces.append(_Nodes.from_grid(pc, p_t, w * wc[:, None] * width[:, None] * tw))
        nodes = _Nodes.join(pieces)
        if normalise:
            nodes.weight = nodes.weight / self.mass
        self._node_sets[key] = nodes
        return nodes

    def _beta_orientation(self, part: BetaRates) -> tuple[bool, RateArm, RateArm]:
        outer_control = part.control_arm.sd <= part.treatment_arm.sd
        if outer_control:
            return True, part.control_arm, part.treatment_arm
        return False, part.treatment_arm, part.control_arm

    def _outer_for_cut(self, part: BetaRates, cut: Any, k: int
                       ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
        """Outer-arm nodes and, with a cut, the inner arm's boundary rate at each node.

        They depend on the sizes only through the node count ``k``: computed once per part,
        cut and ``k`` (the beta quantile function is the costly step).
        """
        key = (id(part), None if cut is None else (cut.value, cut.inclusive), k)
        found = self._outer_nodes.get(key)
        if found is None:
            found = self._outer_nodes[key] = self._outer_for_cut_uncached(part, cut, k)
        return found

    def _outer_for_cut_uncached(self, part: BetaRates, cut: Any, k: int
                                ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
        outer_control, outer, _ = self._beta_orientation(part)
        if cut is None:
            q, w = outer.split_nodes([], k)
            return q, w, None
        x_a = self.sign * cut.value
        finder = control_breakpoints if outer_control else treatment_breakpoints
        q, w = outer.split_nodes(finder(x_a, part.scale), k)
        mapping = treatment_rate if outer_control else control_rate
        return q, w, mapping(x_a, q, part.scale)

    def _beta_nodes(self, part: BetaRates, n_max: int, cut: Any) -> _Nodes:
        """Nodes over the two rates of a BetaRates part (normal-approximation path)."""
        if part.control_arm.fixed and part.treatment_arm.fixed:
            inside = 1.0 if cut is None or self._fixed_in_cut(part, cut) else 0.0
            return _Nodes.from_grid(np.array([part.control_arm.value]),
                                    np.array([[part.treatment_arm.value]]),
                                    np.array([[inside]]))
        outer_control, outer, inner = self._beta_orientation(part)
        q, w, boundary = self._outer_for_cut(part, cut, _node_count(outer.sd, n_max))
        lo, hi = np.zeros_like(q), np.ones_like(q)
        if boundary is not None:
            # benefit > cut: sign * effect > cut; the effect rises with p_t, falls with p_c
            above = (self.sign > 0) == outer_control
            lo, hi = (np.clip(boundary, 0, 1), hi) if above else (lo, np.clip(boundary, 0, 1))
        r, rw = inner.nodes(lo, hi, _node_count(inner.sd, n_max))
        weight = w[:, None] * rw
        if outer_control:
            return _Nodes.from_grid(q, r, weight)
        # outer is the treatment arm: one control rate per node
        m = r.size
        return _Nodes(r.ravel(), np.arange(m), np.repeat(q, r.shape[1]), weight.ravel())

    def _fixed_in_cut(self, part: BetaRates, cut: Any) -> bool:
        value = self.sign * float(natural_effect(part.treatment_arm.value,
                                                 part.control_arm.value, part.scale))
        return value >= cut.value if cut.inclusive else value > cut.value

    # ---- exact pieces ---------------------------------------------------------------------
    def _region(self, n_t: int, n_c: int) -> SuccessRegion:
        key = (n_t, n_c)
        region = self._regions.get(key)
        if region is None:
            region = success_runs(self.spec, n_t, n_c)
            if len(self._regions) >= 128:
                self._regions.pop(next(iter(self._regions)))
            self._regions[key] = region
        return region

    @staticmethod
    def _arm_pmf(arm: RateArm, n: int) -> np.ndarray:
        if arm.fixed:
            return binomial_pmf(n, arm.value)[0]
        return beta_binomial_pmf(n, arm.a, arm.b)

    def _exact_nodes(self, region: SuccessRegion, n_t: int, n_c: int, nodes: _Nodes) -> float:
        """sum of weight x exact power at each node (binomial probabilities per arm)."""
        rb = region.by_treatment(binomial_pmf(n_c, nodes.control))  # (K, n_t + 1)
        total = 0.0
        for start in range(0, nodes.treatment.size, 4096):
            sl = slice(start, start + 4096)
            pmf_t = binomial_pmf(n_t, nodes.treatment[sl])
            power = np.einsum("ix,ix->i", pmf_t, rb[nodes.index[sl]])
            total += float(np.dot(nodes.weight[sl], power))
        return total

    def _beta_exact(self, part: BetaRates, region: SuccessRegion, n_t: int, n_c: int,
                    cut: Any) -> float:
        """Exact P(success [and benefit > cut]) under a BetaRates part."""
        pmf_t = self._arm_pmf(part.treatment_arm, n_t)
        pmf_c = self._arm_pmf(part.control_arm, n_c)
        if cut is None:
            return region.probability(pmf_t, pmf_c)
        if part.control_arm.fixed and part.treatment_arm.fixed:
            return region.probability(pmf_t, pmf_c) if self._fixed_in_cut(part, cut) else 0.0
        outer_control, outer, inner = self._beta_orientation(part)
        k = _node_count(outer.sd, max(n_t, n_c))
        q, w, boundary = self._outer_for_cut(part, cut, k)
        if outer_control:  # P(x_t, x_c, region) = sum_k w_k bb_t(x_t) S(x_t | q_k) bin(x_c; q_k)
            rb = region.by_treatment(binomial_pmf(n_c, q))
            n_in, pmf_in = n_t, pmf_t
            above = self.sign > 0
        else:
            rb = region.by_control(binomial_pmf(n_t, q))
            n_in, pmf_in = n_c, pmf_c
            above = self.sign < 0
        below = posterior_below(inner.a, inner.b, n_in, boundary)
        tail = 1.0 - below if above else below
        return float(np.einsum("k,x,xk,kx->", w, pmf_in, tail, rb))

    # ---- the SuccessCalculator interface --------------------------------------------------
    def _one_size(self, n_t: int, n_c: int, cut: Any) -> float:
        exact = self.ep.exact_at(n_t, n_c)
        n_max = max(n_t, n_c)
        region = self._region(n_t, n_c) if exact else None
        if self.beta_rates:
            total = 0.0
            for w, part in self.parts:
                if exact:
                    total += w * self._beta_exact(part, region, n_t, n_c, cut)
                else:
                    nodes = self._beta_nodes(part, n_max, cut)
                    total += w * self._normal_nodes(nodes, n_t, n_c)
            return total
        nodes = self._effect_nodes(_node_count(self.effect_spread, n_max),
                                   _node_count(self.control.sd, n_max), cut)
        if exact:
            return self._exact_nodes(region, n_t, n_c, nodes)
        return self._normal_nodes(nodes, n_t, n_c)

    def _normal_nodes(self, nodes: _Nodes, n_t: int, n_c: int) -> float:
        power = normal_power(self.spec, nodes.treatment, nodes.control[nodes.index], n_t, n_c)
        return float(np.dot(nodes.weight, power))

    def _sizes(self, n_t: Any, n_c: Any) -> tuple[np.ndarray, np.ndarray]:
        n_t = np.atleast_1d(np.asarray(n_t)).astype(int)
        n_c = np.atleast_1d(np.asarray(n_c)).astype(int)
        two = self.ep.layout == "two_arm"
        if n_t.min(initial=1) < 1 or (two and n_c.min(initial=1) < 1):
            raise AssuranceInputError(
                "The arm sizes of BinaryEndpoint must be >= 1 patient per arm. Got "
                f"treatment {n_t.tolist()} and control {n_c.tolist()} instead.")
        if not two:
            n_c = np.zeros_like(n_t)
        return np.broadcast_arrays(n_t, n_c)

    def success(self, n_t, n_c, cuts):
        n_t, n_c = self._sizes(n_t, n_c)
        out = np.empty((1 + len(cuts), n_t.size))
        for i, (a, b) in enumerate(zip(n_t.tolist(), n_c.tolist(), strict=True)):
            out[0, i] = self._one_size(a, b, None)
            for k, cut in enumerate(cuts, start=1):
                out[k, i] = self._one_size(a, b, cut)
        out = np.clip(out, 0.0, 1.0)
        joint = [np.minimum(row, out[0]) for row in out[1:]]
        return SuccessProbabilities(success=out[0], joint=joint)

    def power(self, effect_benefit, n_t, n_c):
        n_t, n_c = self._sizes(n_t, n_c)
        p_c = self.ep.control_rate
        p_t = float(treatment_rate(self.sign * float(effect_benefit), p_c, self.ep.scale))
        if not -1e-12 <= p_t <= 1 + 1e-12:
            natural = self.ep.from_benefit(effect_benefit)
            raise AssuranceInputError(
                f"The effect {natural:g} gives a treatment rate of {p_t:.4g} at control rate "
                f"{p_c:g}; rates must lie in [0, 1]. Choose a smaller effect.")
        p_t = min(max(p_t, 0.0), 1.0)
        out = np.empty(n_t.size)
        for i, (a, b) in enumerate(zip(n_t.tolist(), n_c.tolist(), strict=True)):
            if self.ep.exact_at(a, b):
                region = self._region(a, b)
                out[i] = region.probability(binomial_pmf(a, p_t)[0], binomial_pmf(b, p_c)[0])
            else:
                out[i] = float(normal_power(self.spec, p_t, p_c, a, b))
        return np.clip(out, 0.0, 1.0)

    def method(self) -> str:
        ep = self.ep
        if isinstance(self.spec, PosteriorSpec):
            test = _posterior_text(self.spec)
        else:
            test = _TEST_TEXT[ep.test] + (" with continuity correction"
                                          if ep.continuity_correction else "")
        limit = ("normal approximation throughout" if ep.exact_up_to == 0 else
                 f"exact enumeration of all outcomes while the smaller arm has at most "
                 f"{ep.exact_up_to} patients, normal approximation beyond")
        if self.beta_rates:
            prior = ("beta priors on the rates: beta-binomial prior predictive per arm (exact "
                     "sums, no simulation); joint probabilities by Gauss-Legendre quadrature "
                     "over the rate with the narrower prior and the other arm's beta posterior")
        else:
            over = ("the control rate's beta prior and " if ep.control_prior else "")
            prior = (f"Gauss-Legendre quadrature over {over}the effect prior (probability "
                     "scale), binomial probabilities at each node")
            if self.dropped > 0:
                prior += (f"; a share {self.dropped:.2g} of the prior gives rates outside "
                          "[0, 1] and is dropped, the rest renormalised")
        return f"{test}; {limit}; {prior}"


def _posterior_text(spec: PosteriorSpec) -> str:
    def arm(a: RateArm) -> str:
        return f"fixed at {a.value:g}" if a.fixed else f"beta({a.a:g}, {a.b:g})"

    priors = (f"treatment rate {arm(spec.treatment)}, control rate {arm(spec.control)}"
              if spec.two_arm else f"treatment rate {arm(spec.treatment)}")
    return (f"posterior probability rule (level {spec.level:g}) with beta analysis priors "
            f"({priors}): success regions from the beta posteriors, each probability by "
            f"{POSTERIOR_NODES}-node Gauss-Legendre quadrature over the narrower posterior "
            "(closed form for a single arm), the boundary found by bisection over the "
            "responders (normal approximation: posterior moments on the effect scale)")
