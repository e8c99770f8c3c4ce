"""The planning run for a general model: prior-predictive assurance and interval widths by
simulation over trial sizes.

At each size, trials are simulated in fixed chunks (``chunk`` trials per task), each with its
own seed streams, so the numbers depend neither on how many workers run the tasks nor on
which other sizes are in the grid. The true values come from
``SeedSequence(seed, spawn_key=(TRUTHS, scenario, chunk index))``, the same at every size
(common random numbers: the k-th trial of every size sees the same truth, so the curves over
sizes are smooth and the size reaching a target is steady); the data and the NUTS seeds come
from ``SeedSequence(seed, spawn_key=(n, scenario, chunk index))``.
Every trial: draw the truth (from the design prior, or fixed at the assumed values for
classical power), simulate the data, fit the analysis model by the Laplace approximation
(NUTS on a random subset, or on every trial when asked), apply the rule, record the
posterior interval's width. Finished sizes can be kept in a folder and a new run with the
same settings reads them instead of recomputing.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import sys
import tempfile
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
from scipy import special

from .._validation import check_choice, check_int, check_real
from ..errors import AssuranceInputError, AssuranceWarning
from .decide import check_rule, decides
from .model import GeneralModel

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

__all__ = ["ChunkSpec", "ChunkResult", "run_chunk", "simulate_general", "solve_general_n",
           "GeneralSizeAnswer"]

_OWNER = "simulate_general"
_SCENARIOS = ("prior", "assumed")
#: Agreement of Laplace and NUTS (in Monte Carlo SE of their paired difference) beyond which
#: a run warns.
AGREEMENT_LIMIT = 3.0
#: Version of the stored-result layout (part of the fingerprint).
_STORE_VERSION = 2  # 2: the truths are common to every size (stores of 1 are refused)

#: the first spawn-key word of the truth streams (no size is this large)
TRUTHS = 2**32 - 1


@dataclass(frozen=True)
class ChunkSpec:
    """One task: ``trials`` simulated trials of one size and scenario, with their own seed.

    Picklable when the model's functions are module-level functions.
    """

    model: GeneralModel
    rule: Any
    n_total: int
    trials: int
    seed: tuple  # (entropy, spawn key)
    scenario: Literal["prior", "assumed"] = "prior"
    nuts: int = 0
    coverage: float = 0.95
    nuts_every: bool = False
    nuts_draws: int = 500
    nuts_tune: int = 500
    nuts_chains: int = 2
    length: float | None = None
    interval: str = "highest_density"


@dataclass(frozen=True)
class ChunkResult:
    """Per-trial results of one chunk (arrays of length ``trials``; NUTS ones of length
    ``nuts``, for the chunk's first ``nuts`` trials)."""

    n_total: int
    scenario: str
    success: np.ndarray          # the reported decision (NUTS when on every trial)
    width: np.ndarray            # the reported interval width
    laplace_success: np.ndarray
    laplace_mean: np.ndarray
    laplace_sd: np.ndarray
    laplace_width: np.ndarray
    truth_effect: np.ndarray
    converged: np.ndarray
    nuts_success: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    nuts_width: np.ndarray = field(default_factory=lambda: np.zeros(0))
    nuts_mean: np.ndarray = field(default_factory=lambda: np.zeros(0))
    nuts_sd: np.ndarray = field(default_factory=lambda: np.zeros(0))
    laplace_on_nuts: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    #: posterior probability of the best interval of the target length (NaN without one)
    coverage_at_length: np.ndarray = field(default_factory=lambda: np.zeros(0))

    def arrays(self) -> dict[str, np.ndarray]:
        return {k: getattr(self, k) for k in _ARRAYS}


_ARRAYS = ("success", "width", "laplace_success", "laplace_mean", "laplace_sd",
           "laplace_width", "truth_effect", "converged", "nuts_success", "nuts_width",
           "nuts_mean", "nuts_sd", "laplace_on_nuts", "coverage_at_length")

#: Compiled models of this process, by (model, arm sizes). A model compiles once per size
#: per worker at most, and once in all when its graph does not depend on the size.
_COMPILED: dict[tuple, Any] = {}


def _compiled(model: GeneralModel, n_t: int, n_c: int, data: dict) -> Any:
    from .fit import CompiledModel

    family = (model.name, repr(model.build))
    key = (*family, n_t, n_c)
    found = _COMPILED.get(key)
    if found is None:
        seen = {id(v): v for k, v in _COMPILED.items() if k[:2] == family}
        for other in seen.values():
            if other.serves(data):
                found = other
                break
        else:
            found = CompiledModel(model, data)
        _COMPILED[key] = found
    return found


def run_chunk(spec: ChunkSpec) -> ChunkResult:
    """Simulate and fit one chunk of trials (the task function of :func:`simulate_general`).

    For ``spec.seed = (entropy, key)`` with ``key = (n, scenario, chunk)``, the data and the
    NUTS seeds come from ``SeedSequence(entropy, spawn_key=key)``; the truths from
    ``SeedSequence(entropy, spawn_key=(TRUTHS, scenario, chunk))``, the same at every size.
    The Laplace fits start from the model's initial point at the chunk's first trial, so a
    chunk's numbers do not depend on what the worker ran before. See
    :func:`simulate_general` for an example.
    """
    from .fit import hdi_width, interval_width, length_coverage

    model = spec.model
    entropy, key = spec.seed
    _, data_ss, nuts_ss = np.random.SeedSequence(entropy, spawn_key=tuple(key)).spawn(3)
    # the same truths at every size: the size's place in the key is replaced
    truth_ss = np.random.SeedSequence(entropy, spawn_key=(TRUTHS, *tuple(key)[1:]))
    truth_rng = np.random.default_rng(truth_ss)
    data_rng = np.random.default_rng(data_ss)
    nuts_seeds = np.random.default_rng(nuts_ss).integers(0, 2**31 - 1, size=spec.trials)
    names = sorted(model.design_prior)
    if spec.scenario == "prior":
        truths = {k: np.asarray(model.design_prior[k].sample(spec.trials, truth_rng), float)
                  for k in names}
    else:
        truths = {k: np.full(spec.trials, float(model.assumed[k])) for k in names}
    n_t, n_c = model.arm_sizes(spec.n_total)
    z = float(special.ndtri(0.5 + spec.coverage / 2))
    mean = np.full(spec.trials, np.nan)
    sd = np.full(spec.trials, np.nan)
    ok = np.zeros(spec.trials, bool)
    nuts_draws: list[np.ndarray] = []
    compiled = None
    for i in range(spec.trials):
        truth = {k: float(truths[k][i]) for k in names}
        data = model.simulate(data_rng, n_t, n_c, truth)
        if not isinstance(data, dict):
            raise AssuranceInputError(
                f"The 'simulate' function of GeneralModel {model.name!r} must return a dict "
                f"of arrays. Got {type(data).__name__} instead.")
        if compiled is None:
            compiled = _compiled(model, n_t, n_c, data)
            compiled.reset_start()
        compiled.set_data(data)
        mean[i], sd[i], ok[i] = compiled.laplace()
        if i < spec.nuts:
            nuts_draws.append(compiled.nuts(draws=spec.nuts_draws, tune=spec.nuts_tune,
                                            chains=spec.nuts_chains, seed=int(nuts_seeds[i])))
    lap_success = decides(spec.rule, model.better, mean, sd)
    lap_width = 2.0 * z * sd
    if nuts_draws:
        draws = np.vstack(nuts_draws)
        n_mean, n_sd = draws.mean(axis=1), draws.std(axis=1, ddof=1)
        n_success = decides(spec.rule, model.better, n_mean, n_sd, draws=draws)
        n_width = (np.array([hdi_width(d, spec.coverage) for d in draws])
                   if spec.interval == "highest_density"
                   else np.array([interval_width(d, spec.coverage) for d in draws]))
    else:
        n_mean = n_sd = n_width = np.zeros(0)
        n_success = np.zeros(0, bool)
    if spec.nuts_every:
        success, width = n_success, n_width
    else:
        success, width = lap_success, lap_width
    if spec.length is None:
        covered = np.full(spec.trials, np.nan)
    elif spec.nuts_every:
        covered = np.array([length_coverage(d, spec.length) for d in draws])
    else:  # a normal posterior: the best interval of a given length is centred on the mean
        covered = 2.0 * special.ndtr(spec.length / (2.0 * sd)) - 1.0
    return ChunkResult(spec.n_total, spec.scenario, success, width, lap_success, mean, sd,
                       lap_width, truths["effect"], ok, n_success, n_width, n_mean, n_sd,
                       lap_success[:n_success.size], covered)


def _map_in_process(func: Callable, specs: Sequence, executor: Any = None, *,
                    progress: bool = False, label: str = "trials",
                    on_result: Callable | None = None) -> list:
    """Fallback when :mod:`assurance.general.distribute` is not available: a plain loop."""
    if executor is not None:
        raise AssuranceInputError(
            f"The 'executor' parameter of {_OWNER} must be None here: spreading the work "
            f"needs assurance.general.distribute. Got {executor!r} instead.")
    out = []
    for i, spec in enumerate(specs):
        result = func(spec)
        if on_result is not None:
            on_result(i, result)
        out.append(result)
    return out


def _mapper() -> Callable:
    try:
        from .distribute import map_chunks
    except ImportError:  # pragma: no cover - the distribute module is part of the package
        return _map_in_process
    return map_chunks


# -- stored results -----------------------------------------------------------------------------
def _fingerprint(settings: dict) -> str:
    text = json.dumps(settings, sort_keys=True, default=repr)
    return hashlib.sha256(text.encode()).hexdigest()


def _open_store(store: str | os.PathLike, settings: dict, fingerprint: str) -> Path:
    folder = Path(store)
    if folder.exists() and not folder.is_dir():
        raise AssuranceInputError(
            f"The 'store' parameter of {_OWNER} must be a folder. Got {str(folder)!r}, "
            "which is a file.")
    folder.mkdir(parents=True, exist_ok=True)
    marker = folder / "fingerprint.json"
    if marker.exists():
        try:
            found = json.loads(marker.read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise AssuranceInputError(
                f"The 'store' folder {str(folder)!r} of {_OWNER} has an unreadable "
                f"fingerprint.json ({exc}); use another folder.") from exc
        finished = [p for p in folder.iterdir() if p.name != marker.name]
        if found.get("fingerprint") != fingerprint and not finished:
            # nothing was finished under the other settings: nothing to keep
            _atomic_write(marker, json.dumps({"fingerprint": fingerprint, "settings": settings},
                                             sort_keys=True, indent=1, default=repr).encode())
        elif found.get("fingerprint") != fingerprint:
            old = found.get("settings", {})
            changed = sorted(k for k in set(old) | set(settings)
                             if json.dumps(old.get(k), sort_keys=True, default=repr)
                             != json.dumps(settings.get(k), sort_keys=True, default=repr))
            raise AssuranceInputError(
                f"The folder {str(folder)!r} keeps the finished sizes of an earlier run with "
                f"other settings (different: {', '.join(changed) or 'layout'}); they are kept. "
                "Run with those settings to resume it, or delete the folder to start again.")
    else:
        _atomic_write(marker, json.dumps({"fingerprint": fingerprint, "settings": settings},
                                         sort_keys=True, indent=1, default=repr).encode())
    return folder


def _atomic_write(path: Path, payload: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=path.suffix)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(payload)
        os.replace(tmp, path)
    except BaseException:
        with _suppress():
            os.unlink(tmp)
        raise


class _suppress:
    def __enter__(self) -> None:
        return None

    def __exit__(self, *exc: Any) -> bool:
        return True


def _group_file(folder: Path, n: int, scenario: str) -> Path:
    return folder / f"n{n}_{scenario}.npz"


def _save_group(folder: Path, n: int, scenario: str, arrays: dict, fingerprint: str) -> None:
    import io

    buffer = io.BytesIO()
    np.savez(buffer, fingerprint=np.array(fingerprint), **arrays)
    _atomic_write(_group_file(folder, n, scenario), buffer.getvalue())


def _load_group(folder: Path, n: int, scenario: str, fingerprint: str) -> dict | None:
    path = _group_file(folder, n, scenario)
    if not path.exists():
        return None
    with np.load(path, allow_pickle=False) as stored:
        if str(stored["fingerprint"]) != fingerprint:
            raise AssuranceInputError(
                f"The stored result {str(path)!r} of {_OWNER} was made with other settings; "
                "use another 'store' folder.")
        return {k: stored[k] for k in _ARRAYS if k in stored}  # older stores: fewer arrays


def _join(results: list[ChunkResult]) -> dict[str, np.ndarray]:
    return {k: np.concatenate([getattr(r, k) for r in results]) for k in _ARRAYS}


# -- the run ------------------------------------------------------------------------------------
def simulate_general(
    model: GeneralModel,
    sizes: Sequence[int],
    *,
    rule: Any,
    trials: int = 1000,
    seed: int = 0,
    nuts_check: int = 20,
    nuts_every: bool = False,
    coverage: float = 0.95,
    power: bool = True,
    chunk: int = 50,
    store: str | os.PathLike | None = None,
    executor: Any = None,
    progress: bool = True,
    nuts_draws: int = 500,
    nuts_tune: int = 500,
    length: float | None = None,
    interval: Literal["highest_density", "equal_tailed"] = "highest_density",
    likely_share: float = 0.95,
) -> xr.Dataset:
    """Assurance, classical power and posterior interval widths of a general model by
    simulation, at each total size.

    Parameters
    ----------
    model
        The :class:`~assurance.general.GeneralModel`.
    sizes
        Total sample sizes (each at least ``model.smallest_total``).
    rule
        The success rule on the effect's natural scale: ``PosteriorProbability``,
        ``Significance``, ``MinimumEstimate``, or ``AllOf`` / ``AnyOf`` of these.
    trials
        Simulated trials per size (and per scenario).
    seed
        The seed: the same seed gives the same numbers, whatever the executor.
    nuts_check
        Trials per size also fitted by NUTS, to check the Laplace approximation.
    nuts_every
        Fit every trial by NUTS (slow); the reported numbers are then NUTS's.
    coverage
        Probability of the posterior interval whose width is reported.
    power
        Also simulate at the assumed values (classical power).
    chunk
        Trials per task. Part of the seed layout: changing it changes the numbers.
    store
        A folder keeping finished sizes; a new run with the same settings reads them, and
        one with other settings is refused. The model's functions are recognised by module
        and name (a callable object by its ``repr``): after changing a function's body or
        the values a closure captures, use a new folder.
    executor
        Where the tasks run: None (this process), ``"processes"`` or a number of local
        worker processes, a Dask scheduler address or client.
    progress
        Show a progress bar over tasks when standard error is a terminal.
    nuts_draws, nuts_tune
        Draws kept and tuning steps per chain (two chains) for NUTS.
    length
        A target width of the posterior interval (precision planning): adds the average
        posterior probability of the best interval of this length (``coverage_mean``, the
        average coverage criterion) and the width reached by the ``likely_share`` most
        favourable trials (``width_worst_likely``, the simulated form of the modified worst
        outcome criterion).
    interval
        The kind of interval whose width is reported: ``"highest_density"`` or
        ``"equal_tailed"`` (the same for the normal approximation; they differ for NUTS).
    likely_share
        The share of trials within which ``width_worst_likely`` is the widest (with a
        length only).

    Returns
    -------
    xarray.Dataset
        On ``n`` (with ``n_treatment`` and ``n_control``): ``assurance``,
        ``assurance_mcse``, ``power``, ``power_mcse``, ``width_mean``,
        ``width_mean_mcse``, ``width_median``, ``width_q90``, ``nuts_assurance_subset``,
        ``laplace_assurance_subset``, ``nuts_agreement``, ``nuts_trials``,
        ``not_converged``; with a ``length`` also ``coverage_mean``,
        ``coverage_mean_mcse`` and ``width_worst_likely``; attributes name the model, rule
        and method.

    Warns
    -----
    AssuranceWarning
        When NUTS and the Laplace approximation disagree by more than 3 Monte Carlo SE at
        some size, or when some Laplace fits did not converge.

    Notes
    -----
    Assurance (O'Hagan, Stevens & Campbell 2005) is estimated by the share of successes
    among trials whose truth is drawn from the design prior, with Monte Carlo SE
    ``sqrt(p (1 - p) / trials)``. The NUTS check is paired: on the same trials,
    ``d_i = success_NUTS - success_Laplace``, reported as ``mean(d) / (sd(d) / sqrt(k))``
    (0 when every pair agrees). Widths: ``2 z_{(1 + coverage)/2} sd`` for the normal
    approximation, the highest-density interval (``arviz.hdi``) of the draws for NUTS; their
    mean, median and 90% quantile over the prior predictive are the average-length,
    median and (nearly) worst-outcome precision criteria.

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal
    >>> from assurance.rules.posterior import PosteriorProbability
    >>> def simulate(rng, n_t, n_c, truth):  # invented: a change from baseline, SD 1
    ...     treated = np.r_[np.ones(n_t), np.zeros(n_c)]
    ...     return {"y": rng.normal(truth["effect"] * treated, 1.0), "treated": treated}
    >>> def build(data):
    ...     import pymc as pm
    ...     with pm.Model() as model:
    ...         y, treated = pm.Data("y", data["y"]), pm.Data("treated", data["treated"])
    ...         mu, effect = pm.Normal("mu", 0, 100), pm.Normal("effect", 0, 100)
    ...         pm.Normal("obs", mu + effect * treated, 1.0, observed=y)
    ...     return model
    >>> model = GeneralModel("invented: change from baseline", simulate, build,
    ...                      design_prior={"effect": Normal(0.5, 0.2)}, assumed={"effect": 0.5})
    >>> ds = simulate_general(model, [40, 80], rule=PosteriorProbability(0.975), trials=100,
    ...                       nuts_check=0, progress=False)
    >>> bool(ds.assurance[1] > ds.assurance[0]), ds.assurance.dims
    (True, ('n',))
    """
    if not isinstance(model, GeneralModel):
        raise AssuranceInputError(
            f"The 'model' parameter of {_OWNER} must be a GeneralModel. Got {model!r:.80} "
            "instead.")
    rule = check_rule(rule)
    trials = check_int(trials, "trials", _OWNER, low=1, high=10_000_000)
    seed = check_int(seed, "seed", _OWNER, low=0)
    nuts_check = check_int(nuts_check, "nuts_check", _OWNER, low=0)
    coverage = check_real(coverage, "coverage", _OWNER, low=0, high=1, low_open=True,
                          high_open=True)
    chunk = check_int(chunk, "chunk", _OWNER, low=1)
    nuts_draws = check_int(nuts_draws, "nuts_draws", _OWNER, low=10)
    nuts_tune = check_int(nuts_tune, "nuts_tune", _OWNER, low=0)
    if not isinstance(nuts_every, bool):
        raise AssuranceInputError(
            f"The 'nuts_every' parameter of {_OWNER} must be True or False. "
            f"Got {nuts_every!r} instead.")
    if length is not None:
        length = check_real(length, "length", _OWNER, low=0, low_open=True)
    interval = check_choice(interval, "interval", _OWNER, ["highest_density", "equal_tailed"])
    likely_share = check_real(likely_share, "likely_share", _OWNER, low=0, high=1,
                              low_open=True, high_open=True)
    if isinstance(sizes, int | np.integer):
        sizes = [sizes]
    grid = sorted({check_int(n, "sizes", _OWNER, low=model.smallest_total) for n in sizes})
    if not grid:
        raise AssuranceInputError(
            f"The 'sizes' parameter of {_OWNER} must hold at least one size. Got none.")
    scenarios = _SCENARIOS if power else _SCENARIOS[:1]
    settings = {
        "store_version": _STORE_VERSION, "model": model.fingerprint_fields(),
        "rule": _rule_text(rule), "trials": trials, "seed": seed, "chunk": chunk,
        "coverage": coverage, "nuts_check": nuts_check, "nuts_every": nuts_every,
        "nuts_draws": nuts_draws, "nuts_tune": nuts_tune,
    }
    # only when asked for, so that stores written without them stay readable
    if length is not None:
        settings["length"] = length
    if interval != "highest_density" and nuts_check + nuts_every:
        settings["interval"] = interval
    if length is not None:
        settings["likely_share"] = likely_share
    fingerprint = _fingerprint(settings)
    folder = None if store is None else _open_store(store, settings, fingerprint)

    groups: dict[tuple[int, str], dict] = {}
    if folder is not None:
        for n in grid:
            for scenario in scenarios:
                found = _load_group(folder, n, scenario, fingerprint)
                if found is not None:
                    groups[(n, scenario)] = found
    specs: list[ChunkSpec] = []
    owner: list[tuple[int, str]] = []
    n_chunks = math.ceil(trials / chunk)
    for n in grid:
        for s_index, scenario in enumerate(scenarios):
            if (n, scenario) in groups:
                continue
            for c in range(n_chunks):
                size = min(chunk, trials - c * chunk)
                if nuts_every:
                    k = size
                elif scenario == "prior":
                    k = min(size, nuts_check // n_chunks + (c < nuts_check % n_chunks))
                else:
                    k = 0
                specs.append(ChunkSpec(
                    model, rule, n, size, (seed, (n, s_index, c)), scenario, k, coverage,
                    nuts_every, nuts_draws, nuts_tune, length=length, interval=interval))
                owner.append((n, scenario))

    pending: dict[tuple[int, str], dict[int, ChunkResult]] = {}

    def on_result(index: int, result: ChunkResult) -> None:
        group = owner[index]
        done = pending.setdefault(group, {})
        done[index] = result
        if len(done) == n_chunks:
            joined = _join([done[i] for i in sorted(done)])
            groups[group] = joined
            del pending[group]
            if folder is not None:
                _save_group(folder, group[0], group[1], joined, fingerprint)

    if specs:
        show = bool(progress) and sys.stderr.isatty()
        _mapper()(run_chunk, specs, executor, progress=show, label="simulated trial chunks",
                  on_result=on_result)
    return _dataset(model, rule, grid, groups, scenarios, settings)


def _rule_text(rule: Any) -> Any:
    return rule.to_dict() if hasattr(rule, "to_dict") else repr(rule)


def _dataset(model: GeneralModel, rule: Any, grid: list[int], groups: dict,
             scenarios: Sequence[str], settings: dict) -> xr.Dataset:
    import xarray as xr

    trials = settings["trials"]
    rows: dict[str, list[float]] = {k: [] for k in (
        "assurance", "assurance_mcse", "power", "power_mcse", "width_mean", "width_mean_mcse",
        "width_median", "width_q90", "nuts_assurance_subset", "laplace_assurance_subset",
        "nuts_agreement", "nuts_trials", "not_converged")}
    for n in grid:
        g = groups[(n, "prior")]
        p = float(np.mean(g["success"]))
        rows["assurance"].append(p)
        rows["assurance_mcse"].append(math.sqrt(p * (1 - p) / trials))
        if "assumed" in scenarios:
            q = float(np.mean(groups[(n, "assumed")]["success"]))
            rows["power"].append(q)
            rows["power_mcse"].append(math.sqrt(q * (1 - q) / trials))
        else:
            rows["power"].append(math.nan)
            rows["power_mcse"].append(math.nan)
        w = g["width"][np.isfinite(g["width"])]
        rows["width_mean"].append(float(w.mean()) if w.size else math.nan)
        rows["width_mean_mcse"].append(float(w.std(ddof=1) / math.sqrt(w.size))
                                       if w.size > 1 else math.nan)
        rows["width_median"].append(float(np.median(w)) if w.size else math.nan)
        rows["width_q90"].append(float(np.quantile(w, 0.9)) if w.size else math.nan)
        if "length" in settings:
            share = settings["likely_share"]
            rows.setdefault("width_worst_likely", []).append(
                float(np.quantile(w, share)) if w.size else math.nan)
            c = np.asarray(g.get("coverage_at_length", np.zeros(0)), float)
            c = c[np.isfinite(c)]
            rows.setdefault("coverage_mean", []).append(float(c.mean()) if c.size
                                                        else math.nan)
            rows.setdefault("coverage_mean_mcse", []).append(
                float(c.std(ddof=1) / math.sqrt(c.size)) if c.size > 1 else math.nan)
        k = g["nuts_success"].size
        rows["nuts_trials"].append(k)
        if k:
            nuts = g["nuts_success"].astype(float)
            lap = g["laplace_on_nuts"].astype(float)
            rows["nuts_assurance_subset"].append(float(nuts.mean()))
            rows["laplace_assurance_subset"].append(float(lap.mean()))
            rows["nuts_agreement"].append(_paired_z(nuts - lap))
        else:
            for key in ("nuts_assurance_subset", "laplace_assurance_subset", "nuts_agreement"):
                rows[key].append(math.nan)
        rows["not_converged"].append(
            sum(int(np.sum(~groups[(n, s)]["converged"].astype(bool))) for s in scenarios))
    n_arr = np.asarray(grid)
    arms = np.array([model.arm_sizes(n) for n in grid])
    ds = xr.Dataset(
        {k: ("n", np.asarray(v, dtype=int if k in ("nuts_trials", "not_converged") else float))
         for k, v in rows.items()},
        coords={"n": n_arr, "n_treatment": ("n", arms[:, 0]), "n_control": ("n", arms[:, 1])})
    nuts_every = settings["nuts_every"]
    method = ("NUTS on every trial" if nuts_every else
              "Laplace (normal) approximation at the posterior mode; NUTS on "
              f"{settings['nuts_check']} trials per size")
    ds.attrs.update({
        "model": model.describe(), "rule": _describe_rule(rule), "method": method,
        "trials": trials, "seed": settings["seed"], "chunk": settings["chunk"],
        "coverage": settings["coverage"], "effect_scale": model.effect_scale,
    })
    if "length" in settings:
        ds.attrs.update({"precision_length": settings["length"],
                         "likely_share": settings["likely_share"]})
    if settings.get("interval", "highest_density") != "highest_density":
        ds.attrs["interval"] = settings["interval"]
    problems = []
    agreement = np.abs(ds["nuts_agreement"].values)
    bad = [int(n) for n, a in zip(grid, agreement, strict=True)
           if not math.isnan(a) and a > AGREEMENT_LIMIT]
    if bad:
        problems.append(
            f"NUTS and the Laplace approximation disagree by more than {AGREEMENT_LIMIT:g} "
            f"Monte Carlo SE at n = {', '.join(map(str, bad))}; check the approximation "
            "(or fit every trial by NUTS)")
    failed = int(ds["not_converged"].sum())
    if failed:
        problems.append(f"{failed} Laplace fit(s) found no posterior mode (counted as "
                        "failures; see not_converged)")
    if problems:
        ds.attrs["warning"] = "; ".join(problems) + "."
        warnings.warn(ds.attrs["warning"], AssuranceWarning, stacklevel=3)
    return ds


def _paired_z(d: np.ndarray) -> float:
    """Mean paired difference in units of its Monte Carlo SE (0 when every pair agrees)."""
    if not np.any(d):
        return 0.0
    if d.size < 2:
        return math.copysign(math.inf, float(d.mean()))
    se = float(d.std(ddof=1)) / math.sqrt(d.size)
    return float(d.mean()) / se if se > 0 else math.copysign(math.inf, float(d.mean()))


def _describe_rule(rule: Any) -> str:
    return rule.describe() if hasattr(rule, "describe") else repr(rule)


@dataclass(frozen=True)
class GeneralSizeAnswer:
    """The smallest size in a simulated grid reaching a target."""

    n: int | None
    value: float
    mcse: float
    quantity: str
    target: float
    note: str


def solve_general_n(dataset: xr.Dataset, target: float,
                    quantity: Literal["assurance", "power", "width_mean", "width_median",
                                      "width_q90", "width_worst_likely",
                                      "coverage_mean"] = "assurance") -> GeneralSizeAnswer:
    """The smallest total size of the grid whose simulated ``quantity`` reaches ``target``.

    Parameters
    ----------
    dataset
        The result of :func:`simulate_general`.
    target
        For ``"assurance"`` / ``"power"``: the probability to reach, in (0, 1). For the
        widths: the largest acceptable width (> 0) of the posterior interval, on average
        (``"width_mean"``, the average-length criterion), at the median, in 90% of trials
        (``"width_q90"``) or in the share of trials the simulation was given
        (``"width_worst_likely"``, the modified worst-outcome criterion). For
        ``"coverage_mean"`` (the average coverage criterion): the average posterior
        probability to reach, in (0, 1), of an interval of the simulation's target length.
    quantity
        ``"assurance"``, ``"power"``, ``"width_mean"``, ``"width_median"``,
        ``"width_q90"``, ``"width_worst_likely"`` or ``"coverage_mean"``.

    Returns
    -------
    GeneralSizeAnswer
        ``n`` (None when no size reaches the target), the estimate there with its Monte
        Carlo SE (NaN for the median and quantile widths), and a note: the grid bounds the
        answer (the true smallest size lies between the previous grid size and this one),
        and whether the estimate is within 2 MC SE of the target (then a neighbouring size
        may be the true answer).

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"assurance": ("n", [0.5, 0.7, 0.9]),
    ...                  "assurance_mcse": ("n", [0.01, 0.01, 0.01])}, coords={"n": [10, 20, 30]})
    >>> solve_general_n(ds, 0.65).n
    20
    """
    owner = "solve_general_n"
    quantity = check_choice(quantity, "quantity", owner, [
        "assurance", "power", "width_mean", "width_median", "width_q90", "width_worst_likely",
        "coverage_mean"])
    if quantity not in dataset:
        raise AssuranceInputError(
            f"The 'dataset' parameter of {owner} holds no {quantity!r}: simulate with a "
            "target 'length' for the precision criteria width_worst_likely and coverage_mean.")
    width = quantity.startswith("width")
    if width:
        target = check_real(target, "target", owner, low=0, low_open=True)
    else:
        target = check_real(target, "target", owner, low=0, high=1, low_open=True,
                            high_open=True)
    values = np.asarray(dataset[quantity].values, float)
    name = f"{quantity}_mcse"
    mcse = (np.asarray(dataset[name].values, float) if name in dataset
            else np.full(values.shape, np.nan))
    sizes = np.asarray(dataset["n"].values)
    reached = values <= target if width else values >= target
    hits = np.flatnonzero(reached)
    share = dataset.attrs.get("likely_share", 0.95)
    words = {"width_mean": "mean interval width", "width_median": "median interval width",
             "width_q90": "90th percentile of the interval width",
             "width_worst_likely": f"{100 * share:g}th percentile of the interval width",
             "coverage_mean": "mean coverage of an interval of the target length"
             }.get(quantity, quantity)
    if hits.size == 0:
        best = int(np.nanargmin(values) if width else np.nanargmax(values))
        return GeneralSizeAnswer(
            None, float(values[best]), float(mcse[best]), quantity, target,
            f"no size up to {int(sizes[-1])} reaches {words} {target:g} (best "
            f"{values[best]:.3g} at n = {int(sizes[best])}); extend the grid")
    i = int(hits[0])
    low = "the smallest size simulated" if i == 0 else f"above {int(sizes[i - 1])}"
    note = (f"first size of the grid reaching {words} {target:g}: the answer lies "
            f"{low} and at most {int(sizes[i])}")
    if abs(values[i] - target) <= 2 * mcse[i]:
        note += (f"; the estimate {values[i]:.3g} is within 2 Monte Carlo SE "
                 f"({mcse[i]:.2g}) of the target, so more trials may move the answer")
    return GeneralSizeAnswer(int(sizes[i]), float(values[i]), float(mcse[i]), quantity,
                             target, note)
