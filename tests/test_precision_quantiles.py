"""Precision by simulation: quantile-based width figures against exact references.

Each simulated data set's posterior interval is computed without posterior draws (beta
intervals for one proportion; the effect's distribution by quadrature for two proportions),
so the simulated quantiles of the width (``width_median``, ``width_q90``,
``width_worst_likely``) and ``coverage_worst_likely`` estimate the exact prior-predictive
quantiles without bias. The checks:

* per data set, the two-arm effect's interval (difference, log odds ratio, log risk ratio;
  highest density and equal tails) and fixed-length coverage against
  ``scipy.integrate.quad`` of ``F_D(d) = int f_c(p) F_t(g^-1(d + g(p))) dp`` written here
  (the highest-density interval checked by its two defining conditions: the coverage and
  equal densities at the ends);
* every quantile-based figure of a simulation at two sizes against an exact enumeration of
  all outcomes written here with ``scipy.stats`` (beta-binomial / binomial probabilities and
  ``scipy.stats.beta`` intervals for one proportion; for two proportions each outcome pair's
  interval from a numerical convolution of the two beta posteriors on a grid), within 4
  reported Monte Carlo SEs plus the spacing of the discrete width distribution next to the
  quantile (a quantile of a discrete distribution estimated from samples lands on a
  neighbouring atom when the cumulative probability at the exact one is close to the level);
* the modified worst-outcome size by simulation against the exact one of the enumeration.

Before this change (posterior draws per data set) the same checks failed by 10-25 standard
errors (issue 13: width_q90 0.10018 with 1,000 draws against an exact 0.09743).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, signal, special, stats

from assurance.compute import interval_width as engine
from assurance.precision import (
    BetaPrior,
    OneProportion,
    TwoProportions,
    interval_width_curve,
    solve_precision_n,
)

QUANTILES = ("width_median", "width_q90", "width_worst_likely")


# ------------------------------------------------------------------------------------------
# per data set: the effect of two beta posteriors against scipy quadrature
# ------------------------------------------------------------------------------------------
def _g(p: float, scale: str) -> float:
    return {"difference": p, "log_odds_ratio": float(special.logit(p)),
            "log_risk_ratio": float(np.log(p))}[scale]


def _ref_cdf_pdf(d: float, at, bt, ac, bc, scale) -> tuple[float, float]:
    """F_D(d) and f_D(d) by scipy.integrate.quad over the control rate."""
    def inner(y: float) -> tuple[float, float]:
        if scale == "difference":
            p, jac = y, 1.0
        elif scale == "log_odds_ratio":
            p = float(special.expit(y))
            jac = p * (1 - p)
        else:
            if y >= 0:
                return 1.0, 0.0
            p = float(np.exp(y))
            jac = p
        if not 0 < p < 1:
            return (1.0 if p >= 1 else 0.0), 0.0
        return float(stats.beta.cdf(p, at, bt)), float(stats.beta.pdf(p, at, bt)) * jac

    lo, hi = stats.beta.ppf([1e-15, 1 - 1e-15], ac, bc)
    # the control rates where the treatment's scale value stays inside its support (the
    # integrand is 0 below; F_t = 1 above, whose control mass is added in closed form)
    top = {"difference": 1.0 - d, "log_odds_ratio": np.inf, "log_risk_ratio": np.exp(-d)}
    bottom = -d if scale == "difference" else 0.0
    above = float(stats.beta.sf(min(top[scale], 1.0), ac, bc)) if top[scale] < 1 else 0.0
    lo, hi = max(lo, bottom), min(hi, top[scale])
    if lo >= hi:
        return above, 0.0
    fc = stats.beta(ac, bc).pdf
    F = above + integrate.quad(lambda p: fc(p) * inner(d + _g(p, scale))[0], lo, hi,
                               limit=400, epsabs=1e-13, epsrel=1e-11)[0]
    f = integrate.quad(lambda p: fc(p) * inner(d + _g(p, scale))[1], lo, hi, limit=400,
                       epsabs=1e-13, epsrel=1e-11)[0]
    return F, f


ARMS = [(31, 71, 21, 81), (1, 101, 50, 52), (3, 200, 120, 90), (91, 111, 61, 141),
        (1, 41, 1, 41)]


@pytest.mark.parametrize("scale", engine.EFFECT_SCALES)
def test_effect_intervals_against_quadrature(scale):
    # tolerance 1e-8 in probability and in the density ratio: both sides integrate to
    # ~1e-11 (quad's epsrel; the package's 48-node rule, see interval_width.py)
    a_t, b_t, a_c, b_c = (np.array(v, dtype=float) for v in zip(*ARMS, strict=True))
    for interval in ("highest_density", "equal_tailed"):
        _, ok, lo, hi = engine._effect_intervals(a_t, b_t, a_c, b_c, scale, 0.9, interval)
        assert ok.all()
        for k in range(len(ARMS)):
            args = (a_t[k], b_t[k], a_c[k], b_c[k], scale)
            F_lo, f_lo = _ref_cdf_pdf(lo[k], *args)
            F_hi, f_hi = _ref_cdf_pdf(hi[k], *args)
            if interval == "equal_tailed":
                assert F_lo == pytest.approx(0.05, abs=1e-8)
                assert F_hi == pytest.approx(0.95, abs=1e-8)
            else:
                assert F_hi - F_lo == pytest.approx(0.9, abs=1e-8)
                assert f_hi / f_lo == pytest.approx(1.0, abs=1e-7)
    # fixed-length windows: the best window of length L holds probability c exactly when
    # the highest-density interval of coverage c is L long; that interval is checked by
    # its defining conditions with quad (tolerances as above); the equal-tailed window's
    # tails are equal (quad)
    length = {"difference": 0.15, "log_odds_ratio": 0.8, "log_risk_ratio": 0.6}[scale]
    for k in (0, 1, 4):
        args = (a_t[k], b_t[k], a_c[k], b_c[k], scale)
        one = [v[k:k + 1] for v in (a_t, b_t, a_c, b_c)]
        best = engine.effect_window_coverage(*one, scale=scale, length=length,
                                             interval="highest_density")[0][0]
        w, _, lo, hi = engine._effect_intervals(*one, scale, best, "highest_density")
        assert w[0] == pytest.approx(length, rel=1e-7)
        F_lo, f_lo = _ref_cdf_pdf(lo[0], *args)
        F_hi, f_hi = _ref_cdf_pdf(hi[0], *args)
        assert F_hi - F_lo == pytest.approx(best, abs=1e-8)
        assert f_hi / f_lo == pytest.approx(1.0, abs=1e-6)
        et = engine.effect_window_coverage(*one, scale=scale, length=length,
                                           interval="equal_tailed")[0][0]
        w, _, lo, hi = engine._effect_intervals(*one, scale, et, "equal_tailed")
        assert w[0] == pytest.approx(length, rel=1e-7)
        assert _ref_cdf_pdf(lo[0], *args)[0] == pytest.approx((1 - et) / 2, abs=1e-8)
        assert et <= best + 1e-12


# ------------------------------------------------------------------------------------------
# exact references: every outcome, quantiles of the width
# ------------------------------------------------------------------------------------------
def _weighted_quantile(values: np.ndarray, weight: np.ndarray, q: float) -> float:
    """Smallest value whose cumulative probability reaches q."""
    order = np.argsort(values, kind="stable")
    cum = np.cumsum(weight[order])
    return float(values[order][min(np.searchsorted(cum, q - 1e-12), values.size - 1)])


def _atom_gap(values: np.ndarray, weight: np.ndarray, at: float) -> float:
    """Distance from ``at`` to the farther of its neighbouring atoms (probability > 1e-6)."""
    atoms = np.unique(np.round(values[weight > 1e-6], 12))
    i = np.searchsorted(atoms, at - 1e-12)
    near = atoms[max(i - 1, 0):i + 2]
    return float(np.max(np.abs(near - at)))


def _exact_summary(width: np.ndarray, cover: np.ndarray, weight: np.ndarray, share: float
                   ) -> dict[str, tuple[float, float]]:
    out = {}
    for name, q in (("width_median", 0.5), ("width_q90", 0.9), ("width_worst_likely", share)):
        v = _weighted_quantile(width, weight, q)
        out[name] = (v, _atom_gap(width, weight, v))
    v = -_weighted_quantile(-cover, weight, share)
    out["coverage_worst_likely"] = (v, _atom_gap(cover, weight, v))
    return out


def _golden(f, lo: np.ndarray, hi: np.ndarray, iters: int = 70) -> np.ndarray:
    """Vectorised golden-section search for the minimum of a unimodal f on [lo, hi]."""
    r = (np.sqrt(5) - 1) / 2
    a, b = lo.copy(), hi.copy()
    for _ in range(iters):
        c, d = b - r * (b - a), a + r * (b - a)
        left = f(c) < f(d)
        b = np.where(left, d, b)
        a = np.where(left, a, c)
    return 0.5 * (a + b)


def _beta_reference(a: np.ndarray, b: np.ndarray, cov: float, length: float, interval: str
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Width and fixed-length coverage of Beta(a, b) posteriors with scipy.stats.beta:
    highest density by golden-section search over the lower tail probability (widths) and
    over the window's start (coverage); equal tails by beta.ppf and bisection."""
    d = stats.beta(a, b)
    if interval == "highest_density":
        alpha = _golden(lambda t: d.ppf(t + cov) - d.ppf(t), np.zeros(a.size),
                        np.full(a.size, 1 - cov))
        width = d.ppf(alpha + cov) - d.ppf(alpha)
        start = _golden(lambda c: -(d.cdf(c + length) - d.cdf(c)), np.zeros(a.size),
                        np.full(a.size, 1 - length))
    else:
        width = d.ppf(0.5 + cov / 2) - d.ppf(0.5 - cov / 2)
        lo, hi = np.zeros(a.size), np.full(a.size, 1 - length)
        for _ in range(70):
            mid = 0.5 * (lo + hi)
            low_tail = d.cdf(mid) < d.sf(mid + length)
            lo, hi = np.where(low_tail, mid, lo), np.where(low_tail, hi, mid)
        start = 0.5 * (lo + hi)
    return width, d.cdf(start + length) - d.cdf(start)


def _check(sim, exact: dict[str, tuple[float, float]], i: int) -> None:
    for name, (value, gap) in exact.items():
        got, mcse = float(sim[name][i]), float(sim[name + "_mcse"][i])
        assert abs(got - value) <= 4 * mcse + gap + 1e-12, (name, got, value, mcse, gap)


@pytest.mark.parametrize("interval", ["highest_density", "equal_tailed"])
def test_one_proportion_simulated_quantiles_against_enumeration(interval):
    # the case: analysis prior beta(1, 1), design prior beta(30, 45); reference:
    # every outcome x = 0..n with scipy.stats.betabinom probabilities and the beta
    # intervals of _beta_reference
    model = OneProportion(BetaPrior(1, 1), design_prior=BetaPrior(30, 45))
    sizes, length, share = [60, 400], 0.1, 0.95
    sim = interval_width_curve(model, sizes, length=length, interval=interval,
                               likely_share=share, method="simulation", draws=4000, seed=7)
    for i, n in enumerate(sizes):
        x = np.arange(n + 1.0)
        weight = stats.betabinom.pmf(x, n, 30, 45)
        width, cover = _beta_reference(1 + x, 1 + n - x, 0.95, length, interval)
        _check(sim, _exact_summary(width, cover, weight, share), i)
    if interval == "highest_density":
        # the figure: exact width_q90 at n = 400 is 0.09743 (5 digits)
        assert float(sim.width_q90[1]) == pytest.approx(0.09743, abs=5e-6)


STEP = 1e-4


def _difference_reference(n_arm: int, rates: tuple[float, float], cov: float,
                          length: float, interval: str) -> tuple[np.ndarray, ...]:
    """Width and fixed-length coverage for every outcome pair (probability > 1e-9) of two
    arms with fixed rates (control, treatment), uniform analysis priors: the density of
    p_t - p_c by numerical convolution (scipy.signal.fftconvolve) of the two beta
    posterior densities (scipy.stats.beta.pdf) on a grid of step 1e-4, its distribution
    function by the trapezoid rule, quantiles by linear interpolation (measured against
    the package's quadrature: widths agree to 1e-6, 1e-5 for pairs with no responders
    in an arm, whose density jumps at 0; coverages to 3e-6)."""
    p_c, p_t = rates
    xs = np.arange(n_arm + 1)
    wt, wc = stats.binom.pmf(xs, n_arm, p_t), stats.binom.pmf(xs, n_arm, p_c)
    xt, xc = np.meshgrid(xs[wt > 1e-9], xs[wc > 1e-9], indexing="ij")
    xt, xc = xt.ravel(), xc.ravel()
    weight = stats.binom.pmf(xt, n_arm, p_t) * stats.binom.pmf(xc, n_arm, p_c)
    weight /= weight.sum()
    p = np.arange(0.0, 1.0 + STEP / 2, STEP)
    dens_t = {x: stats.beta.pdf(p, 1 + x, 1 + n_arm - x) for x in np.unique(xt)}
    dens_c = {x: stats.beta.pdf(p, 1 + x, 1 + n_arm - x)[::-1] for x in np.unique(xc)}
    d = np.arange(-p.size + 1, p.size) * STEP              # support of p_t - p_c
    levels = np.linspace(0.0, 1.0 - cov, 4001)[1:-1]
    shift = int(round(length / STEP))
    width, cover = np.empty(xt.size), np.empty(xt.size)
    for k in range(xt.size):
        f = np.clip(signal.fftconvolve(dens_t[xt[k]], dens_c[xc[k]]), 0.0, None) * STEP
        F = np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * STEP)])
        F /= F[-1]

        def q(u, F=F):
            return np.interp(u, F, d)
        mass = F[shift:] - F[:-shift]                     # windows [d, d + length]
        if interval == "equal_tailed":
            width[k] = q(0.5 + cov / 2) - q(0.5 - cov / 2)
            gap = F[:-shift] - (1 - F[shift:])             # increasing in the start
            j = int(np.searchsorted(gap, 0.0)) - 1
            theta = -gap[j] / (gap[j + 1] - gap[j])
            cover[k] = mass[j] + theta * (mass[j + 1] - mass[j])
        else:
            width[k] = np.min(q(levels + cov) - q(levels))
            cover[k] = np.max(mass)
    return width, cover, weight


@pytest.mark.parametrize("interval", ["highest_density", "equal_tailed"])
def test_two_proportions_simulated_quantiles_against_enumeration(interval):
    # fixed rates 0.30 (control) and 0.45 (treatment), uniform analysis priors, at 30 and
    # 80 per arm; reference: _difference_reference (a grid convolution written here);
    # extra floor 2e-5: the grid reference's own error (interpolation and the 4001-level
    # search; windows start on the 1e-4 grid, which costs at most ~1e-6 of coverage)
    model = TwoProportions(BetaPrior(1, 1), BetaPrior(1, 1), design_control=0.30,
                           design_treatment=0.45)
    sizes, length, share = [60, 160], 0.3, 0.95
    sim = interval_width_curve(model, sizes, length=length, interval=interval,
                               likely_share=share, draws=4000, seed=11)
    for i, n in enumerate(sizes):
        width, cover, weight = _difference_reference(n // 2, (0.30, 0.45), 0.95, length,
                                                     interval)
        exact = {k: (v, gap + 2e-5) for k, (v, gap) in
                 _exact_summary(width, cover, weight, share).items()}
        _check(sim, exact, i)
        # the means agree too (no floor beyond the reference's own error)
        mean = float(weight @ width)
        assert abs(float(sim.width_mean[i]) - mean) <= 4 * float(sim.width_mean_mcse[i]) + 2e-5


def test_modified_worst_outcome_size_matches_exact():
    # one proportion, equal tails (reference: beta.ppf over every outcome, betabinom
    # probabilities): the smallest n whose 0.95 width quantile is <= 0.1 by simulation is
    # the exact one, or a neighbour where the exact quantile at that n is within the
    # simulation's 4 Monte Carlo SEs of the target
    model = OneProportion(BetaPrior(1, 1), design_prior=BetaPrior(30, 45))
    length, share = 0.1, 0.95
    ans = solve_precision_n(model, length=length, criterion="MWOC", interval="equal_tailed",
                            method="simulation", likely_share=share, draws=4000, seed=5)

    def exact_q(n: int) -> float:
        x = np.arange(n + 1.0)
        d = stats.beta(1 + x, 1 + n - x)
        return _weighted_quantile(d.ppf(0.975) - d.ppf(0.025),
                                  stats.betabinom.pmf(x, n, 30, 45), share)

    n_exact = next(n for n in range(300, 500) if exact_q(n) <= length
                   and all(exact_q(m) <= length for m in range(n + 1, n + 6)))
    assert ans.reached
    if ans.n_total != n_exact:
        for n in range(min(ans.n_total, n_exact), max(ans.n_total, n_exact)):
            assert abs(exact_q(n) - length) <= 4 * ans.achieved_mcse + 1e-12


# ------------------------------------------------------------------------------------------
# invariants and the posterior-draw fallback
# ------------------------------------------------------------------------------------------
shape = st.floats(1.0, 400.0)


@settings(max_examples=25, deadline=None)
@given(shape, shape, shape, shape, st.sampled_from(engine.EFFECT_SCALES),
       st.floats(0.5, 0.99))
def test_shortest_is_shortest(a_t, b_t, a_c, b_c, scale, cov):
    # the highest-density interval is never longer than the equal-tailed one, and the best
    # window of its length holds its coverage (common practice: definitions)
    args = [np.array([v]) for v in (a_t, b_t, a_c, b_c)]
    hd, ok_hd = engine.effect_interval_widths(*args, scale=scale, coverage=cov,
                                              interval="highest_density")
    et, ok_et = engine.effect_interval_widths(*args, scale=scale, coverage=cov,
                                              interval="equal_tailed")
    assert ok_hd[0] and ok_et[0]
    assert hd[0] <= et[0] * (1 + 1e-9)
    best, ok = engine.effect_window_coverage(*args, scale=scale, length=float(hd[0]),
                                             interval="highest_density")
    assert ok[0] and best[0] == pytest.approx(cov, abs=1e-7)


def test_infinite_peaks_take_posterior_draws():
    # Jeffreys priors beta(1/2, 1/2): with no responders in an arm the posterior density is
    # infinite at 0 on the difference scale; with one such arm the quadrature handles it
    # (checked against quad below), with both the effect's density is not known to be
    # unimodal and the highest-density interval declines (done False) while the
    # equal-tailed one does not; the simulation then draws for those data sets only and
    # every figure stays finite
    a = np.array([0.5, 0.5, 10.5])
    b = np.array([40.5, 40.5, 30.5])
    _, ok = engine.effect_interval_widths(a, b, a[::-1], b[::-1], scale="difference",
                                          coverage=0.95, interval="highest_density")
    assert ok.tolist() == [True, False, True]
    _, ok = engine.effect_interval_widths(a, b, a[::-1], b[::-1], scale="difference",
                                          coverage=0.95, interval="equal_tailed")
    assert ok.all()
    model = TwoProportions(BetaPrior(0.5, 0.5), BetaPrior(0.5, 0.5), design_control=0.02,
                           design_treatment=0.04)
    ds = interval_width_curve(model, [80], length=0.1, draws=300, posterior_draws=1000,
                              seed=3)
    assert all(np.isfinite(ds[v].values).all() for v in ds.data_vars)


@pytest.mark.parametrize("arms, scale", [
    ((0.5, 40.5, 10.5, 30.5), "difference"),      # no responders, Jeffreys prior
    ((0.5, 200.5, 3.5, 198.5), "difference"),
    ((0.3, 20.3, 39.5, 1.5), "difference"),       # peaks at both ends of D's range
    ((40.5, 0.5, 30.5, 10.5), "log_risk_ratio"),  # all responders: b = 1/2
])
@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")
def test_infinite_peaks_against_quadrature(arms, scale):
    # tolerances: 1e-8 in probability (both sides integrate to ~1e-11); the density ratio at
    # the ends to 1e-5 (where Newton cannot finish, a golden-section search over the tail
    # split locates the ends to ~1e-7 in density, a second-order error in the width; quad
    # reports round-off on the density next to an infinite peak)
    args = [np.array([v]) for v in arms]
    _, ok, lo, hi = engine._effect_intervals(*args, scale, 0.95, "highest_density")
    assert ok[0]
    F_lo, f_lo = _ref_cdf_pdf(lo[0], *arms, scale)
    F_hi, f_hi = _ref_cdf_pdf(hi[0], *arms, scale)
    assert F_hi - F_lo == pytest.approx(0.95, abs=1e-8)
    assert f_hi / f_lo == pytest.approx(1.0, abs=1e-5)
    _, ok, lo, hi = engine._effect_intervals(*args, scale, 0.95, "equal_tailed")
    assert ok[0]
    assert _ref_cdf_pdf(lo[0], *arms, scale)[0] == pytest.approx(0.025, abs=1e-8)
    assert _ref_cdf_pdf(hi[0], *arms, scale)[0] == pytest.approx(0.975, abs=1e-8)
