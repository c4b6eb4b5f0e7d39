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
    # Tukey-Kramer comparisons (planrunner.stats.comparisons) are not part of this core
    # benchmark; add them here once that module exists:
    # TUKEY-KRAMER: time comparisons.tukey_kramer(*groups) against a loop of
    # scipy.stats.tukey_hsd on the same endpoints.


if __name__ == "__main__":
    main()
