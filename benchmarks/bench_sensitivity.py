"""What the prior-sensitivity section adds to a plan, on every case study.

One row per case study: the time of the whole plan with the sensitivity section (default
settings: the varied priors, the sizes for each assurance target, the 21 x 15 map and the
centre shift) and without it (``sensitivity=False``), each from a freshly read design so no
cache of an earlier repeat helps, the time added, their ratio, and the target from the issue
for the added time: under 1 s for a closed-form plan, under
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

    print(f"{'case study':20s} {'with':>9s} {'without':>9s} {'added':>8s} {'ratio':>6s}  target"
          " (added time)")
    for path in sorted(ROOT.glob("case_studies/*/design.toml")):

        def whole(sensitivity: bool, path: Path = path) -> object:
            # a fresh design each time: nothing cached from an earlier repeat helps
            spec = read_design_file(path)
            return asr.plan(spec.design, targets=spec.targets, sizes=spec.sizes,
                            zones=spec.zones, precision=spec.precision, draws=spec.draws,
                            seed=spec.seed, prior_origin=spec.prior_origin,
                            planned=spec.planned,
                            sensitivity=(spec.sensitivity or True) if sensitivity else False)

        made = whole(False)
        t_without = best_of(lambda: whole(False), repeat=3, number=1)
        t_with = best_of(lambda: whole(True), repeat=3, number=1)
        added = t_with - t_without
        closed = _closed_form(made.results.attrs["method"])
        limit = 1.0 if closed else 5.0
        kind = "closed form" if closed else "other"
        print(f"{path.parent.name:20s} {t_with:7.3f} s {t_without:7.3f} s {added:6.3f} s "
              f"{t_with / t_without:6.2f}  < {limit:g} s ({kind}): {verdict(added < limit)}")


if __name__ == "__main__":
    main()
