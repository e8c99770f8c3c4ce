"""Two endpoints both needed: efficacy and safety (or two efficacy endpoints) in one trial.

The trial succeeds only when each endpoint's rule is met. Given the two true effects, the
two estimates are taken as bivariate normal with the stated correlation (the same patients
contribute to both), so the probability that both pass their thresholds is an exact
bivariate normal orthant (Owen's T function). Assurance averages that over independent
draws from the two design priors (Monte Carlo, each draw contributing its exact conditional
probability), with Monte Carlo standard errors. Classical power at the two assumed effects
is exact.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from ._validation import check_int, check_real, check_real_array
from .compute.normal_outcome import DrawAverages
from .compute.prior_predictive import upper_orthant_normal
from .errors import AssuranceInputError

__all__ = ["evaluate_joint", "normal_standard_error"]


def normal_standard_error(design: Any, n_t: np.ndarray, n_c: np.ndarray) -> np.ndarray:
    """Standard error of the estimate (benefit scale) under the normal approximation.

    Continuous: ``sigma sqrt(1/n_t + 1/n_c)``; time to event: Schoenfeld's
    ``1/sqrt(E p(1-p))`` at the planning hazard ratio; counts: the Wald variance of the log
    rate ratio at the assumed ratio. Other endpoints are not supported here.

    Examples
    --------
    >>> import assurance as asr
    >>> d = asr.TrialDesign(asr.ContinuousEndpoint(sigma=2.0), asr.Normal(1.0, 0.5))
    >>> round(float(normal_standard_error(d, np.array([50]), np.array([50]))[0]), 4)
    0.4
    """
    ep = design.endpoint
    n_t, n_c = np.asarray(n_t), np.asarray(n_c)
    if hasattr(ep, "se_factor") and hasattr(ep, "sigma"):
        return ep.sigma * ep.se_factor(n_t, n_c)
    if hasattr(ep, "standard_error"):
        return np.asarray(ep.standard_error(n_t, n_c), dtype=float)
    if hasattr(ep, "log_ratio_variance"):
        return np.sqrt(ep.log_ratio_variance(design.assumed_effect, n_t, n_c))
    raise AssuranceInputError(
        f"evaluate_joint needs a normal approximation for each endpoint; "
        f"{type(ep).__name__} has none. Use continuous, time-to-event or count endpoints."
    )


def evaluate_joint(
    first: Any,
    second: Any,
    sizes: Sequence[int] | np.ndarray,
    *,
    correlation: float,
    draws: int = 20_000,
    seed: int | None = 20260101,
) -> Any:
    """P(both rules met), and each alone, for each total sample size.

    Parameters
    ----------
    first, second
        Two :class:`~assurance.TrialDesign` on the same patients (same layout and
        allocation), each with its own endpoint, design prior and rule. The rule of each is
        judged with a z analysis on its normal-approximation standard error.
    sizes
        Total numbers of patients.
    correlation
        Correlation of the two estimates given the true effects, in (-1, 1) (on the benefit
        scales: positive when a better estimate on one goes with a better one on the other).
    draws, seed
        Monte Carlo draws from the two design priors (independent of each other).

    Returns
    -------
    xarray.Dataset
        ``prob_both``, ``prob_first``, ``prob_second`` (assurance) with ``*_mcse``, and
        ``power_both`` at the two assumed effects, over ``n``.

    Examples
    --------
    >>> import assurance as asr
    >>> eff = asr.TrialDesign(asr.ContinuousEndpoint(10.0, analysis="z"), asr.Normal(4, 2))
    >>> saf = asr.TrialDesign(asr.ContinuousEndpoint(5.0, analysis="z"), asr.Normal(0.5, 0.5),
    ...                       rule=asr.Significance(0.025, margin=1.0))
    >>> ds = evaluate_joint(eff, saf, [200, 400], correlation=0.3, draws=2000, seed=1)
    >>> bool((ds.prob_both <= ds.prob_first + 3 * ds.prob_both_mcse).all())
    True
    """
    import xarray as xr

    from .planning import MAX_DRAWS, MAX_TOTAL

    owner = "evaluate_joint"
    rho = check_real(correlation, "correlation", owner, low=-1, high=1, low_open=True,
                     high_open=True)
    draws = check_int(draws, "draws", owner, low=100, high=MAX_DRAWS)
    for name, d in (("first", first), ("second", second)):
        if not hasattr(d, "endpoint") or not hasattr(d, "benefit_prior"):
            raise AssuranceInputError(
                f"The '{name}' parameter of {owner} must be a TrialDesign. Got {d!r} instead.")
    a, b = first.endpoint, second.endpoint
    if (a.layout, a.allocation) != (b.layout, b.allocation):
        raise AssuranceInputError(
            f"The 'second' parameter of {owner} must share the first design's layout and "
            f"allocation ({a.layout}, {a.allocation:g}). Got ({b.layout}, {b.allocation:g}).")
    smallest = max(a.smallest_total, b.smallest_total)
    n = np.unique(check_real_array(sizes, "sizes", owner, low=smallest,
                                   high=MAX_TOTAL).astype(np.int64))
    n_t, n_c = a.arm_sizes(n)
    ses, thresholds, rules = [], [], []
    for d in (first, second):
        rule = d.benefit_rule
        se = normal_standard_error(d, n_t, n_c)
        ses.append(se)
        thresholds.append(rule.threshold(se, rule.critical_z()))
        rules.append(rule)

    streams = [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(2)]
    effects = [first.benefit_prior.sample(draws, streams[0]),
               second.benefit_prior.sample(draws, streams[1])]

    def both_given(e1: np.ndarray, e2: np.ndarray) -> np.ndarray:
        h = (thresholds[0][None, :] - e1[:, None]) / ses[0][None, :]
        k = (thresholds[1][None, :] - e2[:, None]) / ses[1][None, :]
        return upper_orthant_normal(h, k, np.full(h.shape, rho))

    from scipy import special

    chunk = max(1, 200_000 // max(n.size, 1))
    keys = ("both", "first", "second")
    averages = DrawAverages(len(keys), n.size)
    for start in range(0, draws, chunk):
        e1 = effects[0][start:start + chunk]
        e2 = effects[1][start:start + chunk]
        averages.add([
            both_given(e1, e2),
            special.ndtr((e1[:, None] - thresholds[0][None, :]) / ses[0][None, :]),
            special.ndtr((e2[:, None] - thresholds[1][None, :]) / ses[1][None, :]),
        ])
    mean, se = averages.result()
    data: dict[str, Any] = {}
    for row, key in enumerate(keys):
        data[f"prob_{key}"] = ("n", mean[row])
        data[f"prob_{key}_mcse"] = ("n", se[row])
    assumed = [float(d.endpoint.to_benefit(d.assumed_effect)) for d in (first, second)]
    power = both_given(np.array([assumed[0]]), np.array([assumed[1]]))[0]
    data["power_both"] = ("n", power)
    ds = xr.Dataset(data, coords={"n": n, "n_treatment": ("n", n_t), "n_control": ("n", n_c)},
                    attrs={"correlation": rho, "draws": draws,
                           "seed": -1 if seed is None else int(seed),
                           "first": first.title, "second": second.title})
    ds["prob_both"].attrs["long_name"] = "P(both rules met) under the two design priors"
    ds["power_both"].attrs["long_name"] = "P(both rules met) at the two assumed effects"
    return ds
