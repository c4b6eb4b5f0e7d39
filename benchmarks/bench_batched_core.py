"""Batched core statistics against a plain Python loop of scipy calls.

Workload: 10,000 endpoints x 4 groups x 8 values; per endpoint Levene (median), the classic
one-way F and Welch's F. The loop is timed on 1,000 endpoints and scaled by 10 to keep the
run short. Prints median wall-clock times over repeats and the ratio loop / batched.

Run:  python benchmarks/bench_batched_core.py
"""

from __future__ import annotations

import statistics
import time

import numpy as np
import scipy.stats as st

from planrunner.stats.anova import oneway_anova, welch_anova
from planrunner.stats.variance import levene

ENDPOINTS = 10_000
LOOP_ENDPOINTS = 1_000
GROUPS = 4
N = 8
REPEATS_BATCHED = 9
REPEATS_LOOP = 3


def _median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    rng = np.random.default_rng(20260101)
    groups = [rng.lognormal(np.log(100.0 * (i + 1)), 0.5, size=(ENDPOINTS, N)) for i in range(GROUPS)]
    small = [g[:LOOP_ENDPOINTS] for g in groups]

    def batched():
        levene(*groups, center="median")
        oneway_anova(*groups)
        welch_anova(*groups)

    def scipy_axis():
        st.levene(*groups, center="median", axis=-1)
        st.f_oneway(*groups, axis=-1)
        st.f_oneway(*groups, axis=-1, equal_var=False)

    def scipy_loop():
        for i in range(LOOP_ENDPOINTS):
            gi = [g[i] for g in small]
            st.levene(*gi, center="median")
            st.f_oneway(*gi)
            st.f_oneway(*gi, equal_var=False)

    batched()  # warm-up (imports, caches)
    scipy_axis()
    t_batched = _median_time(batched, REPEATS_BATCHED)
    t_axis = _median_time(scipy_axis, REPEATS_BATCHED)
    t_loop = _median_time(scipy_loop, REPEATS_LOOP) * (ENDPOINTS / LOOP_ENDPOINTS)

    print(f"workload: {ENDPOINTS} endpoints x {GROUPS} groups x {N} values;"
          " Levene (median) + classic F + Welch F")
    print(f"planrunner batched           median {t_batched * 1e3:9.1f} ms  ({REPEATS_BATCHED} repeats)")
    print(f"scipy axis=-1 batched        median {t_axis * 1e3:9.1f} ms  ({REPEATS_BATCHED} repeats)")
    print(f"scipy Python loop (scaled)   median {t_loop * 1e3:9.1f} ms  ({REPEATS_LOOP} repeats of"
          f" {LOOP_ENDPOINTS} endpoints x {ENDPOINTS // LOOP_ENDPOINTS})")
    print(f"ratio loop / planrunner      {t_loop / t_batched:9.1f}x")
    print(f"ratio scipy axis / planrunner {t_axis / t_batched:8.2f}x")
    _full_pipeline(groups)


def _full_pipeline(groups) -> None:
    """Levene (median) + classic F + Welch F + Tukey-Kramer, batched vs a loop of scipy calls.

    scipy.stats.tukey_hsd costs about 0.1 s an endpoint, so the loop runs on TUKEY_LOOP
    endpoints and is scaled; p-values of the two routes are compared on those endpoints.
    """
    from planrunner.stats.comparisons import tukey_kramer

    tukey_loop = 40

    def batched():
        levene(*groups, center="median")
        oneway_anova(*groups)
        welch_anova(*groups)
        return tukey_kramer(*groups)

    def loop():
        out = []
        for i in range(tukey_loop):
            gi = [g[i] for g in groups]
            st.levene(*gi, center="median")
            st.f_oneway(*gi)
            st.f_oneway(*gi, equal_var=False)
            out.append(st.tukey_hsd(*gi).pvalue)
        return out

    res = batched()  # warm-up: range tables are built once per k
    t_batched = _median_time(batched, 5)
    t_loop = _median_time(loop, 3) * (ENDPOINTS / tukey_loop)
    ref = loop()
    worst = 0.0
    for i, pmat in enumerate(ref):
        for j, (a, b) in enumerate(res.pairs):
            worst = max(worst, abs(float(res.pvalue_adjusted[i, j]) - float(pmat[a, b])))
    print()
    print("full pipeline: Levene (median) + classic F + Welch F + Tukey-Kramer")
    print(f"planrunner batched           median {t_batched * 1e3:9.1f} ms  (5 repeats)")
    print(f"scipy Python loop (scaled)   median {t_loop * 1e3:9.1f} ms  (3 repeats of"
          f" {tukey_loop} endpoints x {ENDPOINTS // tukey_loop})")
    print(f"ratio loop / planrunner      {t_loop / t_batched:9.1f}x")
    print(f"max |p(planrunner) - p(scipy tukey_hsd)| on the looped endpoints: {worst:.2e}")

if __name__ == "__main__":
    main()
