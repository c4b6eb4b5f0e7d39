"""Throughput of the batched studentized-range upper tail against scipy.stats.studentized_range.

Workloads of 100,000 values: (a) six pairwise statistics of k = 4 groups over many endpoints,
all with df = 28; (b) a mixed batch of (k, df) pairs. scipy is timed on a subset (one call per
value, as a plain loop would do) and scaled to the full size. Prints medians over repeats, the
throughput ratio, and the largest |difference| in p on the subset.

Run:  python benchmarks/bench_studentized_range.py [--repeats 5] [--subset 200]
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
from scipy import stats

from planrunner.stats.distributions import studentized_range_sf

N = 100_000


def _median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def _workloads(rng: np.random.Generator) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
    # Invented statistics: |t|-like values times sqrt(2), spread over the useful range.
    q_a = np.abs(rng.standard_t(28, N)) * np.sqrt(2) + rng.uniform(0, 2, N)
    k_a = np.full(N, 4)
    df_a = np.full(N, 28.0)
    pairs = [(3, 12.0), (4, 28.0), (5, 45.0), (6, 6.0), (8, 100.0), (10, np.inf)]
    choice = rng.integers(0, len(pairs), N)
    k_b = np.array([pairs[i][0] for i in choice])
    df_b = np.array([pairs[i][1] for i in choice])
    q_b = rng.uniform(0.2, 8.0, N)
    return {"k=4, df=28 (6 pairs x endpoints)": (q_a, k_a, df_a),
            "mixed (k, df), 6 pairs": (q_b, k_b, df_b)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--subset", type=int, default=200)
    args = parser.parse_args()
    rng = np.random.default_rng(12345)
    for name, (q, k, df) in _workloads(rng).items():
        studentized_range_sf(q[:10], k[:10], df[:10])          # build the cached tables once
        ours = _median_time(lambda: studentized_range_sf(q, k, df), args.repeats)
        sub = slice(0, args.subset)

        def scipy_loop():
            return np.array([stats.studentized_range.sf(a, b, c)
                             for a, b, c in zip(q[sub], k[sub], df[sub])])

        ref_sub = _median_time(scipy_loop, max(1, min(args.repeats, 3)))
        ref_full = ref_sub * N / args.subset
        delta = np.max(np.abs(studentized_range_sf(q[sub], k[sub], df[sub]) - scipy_loop()))
        print(f"{name}")
        print(f"  planrunner, {N} values: median {ours:.3f} s ({ours / N * 1e6:.2f} us/value)")
        print(f"  scipy loop, {args.subset} values: median {ref_sub:.3f} s "
              f"({ref_sub / args.subset * 1e3:.2f} ms/value; {ref_full:.0f} s scaled to {N})")
        print(f"  throughput ratio: {ref_full / ours:.0f}x    max |dp| on subset: {delta:.1e}")


if __name__ == "__main__":
    main()
