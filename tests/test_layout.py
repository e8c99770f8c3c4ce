"""Package layout: imports point one way, with no circle, and public names stay public.

The import graph is read from the modules' source (every ``import``, at the top or inside a
function, except those under ``if TYPE_CHECKING:``), so a lazy import cannot hide a circle.
"""

from __future__ import annotations

import ast
import importlib
import subprocess
import sys
from pathlib import Path

import pytest

import assurance

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "assurance"

#: From the bottom up; a module may import its own layer and those below, never above.
LAYERS: list[tuple[str, ...]] = [
    ("assurance", "assurance.errors", "assurance._validation", "assurance.versions"),
    ("assurance.priors.families", "assurance.rules.significance"),       # the vocabulary
    ("assurance.compute",),                                               # arithmetic
    ("assurance.priors", "assurance.rules", "assurance.endpoints",        # the domain
     "assurance.precision", "assurance.design"),
    ("assurance.planning", "assurance.joint", "assurance.simulation"),    # evaluate, solve,
    ("assurance.general",),                                               # any PyMC model
    ("assurance.sensitivity",),                                           # vary the prior
    ("assurance.program",),                                               # programs, interim
                                                                          # looks, portfolios
    ("assurance.workflow",),                                              # the plan's steps
    ("assurance.design_file",),                                           # the file format
    ("assurance.report",),                                                # memo, figures, folder
    ("assurance.planner", "assurance.model_plan", "assurance.program_plan",
     "assurance.interim_plan", "assurance.portfolio_plan"),               # the Plan objects
    ("assurance.cli",),                                                   # the shell
]

#: Public names of ``assurance`` before the package was regrouped into folders; user code
#: written against them must keep working.
NAMES_BEFORE_REGROUPING = [
    "__version__", "AssuranceInputError", "AssuranceWarning", "DesignFileError", "Prior",
    "Normal", "StudentT", "Uniform", "TruncatedNormal", "PointMass", "Mixture", "FromScipy",
    "ScaledInvChiSquare", "GammaPrecision", "ContinuousEndpoint", "CountEndpoint",
    "BinaryEndpoint", "BetaRates", "SurvivalEndpoint", "events_needed", "simulate_trials",
    "simulate_assurance", "sample_size_for_rate_ratio", "simulate_rejection_rate",
    "Significance", "PosteriorProbability", "AllOf", "AnyOf", "MinimumEstimate",
    "GoConsiderStop", "evaluate_zones", "evaluate_joint", "TrialDesign", "evaluate",
    "solve_sample_size", "SampleSizeAnswer", "show_versions", "fit_prior", "linear_pool",
    "plot_fit", "Quantile", "Interval", "PriorFit", "Beta", "Gamma", "Estimate",
    "estimate_from_events", "estimate_from_means", "prior_from_estimate", "robust_mixture",
    "arm_estimates", "meta_analytic_prior", "meta_analytic_prior_mcmc",
    "prior_predictive_summary", "interval_width_curve", "solve_precision_n", "PrecisionPlan",
    "precision_model_for",
]


def _modules() -> dict[str, Path]:
    found = {}
    for path in PACKAGE.rglob("*.py"):
        parts = list(path.relative_to(ROOT).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        found[".".join(parts)] = path
    return found


def _graph() -> dict[str, set[str]]:
    modules = _modules()
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        hidden = {id(node) for branch in ast.walk(tree) if isinstance(branch, ast.If)
                  and "TYPE_CHECKING" in ast.unparse(branch.test)
                  for node in ast.walk(branch)}
        package = name.split(".") if path.name == "__init__.py" else name.split(".")[:-1]
        deps: set[str] = set()
        for node in ast.walk(tree):
            if id(node) in hidden:
                continue
            targets: list[str] = []
            if isinstance(node, ast.ImportFrom):
                base = package[:len(package) - node.level + 1] if node.level else []
                stem = ".".join([*base, *(node.module.split(".") if node.module else [])])
                targets = [f"{stem}.{alias.name}" for alias in node.names] + [stem]
            elif isinstance(node, ast.Import):
                targets = [alias.name for alias in node.names]
            for target in targets:
                while target and target not in modules and "." in target:
                    target = target.rsplit(".", 1)[0]
                if target in modules and target != name:
                    deps.add(target)
                    break
        graph[name] = deps
    return graph


def _layer(module: str) -> int:
    best, depth = None, -1
    for level, prefixes in enumerate(LAYERS):
        for prefix in prefixes:
            if (module == prefix or module.startswith(prefix + ".")) and len(prefix) > depth:
                best, depth = level, len(prefix)
    assert best is not None, f"{module} has no layer: add it to LAYERS"
    return best


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_the_import_graph_has_no_circle():
    assert _cycles(_graph()) == []


def test_the_cycle_finder_finds_a_circle():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


def test_every_module_has_a_layer_and_imports_only_downwards():
    upward = []
    for module, deps in _graph().items():
        for dep in deps:
            if _layer(dep) > _layer(module):
                upward.append(f"{module} -> {dep}")
    assert upward == []


@pytest.mark.parametrize("domain", ["assurance.priors", "assurance.rules",
                                    "assurance.endpoints", "assurance.compute",
                                    "assurance.precision", "assurance.design",
                                    "assurance.planning"])
def test_domain_modules_never_import_the_file_reader_report_or_shell(domain):
    upper = ("assurance.design_file", "assurance.report", "assurance.cli",
             "assurance.planner")
    for module, deps in _graph().items():
        if module == domain or module.startswith(domain + "."):
            assert not [d for d in deps if d.startswith(upper)], module


def test_public_names_are_all_importable_from_the_package():
    assert sorted(assurance.__all__) == sorted(set(assurance.__all__))
    for name in assurance.__all__:
        assert getattr(assurance, name) is not None, name
    assert sorted(dir(assurance)) == sorted(assurance.__all__)


def test_names_public_before_regrouping_are_still_public():
    missing = [n for n in NAMES_BEFORE_REGROUPING if n not in assurance.__all__]
    assert missing == []


@pytest.mark.parametrize("module", ["assurance.priors", "assurance.precision",
                                    "assurance.rules", "assurance.design_file",
                                    "assurance.report"])
def test_each_folder_lists_what_it_offers(module):
    mod = importlib.import_module(module)
    for name in mod.__all__:
        assert hasattr(mod, name), (module, name)


def test_importing_the_package_and_the_shell_stays_light():
    code = ("import sys, assurance, assurance.cli; "
            "print(','.join(m for m in ('numpy', 'scipy', 'xarray', 'matplotlib', 'pymc', "
            "'pydantic') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == ""
