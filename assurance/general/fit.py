"""One fit per simulated trial: a Laplace (normal) approximation at the posterior mode, or NUTS.

A :class:`CompiledModel` builds the PyMC analysis model once for one pair of arm sizes and
compiles, on the unconstrained (transformed) parameters joined into one vector, a single
function returning the log posterior density, its gradient and Hessian, the effect and the
effect's gradient. Each simulated trial swaps its data into the model's ``pm.Data``
containers (no recompilation) and finds the posterior mode by damped Newton steps.
PyMC and pytensor are imported here only, when a model is compiled.
"""

from __future__ import annotations

import contextlib
import logging
import math
from collections.abc import Iterator, Mapping
from typing import Any

import numpy as np

from ..errors import AssuranceInputError
from .model import GeneralModel

__all__ = ["CompiledModel", "LaplaceFit", "hdi_width"]

#: Newton steps before a fit counts as not converged.
MAX_STEPS = 100
#: Converged when the Newton decrement g' (-H)^-1 g (the expected rise in log density to the
#: mode) is below this.
TOLERANCE = 1e-10


class LaplaceFit(tuple):
    """``(mean, sd, converged)`` of the effect from one Laplace fit."""

    __slots__ = ()

    def __new__(cls, mean: float, sd: float, converged: bool) -> LaplaceFit:
        return super().__new__(cls, (mean, sd, converged))


@contextlib.contextmanager
def _quiet_pymc() -> Iterator[None]:
    """PyMC's sampling chatter off: its log lines, and the numeric warnings of early tuning
    (an overflow in the kinetic energy while the step size is still far too large is
    rejected by the sampler itself); in worker processes they would reach the terminal raw,
    source line and all. Divergences are not hidden from the results: NUTS decisions are
    compared with the fast fit trial by trial."""
    import warnings

    logger = logging.getLogger("pymc")
    level = logger.level
    logger.setLevel(logging.ERROR)
    try:
        with warnings.catch_warnings(), np.errstate(over="ignore", invalid="ignore"):
            warnings.simplefilter("ignore", RuntimeWarning)
            yield
    finally:
        logger.setLevel(level)


class CompiledModel:
    """The analysis model for one pair of arm sizes, compiled once; data swapped per trial.

    Parameters
    ----------
    model
        The :class:`~assurance.general.GeneralModel`.
    data
        A first data set (from the model's simulator at these sizes): the model is built on
        it.

    Notes
    -----
    The Laplace approximation (Tierney & Kadane 1986): with ``theta`` the unconstrained
    parameters, ``theta*`` the mode of ``log p(theta | y)`` (Jacobians of the transforms
    included) and ``H`` its Hessian there, ``theta | y ~ N(theta*, (-H)^-1)``; the effect
    ``g(theta)`` is approximately ``N(g(theta*), grad g' (-H)^-1 grad g)`` (the delta method).

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.general import GeneralModel
    >>> from assurance.priors import Normal
    >>> def simulate(rng, n_t, n_c, truth):
    ...     return {"y": rng.normal(truth["effect"], 1.0, n_t + n_c)}
    >>> def build(data):
    ...     import pymc as pm
    ...     with pm.Model() as model:
    ...         y = pm.Data("y", data["y"])
    ...         effect = pm.Normal("effect", 0.0, 100.0)
    ...         pm.Normal("obs", effect, 1.0, observed=y)
    ...     return model
    >>> model = GeneralModel("invented: one mean", simulate, build,
    ...                      design_prior={"effect": Normal(0.3, 0.1)}, assumed={"effect": 0.3})
    >>> data = {"y": np.array([0.5, 1.5, 1.0, 1.0])}
    >>> mean, sd, converged = CompiledModel(model, data).laplace(data)
    >>> round(mean, 3), round(sd, 3), converged  # about the sample mean and 1 / sqrt(4)
    (1.0, 0.5, True)
    """

    def __init__(self, model: GeneralModel, data: Mapping[str, np.ndarray]) -> None:
        import pymc as pm
        import pytensor
        import pytensor.tensor as pt
        from pymc.pytensorf import join_nonshared_inputs

        self.model = model
        with _quiet_pymc():
            built = model.build(dict(data))
        if not isinstance(built, pm.Model):
            raise AssuranceInputError(
                f"The 'build' function of GeneralModel {model.name!r} must return a pm.Model. "
                f"Got {type(built).__name__} instead.")
        self.pm_model = built
        names = set(built.named_vars)
        missing = [k for k in data if k not in names]
        if missing:
            raise AssuranceInputError(
                f"The analysis model of {model.name!r} has no pm.Data container named "
                f"{missing!r}; the simulator returns {sorted(data)!r}.")
        if model.effect not in names:
            raise AssuranceInputError(
                f"The analysis model of {model.name!r} has no variable named "
                f"{model.effect!r} (the 'effect' parameter of GeneralModel).")
        from pytensor.compile.sharedvalue import SharedVariable

        not_data = [k for k in data if not isinstance(built[k], SharedVariable)]
        if not_data:
            raise AssuranceInputError(
                f"The simulator of {model.name!r} returns {not_data!r}, which the analysis "
                "model does not hold as pm.Data containers; name each data array as its "
                "pm.Data container.")
        self._shared = {k: built[k] for k in data}
        effect_var = built[model.effect]
        self._graph = _graph(built, model.effect, data)
        point = built.initial_point()
        value_vars = built.value_vars
        effect_expr = built.replace_rvs_by_values([effect_var])[0]
        [logp, effect], flat = join_nonshared_inputs(
            point, [built.logp(), effect_expr], value_vars)
        if effect.ndim != 0:
            raise AssuranceInputError(
                f"The effect variable {model.effect!r} of {model.name!r} must be a scalar.")
        grad = pt.grad(logp, flat)
        hess = pytensor.gradient.jacobian(grad, flat, vectorize=True)
        effect_grad = pt.grad(effect, flat, disconnected_inputs="ignore")
        self._full = pytensor.function([flat], [logp, grad, hess, effect, effect_grad],
                                       on_unused_input="ignore")
        self._full.trust_input = True
        self.start = np.concatenate(
            [np.ravel(point[v.name]) for v in value_vars]).astype(flat.dtype)
        self._warm: np.ndarray | None = None
        self._step: Any = None

    def serves(self, data: Mapping[str, np.ndarray]) -> bool:
        """Whether this compiled model also fits ``data`` of another size.

        The model is built on ``data`` (cheap) and its log density and effect are compared,
        node by node, with those compiled here (``pytensor.graph.basic.equal_computations``,
        data containers and parameters matched by name). They are equal when the builder
        does not write the trial size into the model (``pm.Data`` shapes stay open); then
        the compiled functions are reused with the new data, giving the same numbers as a
        fresh compilation.
        """
        from pytensor.graph.basic import equal_computations

        if set(data) != set(self._shared):
            return False
        with _quiet_pymc():
            built = self.model.build(dict(data))
        try:
            outs, ins = _graph(built, self.model.effect, data)
        except Exception:
            return False
        mine_outs, mine_ins = self._graph
        if len(ins) != len(mine_ins):
            return False
        return bool(equal_computations(outs, mine_outs, in_xs=ins, in_ys=mine_ins))

    # -- data ------------------------------------------------------------------------------
    def set_data(self, data: Mapping[str, np.ndarray]) -> None:
        """Swap one trial's data into the model's ``pm.Data`` containers (in place)."""
        shared = self._shared
        if data.keys() != shared.keys():
            raise AssuranceInputError(
                f"The simulator of {self.model.name!r} returned data named "
                f"{sorted(data)!r}; the analysis model holds {sorted(shared)!r}.")
        for name, value in data.items():
            var = shared[name]
            array = np.asarray(value, dtype=var.type.dtype)
            if array.ndim != var.type.ndim:
                raise AssuranceInputError(
                    f"The simulator of {self.model.name!r} returned {name!r} with "
                    f"{array.ndim} dimension(s); its pm.Data container has {var.type.ndim}.")
            var.set_value(array, borrow=True)

    def reset_start(self) -> None:
        """Start the next Laplace fit at the model's initial point (not the last mode)."""
        self._warm = None

    # -- Laplace -----------------------------------------------------------------------------
    def laplace(self, data: Mapping[str, np.ndarray] | None = None) -> LaplaceFit:
        """Posterior mode and curvature: the effect's approximate posterior mean and SD.

        Starts from the previous fit's mode (when it converged) or the initial point, and
        takes Newton steps with the compiled Hessian, halved until the log density rises
        and damped (Levenberg) where the Hessian is not negative definite.

        Returns
        -------
        LaplaceFit
            ``(mean, sd, converged)``; ``converged`` is False when no mode was found within
            :data:`MAX_STEPS` steps (the last point's values are returned).
        """
        if data is not None:
            self.set_data(data)
        first = self.start if self._warm is None else self._warm
        fit = self._newton(first.copy())
        if not fit[2] and self._warm is not None:
            fit = self._newton(self.start.copy())
        return fit

    def _newton(self, x: np.ndarray) -> LaplaceFit:
        full = self._guarded
        lp, g, h, eff, ge = full(x)
        if not math.isfinite(lp):
            return LaplaceFit(math.nan, math.nan, False)
        from scipy.linalg.lapack import dpotrf

        eye = np.eye(x.size)
        for _ in range(MAX_STEPS):
            if not (np.isfinite(h).all() and np.isfinite(g).all()):
                return LaplaceFit(float(eff), math.nan, False)
            a = -h
            lam = 0.0
            while True:  # Cholesky of -H (+ lam I until positive definite)
                chol, info = dpotrf(a + lam * eye if lam else a, lower=1, clean=0)
                if info == 0:
                    break
                lam = 10.0 * lam if lam else 1e-6 * max(1.0, float(np.abs(a).max()))
                if lam > 1e12 or not math.isfinite(lam):
                    return LaplaceFit(float(eff), math.nan, False)
            step = _cho_solve(chol, g)
            dec = float(g @ step)
            if lam == 0.0 and dec < TOLERANCE:
                var = float(ge @ _cho_solve(chol, ge))
                self._warm = x
                return LaplaceFit(float(eff), math.sqrt(max(var, 0.0)), True)
            t = 1.0
            for _ in range(40):
                x_new = x + t * step
                lp_new, g_new, h_new, eff_new, ge_new = full(x_new)
                if math.isfinite(lp_new) and lp_new >= lp + 1e-4 * t * dec - 1e-12 * abs(lp):
                    break
                t *= 0.5
            else:
                return LaplaceFit(float(eff), math.nan, False)
            x, lp, g, h, eff, ge = x_new, lp_new, g_new, h_new, eff_new, ge_new
        return LaplaceFit(float(eff), math.nan, False)

    def _guarded(self, x: np.ndarray) -> tuple[Any, ...]:
        """The compiled log density and its derivatives, with a point outside the model's
        support (a scale that underflows to 0 on a long step, say) read as log density
        minus infinity, so the line search steps back instead of failing the trial."""
        try:
            return self._full(x)
        except (ValueError, FloatingPointError, ArithmeticError):  # pymc ParameterValueError
            nan = np.full(x.size, math.nan)
            return -math.inf, nan, np.full((x.size, x.size), math.nan), math.nan, nan

    # -- NUTS --------------------------------------------------------------------------------
    def nuts(self, data: Mapping[str, np.ndarray] | None = None, *, draws: int = 500,
             tune: int = 500, chains: int = 2, seed: int = 0) -> np.ndarray:
        """Posterior draws of the effect by NUTS (PyMC), all chains joined.

        The NUTS step is built once per compiled model; its step size and mass matrix are
        reset before each trial, so a trial's draws depend on its data and seed only.
        """
        import pymc as pm

        if data is not None:
            self.set_data(data)
        with _quiet_pymc(), self.pm_model:
            if self._step is None:
                self._step = pm.NUTS()
            self._step.reset_tuning()
            trace = pm.sample(draws=draws, tune=tune, chains=chains, cores=1, step=self._step,
                              random_seed=int(seed), progressbar=False,
                              compute_convergence_checks=False, return_inferencedata=False)
        return np.asarray(trace.get_values(self.model.effect, combine=True), dtype=float)


def _graph(built: Any, effect: str, names: Any) -> tuple[list, list]:
    """The log density and the effect of a PyMC model, and its inputs in a fixed order: the
    value variables, then the simulated data containers by name (any other container stays
    unmatched, so a model holding one never counts as the same across sizes)."""
    outs = [built.logp(), built.replace_rvs_by_values([built[effect]])[0]]
    return outs, list(built.value_vars) + [built[k] for k in sorted(names)]


def _cho_solve(chol: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``(L L') x = b`` for the lower Cholesky factor ``L`` (LAPACK dpotrs)."""
    from scipy.linalg.lapack import dpotrs

    return dpotrs(chol, b, lower=1)[0]


def hdi_width(draws: np.ndarray, coverage: float) -> float:
    """Width of the highest-density interval of posterior draws (``arviz.hdi``).

    Examples
    --------
    >>> round(hdi_width(np.linspace(0.0, 1.0, 1001), 0.5), 2)
    0.5
    """
    import arviz as az

    low, high = az.hdi(np.asarray(draws, dtype=float), hdi_prob=coverage)
    return float(high - low)


def interval_width(draws: np.ndarray, coverage: float) -> float:
    """Width of the equal-tailed interval of posterior draws (their quantiles).

    Examples
    --------
    >>> round(interval_width(np.linspace(0.0, 1.0, 1001), 0.5), 2)
    0.5
    """
    low, high = np.quantile(np.asarray(draws, dtype=float), [(1 - coverage) / 2,
                                                             (1 + coverage) / 2])
    return float(high - low)


def length_coverage(draws: np.ndarray, length: float) -> float:
    """The largest share of posterior draws an interval of the given length holds (the
    posterior probability of the best interval of that length, by the draws).

    Examples
    --------
    >>> length_coverage(np.linspace(0.0, 1.0, 101), 0.5)  # 51 of the 101 points
    0.504950495049505
    """
    d = np.sort(np.asarray(draws, dtype=float))
    inside = np.searchsorted(d, d + length, side="right") - np.arange(d.size)
    return float(inside.max() / d.size)
