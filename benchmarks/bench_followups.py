"""Batched Tukey-Kramer, Games-Howell and Dunnett against a plain loop over scipy.

Workload: 10,000 endpoints x 4 groups x 8 values (seeded normal data, unequal spreads). Our
functions take the whole batch in one call; scipy (tukey_hsd, tukey_hsd(equal_var=False),
dunnett with its rng pinned) is called once per endpoint. The scipy loop runs over a subset of
endpoints and its median time per endpoint is scaled to the full batch. Printed: medians, the
ratio, the largest |p_ours - p_scipy| over the looped subset, and the decisions-only route
(pvalues=False: critical values, as in a rehearsal).

Run:  python benchmarks/bench_followups.py [--endpoints 10000] [--loop 50] [--repeats 3]
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
from scipy import stats

from planrunner.stats.comparisons import dunnett, games_howell, tukey_kramer


def _median_time(fn, repeats: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--endpoints", type=int, default=10_000)
    parser.add_argument("--groups", type=int, default=4)
    parser.add_argument("--n", type=int, default=8)
    parser.add_argument("--loop", type=int, default=50, help="endpoints in the scipy loop")
    parser.add_argument("--loop-ci", type=int, default=5, help="endpoints timed with intervals")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()

    rng = np.random.default_rng(2024)
    groups = [
        rng.normal(0.25 * i, 1.0 + 0.25 * i, (args.endpoints, args.n)) for i in range(args.groups)
    ]
    pairs = [(a, b) for a in range(args.groups) for b in range(a + 1, args.groups)]
    ia = np.array([p[0] for p in pairs])
    ib = np.array([p[1] for p in pairs])
    print(
        f"workload: {args.endpoints} endpoints x {args.groups} groups x {args.n} values "
        f"({len(pairs)} pairs each)"
    )

    def scipy_tukey(equal_var):
        def call(one):
            ref = stats.tukey_hsd(*one, equal_var=equal_var)
            return ref, ref.pvalue[ia, ib]
        return call

    def scipy_dunnett(one):
        ref = stats.dunnett(*one[1:], control=one[0], rng=np.random.default_rng(1))
        return ref, ref.pvalue

    for label, fn, scipy_call, ci_pairs in (
        ("Tukey-Kramer", tukey_kramer, scipy_tukey(True), (ia, ib)),
        ("Games-Howell", games_howell, scipy_tukey(False), (ia, ib)),
        ("Dunnett (control = group 0)", dunnett, scipy_dunnett, None),
    ):
        t0 = time.perf_counter()
        fn(*[g[:3] for g in groups])  # first call in the process: quadrature tables are built
        fn(*[g[:400] for g in groups], alpha=0.05, pvalues=False)   # and the batch tables
        cold = time.perf_counter() - t0
        ours, res = _median_time(lambda: fn(*groups), args.repeats)
        decide, _ = _median_time(lambda: fn(*groups, alpha=0.05, pvalues=False), args.repeats)

        per, per_ci, dp, dci = [], [], 0.0, 0.0
        for e in range(args.loop):
            one = [g[e] for g in groups]
            t0 = time.perf_counter()
            ref, ref_p = scipy_call(one)
            per.append(time.perf_counter() - t0)
            dp = max(dp, float(np.max(np.abs(res.pvalue_adjusted[e] - ref_p))))
            if e < args.loop_ci:
                t0 = time.perf_counter()
                ref, _ = scipy_call(one)
                ci = ref.confidence_interval(confidence_level=0.95)
                per_ci.append(time.perf_counter() - t0)
                low = ci.low[ci_pairs] if ci_pairs is not None else ci.low
                dci = max(dci, float(np.max(np.abs(res.ci_low[e] - low))))
        scipy_total = statistics.median(per) * args.endpoints
        scipy_ci_total = statistics.median(per_ci) * args.endpoints
        print(f"\n{label}")
        print(
            f"  ours, batched (median of {args.repeats}):   {ours:10.3f} s   "
            f"(first calls in process, tables built: {cold:.2f} s)"
        )
        print(
            f"  ours, decisions only (pvalues=False): {decide:7.3f} s   "
            f"ratio scipy loop / ours {scipy_total / decide:10.0f}x"
        )
        print(
            f"  scipy loop, p-values:  {statistics.median(per) * 1e3:8.1f} ms/endpoint "
            f"-> {scipy_total:10.1f} s for {args.endpoints}   ratio {scipy_total / ours:10.0f}x"
        )
        print(
            f"  scipy loop, p + 95% CI: {statistics.median(per_ci) * 1e3:7.1f} ms/endpoint "
            f"-> {scipy_ci_total:10.1f} s for {args.endpoints}   ratio {scipy_ci_total / ours:10.0f}x"
        )
        print(f"  max |p_ours - p_scipy| over {args.loop} endpoints: {dp:.2e}"
              + ("  (scipy's Dunnett is quasi-Monte Carlo, about 1e-3)" if ci_pairs is None
                 else ""))
        print(f"  max |ci_low_ours - ci_low_scipy| over {args.loop_ci} endpoints: {dci:.2e}")


if __name__ == "__main__":
    main()
