"""Benchmark: a rehearsal of 10,000 replicates through the batched decision tree.

The plan has 4 groups of 8, a transform ladder (identity, sqrt, log10) re-tested with Levene
(median) after each rung, a Welch fallback and Tukey-Kramer comparisons after every omnibus
test. The baseline is a plain per-replicate loop over scipy calls (levene, f_oneway,
f_oneway(equal_var=False), tukey_hsd), timed over a few replicates and scaled to 10,000; it
does less work than the plan (no ladder re-tests, no normality check), so the ratio is
conservative.

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


def _scipy_loop(groups: tuple[np.ndarray, ...], count: int) -> float:
    from scipy import stats

    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in range(count):
            gs = [g[r] for g in groups]
            stats.levene(*gs, center="median")
            stats.f_oneway(*gs)
            stats.f_oneway(*gs, equal_var=False)
            stats.tukey_hsd(*gs)
    return time.perf_counter() - start


def main() -> int:
    model = load_plan_bytes(yaml.safe_dump(PLAN).encode("utf-8")).model
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
    _scipy_loop(groups, 3)                                                  # warm
    loops = [_scipy_loop(groups, LOOP_REPLICATES) for _ in range(REPEATS)]
    per = statistics.median(loops) / LOOP_REPLICATES
    scaled = per * REPLICATES

    assert result is not None
    paths = ", ".join(f"{p['label']} {p['rate']:.3f}" for p in result["paths"])
    print(f"rehearsal, 4 groups x 8, ladder + Welch fallback + Tukey-Kramer, "
          f"{REPLICATES} replicates")
    print(f"  paths: {paths}")
    print(f"  planrunner rehearse_scenario: median {ours:.2f} s over {REPEATS} runs "
          f"({1e6 * ours / REPLICATES:.0f} us per replicate)")
    print(f"  scipy per-replicate loop (levene, f_oneway, f_oneway(equal_var=False), "
          f"tukey_hsd): {1e3 * per:.2f} ms per replicate, {scaled:.1f} s scaled to "
          f"{REPLICATES}")
    print(f"  ratio loop / batched: {scaled / ours:.1f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
