"""How a user hands over an analysis model: a data simulator plus a PyMC model builder.

A :class:`GeneralModel` keeps the two priors apart: the *design prior* (one
:class:`~assurance.priors.Prior` per true parameter) generates the truth that the simulator
turns into one trial's data; the *analysis model*, built with PyMC on ``pm.Data`` containers,
fits those data with its own (analysis) priors. The builder is called once per trial size;
afterwards the data are swapped in place.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from .._validation import check_choice, check_int, check_real, check_text
from ..endpoints.base import Endpoint
from ..errors import AssuranceInputError
from ..priors.families import Prior

if TYPE_CHECKING:  # pragma: no cover
    import pymc as pm

__all__ = ["GeneralModel"]

_OWNER = "GeneralModel"


@dataclass(frozen=True)
class GeneralModel:
    """An analysis model written in PyMC, with the simulator of its data and a design prior.

    Parameters
    ----------
    name
        Plain words naming the model (used in memos and in the stored results' fingerprint).
    simulate
        ``simulate(rng, n_treatment, n_control, truth) -> dict`` draws one trial's data:
        arrays keyed by the names of the analysis model's ``pm.Data`` containers. ``truth``
        maps every key of ``design_prior`` to one drawn value. Must be a module-level
        function to run on worker processes.
    build
        ``build(data) -> pm.Model`` builds the analysis model on one ``pm.Data`` container per
        key of ``data`` (same names), with a variable named ``effect`` (free or
        Deterministic). Called once per trial size (and per worker).
    design_prior
        One prior per true parameter; must hold ``"effect"`` (the treatment effect on the
        analysis scale). Parameters are drawn independently.
    assumed
        Point values of the same parameters, for classical power.
    effect
        Name of the effect variable in the PyMC model.
    better
        ``"higher"`` or ``"lower"``: which direction of the effect is a benefit.
    allocation
        Treatment patients per control patient.
    smallest_total
        The smallest total size the model can be fitted with.
    effect_scale
        Words for the effect's scale ("difference", "log odds ratio").

    Examples
    --------
    >>> import numpy as np
    >>> from assurance.priors import Normal
    >>> def simulate(rng, n_t, n_c, truth):
    ...     return {"y": rng.normal(truth["effect"], 1.0, n_t + n_c)}
    >>> def build(data):  # the PyMC model (imported only when it is built)
    ...     raise NotImplementedError
    >>> model = GeneralModel("mean of one group", simulate, build,
    ...                      design_prior={"effect": Normal(0.3, 0.1)}, assumed={"effect": 0.3})
    >>> model.arm_sizes(11)
    (6, 5)
    """

    name: str
    simulate: Callable[[np.random.Generator, int, int, Mapping[str, float]],
                       dict[str, np.ndarray]]
    build: Callable[[Mapping[str, np.ndarray]], pm.Model]
    design_prior: Mapping[str, Prior] = field(default_factory=dict)
    assumed: Mapping[str, float] = field(default_factory=dict)
    effect: str = "effect"
    better: Literal["higher", "lower"] = "higher"
    allocation: float = 1.0
    smallest_total: int = 4
    effect_scale: str = "difference"

    def __post_init__(self) -> None:
        check_text(self.name, "name", _OWNER, max_length=200)
        for attr in ("simulate", "build"):
            if not callable(getattr(self, attr)):
                raise AssuranceInputError(
                    f"The {attr!r} parameter of {_OWNER} must be a function. "
                    f"Got {getattr(self, attr)!r:.80} instead.")
        if not isinstance(self.design_prior, Mapping) or "effect" not in self.design_prior:
            raise AssuranceInputError(
                f"The 'design_prior' parameter of {_OWNER} must be a mapping of parameter "
                f"names to priors holding 'effect'. Got {self.design_prior!r:.120} instead.")
        for key, prior in self.design_prior.items():
            if not isinstance(key, str) or not isinstance(prior, Prior):
                raise AssuranceInputError(
                    f"The 'design_prior' parameter of {_OWNER} must map names to assurance "
                    f"priors. Got {key!r}: {prior!r:.80} instead.")
        if not isinstance(self.assumed, Mapping) or set(self.assumed) != set(self.design_prior):
            have = sorted(self.assumed) if isinstance(self.assumed, Mapping) else self.assumed
            raise AssuranceInputError(
                f"The 'assumed' parameter of {_OWNER} must give a value for the same "
                f"parameters as 'design_prior' ({sorted(self.design_prior)}). "
                f"Got {have!r:.120} instead.")
        assumed = {k: check_real(v, f"assumed[{k!r}]", _OWNER) for k, v in self.assumed.items()}
        object.__setattr__(self, "design_prior", dict(self.design_prior))
        object.__setattr__(self, "assumed", assumed)
        check_text(self.effect, "effect", _OWNER, max_length=200)
        check_choice(self.better, "better", _OWNER, ["higher", "lower"])
        object.__setattr__(self, "allocation", check_real(
            self.allocation, "allocation", _OWNER, low=0, low_open=True))
        object.__setattr__(self, "smallest_total", check_int(
            self.smallest_total, "smallest_total", _OWNER, low=2))
        check_text(self.effect_scale, "effect_scale", _OWNER, max_length=200)

    def arm_sizes(self, n_total: int) -> tuple[int, int]:
        """(treatment, control) patients for a total, rounded as the built-in endpoints do
        (:meth:`assurance.endpoints.base.Endpoint.arm_sizes`)."""
        shim = SimpleNamespace(layout="two_arm", allocation=self.allocation)
        n_t, n_c = Endpoint.arm_sizes(shim, np.asarray([n_total]))  # type: ignore[arg-type]
        return int(n_t[0]), int(n_c[0])

    def describe(self) -> str:
        """Plain description for memos."""
        lower = ", lower is better" if self.better == "lower" else ""
        return f"{self.name} (effect: {self.effect_scale}{lower})"

    def fingerprint_fields(self) -> dict[str, Any]:
        """The settings that fix this model's simulated numbers (for stored results)."""
        return {
            "name": self.name, "effect": self.effect, "better": self.better,
            "allocation": self.allocation, "effect_scale": self.effect_scale,
            "simulate": _qualname(self.simulate), "build": _qualname(self.build),
            "design_prior": {k: _prior_text(p) for k, p in sorted(self.design_prior.items())},
            "assumed": dict(sorted(self.assumed.items())),
        }


def _qualname(func: Any) -> str:
    return f"{getattr(func, '__module__', '?')}.{getattr(func, '__qualname__', repr(func))}"


def _prior_text(prior: Prior) -> Any:
    try:
        return prior.to_dict()
    except Exception:  # pragma: no cover - a prior without a dictionary form
        return repr(prior)
