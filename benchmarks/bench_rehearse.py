"""Benchmark: a rehearsal of 10,000 replicates through the batched decision tree.

The first plan has 4 groups of 8, a transform ladder (identity, sqrt, log10) re-tested with
Levene (median) after each rung, a Welch fallback and Tukey-Kramer comparisons after every
omnibus test; two more plans run the same scenario through Welch's ANOVA with Games-Howell and
through the classic ANOVA with Dunnett's comparisons against a control. The baseline is a
plain per-replicate loop over the matching scipy calls, timed over a few replicates and scaled
to 10,000; it does less work than the plans (no ladder re-tests, no normality check), so the
ratios are conservative.

Run: python benchmarks/bench_rehearse.py  (prints medians and the ratio; asserts nothing)
"""

from __future__ import annotations

import statistics
import sys
import time
import warnings

import numpy as np
import yaml

from planrunner.engine.rehearse import rehearse_scenario, simulate
from planrunner.plan.load import load_plan_bytes

REPLICATES = 10_000
REPEATS = 3
LOOP_REPLICATES = 30

PLAN = {
    "planrunner": 1,
    "id": "bench-rehearse",
    "title": "Rehearsal benchmark",
    "question": "Do the group means differ?",
    "hypotheses": {"family": "all_pairs"},
    "data": {"file": "data/none.csv", "group": "g", "response": "y",
             "levels": ["a", "b", "c", "d"]},
    "omnibus": "classic",
    "variance_check": {"method": "levene_median", "alpha": 0.05, "role": "gate"},
    "transform": {"policy": "ladder", "ladder": ["identity", "sqrt", "log10"]},
    "when_variances_differ": "welch",
    "comparisons": {"method": "tukey_kramer", "only_after_significant_omnibus": False},
    "sample_size": {"justification": "Benchmark only."},
    "rehearsal": {"replicates": REPLICATES, "seed": 17, "scenarios": [
        {"name": "skewed shift", "distribution": "lognormal", "means": [100, 100, 120, 150],
         "cv": 0.5, "n": 8}]},
}


#: Further cases: the same scenario through a Welch + Games-Howell plan (the recommended
#: default) and a classic + Dunnett plan against the first level as control.
CASES = (
    ("ladder + Welch fallback + Tukey-Kramer", {}, "tukey"),
    ("Welch ANOVA + Games-Howell, no gate",
     {"omnibus": "welch", "variance_check": {"method": "none"}, "transform": {"policy": "none"},
      "comparisons": {"method": "games_howell", "only_after_significant_omnibus": False}},
     "games_howell"),
    ("classic ANOVA + Dunnett against a control",
     {"hypotheses": {"family": "against_control"},
      "data": {**PLAN["data"], "control": "a"},
      "variance_check": {"method": "none"}, "transform": {"policy": "none"},
      "comparisons": {"method": "dunnett", "only_after_significant_omnibus": False}},
     "dunnett"),
)


def _scipy_loop(groups: tuple[np.ndarray, ...], count: int, kind: str) -> float:
    from scipy import stats

    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in range(count):
            gs = [g[r] for g in groups]
            if kind == "tukey":
                stats.levene(*gs, center="median")
                stats.f_oneway(*gs)
                stats.f_oneway(*gs, equal_var=False)
                stats.tukey_hsd(*gs)
            elif kind == "games_howell":
                stats.f_oneway(*gs, equal_var=False)
                stats.tukey_hsd(*gs, equal_var=False)
            else:
                stats.f_oneway(*gs)
                stats.dunnett(*gs[1:], control=gs[0], rng=np.random.default_rng(1))
    return time.perf_counter() - start


def _case(label: str, changes: dict, kind: str) -> None:
    model = load_plan_bytes(yaml.safe_dump({**PLAN, **changes}).encode("utf-8")).model
    scenario = model.rehearsal.scenarios[0]
    rehearse_scenario(model, scenario, seed=17, replicates=500)          # warm caches/imports
    times = []
    result = None
    for _ in range(REPEATS):
        start = time.perf_counter()
        result = rehearse_scenario(model, scenario, seed=17, replicates=REPLICATES)
        times.append(time.perf_counter() - start)
    ours = statistics.median(times)

    groups = simulate(scenario, 17, 0, LOOP_REPLICATES)
    _scipy_loop(groups, 3, kind)                                            # warm
    loops = [_scipy_loop(groups, LOOP_REPLICATES, kind) for _ in range(REPEATS)]
    per = statistics.median(loops) / LOOP_REPLICATES
    scaled = per * REPLICATES

    assert result is not None
    paths = ", ".join(f"{p['label']} {p['rate']:.3f}" for p in result["paths"])
    calls = {"tukey": "levene, f_oneway, f_oneway(equal_var=False), tukey_hsd",
             "games_howell": "f_oneway(equal_var=False), tukey_hsd(equal_var=False)",
             "dunnett": "f_oneway, dunnett"}[kind]
    print(f"\nrehearsal, 4 groups x 8, {label}, {REPLICATES} replicates")
    print(f"  paths: {paths}")
    print(f"  planrunner rehearse_scenario: median {ours:.2f} s over {REPEATS} runs "
          f"({1e6 * ours / REPLICATES:.0f} us per replicate)")
    print(f"  scipy per-replicate loop ({calls}): {1e3 * per:.2f} ms per replicate, "
          f"{scaled:.1f} s scaled to {REPLICATES}")
    print(f"  ratio loop / batched: {scaled / ours:.1f}x")


def main() -> int:
    for label, changes, kind in CASES:
        _case(label, changes, kind)
    return 0


if __name__ == "__main__":
    sys.exit(main())
