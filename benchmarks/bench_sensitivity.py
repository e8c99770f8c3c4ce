"""What the prior-sensitivity section adds to a plan, on every case study.

One row per case study: the time of ``prior_sensitivity`` (default settings: the varied
priors, the sizes for each assurance target, the 21 x 15 map and the centre shift), the time
of the same plan without it (``assurance.plan(..., sensitivity=False)``, measured in the same
run), their ratio, and the target from the issue: under 1 s for a closed-form plan, under
5 s for other one-dimensional priors (quadrature, beta priors on the rates, Monte Carlo
over a nuisance value). Run alone with ``python benchmarks/bench_sensitivity.py`` or
through ``benchmarks/run.py``.
"""

from __future__ import annotations

from pathlib import Path

from _timing import best_of, verdict

ROOT = Path(__file__).resolve().parents[1]


def _closed_form(method: str) -> bool:
    return "closed form" in method and "Monte Carlo" not in method \
        and "quadrature over the prior" not in method


def main() -> None:
    import assurance as asr
    from assurance.design_file.reader import read_design_file
    from assurance.sensitivity import prior_sensitivity

    print(f"{'case study':20s} {'sensitivity':>12s} {'plan alone':>11s} {'ratio':>6s}  target")
    for path in sorted(ROOT.glob("case_studies/*/design.toml")):
        spec = read_design_file(path)

        def bare(spec=spec):
            return asr.plan(spec.design, targets=spec.targets, sizes=spec.sizes,
                            zones=spec.zones, precision=spec.precision, draws=spec.draws,
                            seed=spec.seed, prior_origin=spec.prior_origin,
                            planned=spec.planned, sensitivity=False)

        made = bare()
        planned = int(made.results.attrs.get("planned_n", 0)) or next(
            (a.n_total for a in made.sample_sizes if a.quantity == "assurance" and a.reached),
            int(made.results.n.values[-1]))
        t_plan = best_of(bare, repeat=3, number=1)
        t_sens = best_of(lambda spec=spec, planned=planned: prior_sensitivity(
            spec.design, planned, spec.targets, origin=spec.prior_origin, draws=spec.draws,
            seed=spec.seed), repeat=3, number=1, warm_up=True)
        closed = _closed_form(made.results.attrs["method"])
        limit = 1.0 if closed else 5.0
        kind = "closed form" if closed else "other"
        print(f"{path.parent.name:20s} {t_sens:10.3f} s {t_plan:9.3f} s {t_sens / t_plan:6.2f}"
              f"  < {limit:g} s ({kind}): {verdict(t_sens < limit)}")


if __name__ == "__main__":
    main()
