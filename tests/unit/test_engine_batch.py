"""One decision tree, batched: a batch of B elements decides exactly as B single elements.

The simulated data (seeded numpy, lognormal groups with unequal spread) are chosen so that a
batch mixes the branches: some replicates keep the original scale, some move up the ladder,
some exhaust it and fall back to Welch. The test asserts that the mix really occurs, so it
cannot pass on a batch that took one branch only.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pytest

from planrunner.audit.log import DecisionLog
from planrunner.data import DataSpec, check_data, read_table
from planrunner.engine import CountingRecorder, LogRecorder, adjust_across, analyse, decide_batch
from planrunner.plan.load import load_plan

PLAN = """\
planrunner: 1
id: batch-test
title: Batch test
question: Do the group means differ?
hypotheses: {family: all_pairs, across_endpoints: ACROSS}
data: {file: d.csv, group: grp, response: RESPONSE, levels: [a, b, c, d]}
omnibus: classic
variance_check: {method: hartley_fmax, role: gate}
normality_check: {method: shapiro_wilk, role: describe}
transform: {policy: ladder, ladder: [identity, sqrt, log10]}
when_variances_differ: welch
sensitivity: [always_welch]
comparisons: {method: tukey_kramer, only_after_significant_omnibus: true}
"""


def load(tmp_path: Path, response: str = "y", across: str = "holm"):
    p = tmp_path / "plan.yaml"
    p.write_text(PLAN.replace("RESPONSE", response).replace("ACROSS", across), encoding="utf-8")
    return load_plan(p)


def simulate(b: int, seed: int = 7) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    sigma = (0.25, 0.35, 0.5, 0.8)
    centre = (2.0, 2.2, 2.3, 2.6)
    return [np.exp(rng.normal(m, s, size=(b, 8))) for m, s in zip(centre, sigma)]


class _Detailed(CountingRecorder):
    """Counts like a rehearsal but asks for the numbers a run records (p-values)."""

    detailed = True


def test_batched_decide_equals_one_at_a_time(tmp_path):
    plan = load(tmp_path).model
    groups = simulate(60)
    whole = decide_batch(plan, groups, _Detailed())
    counted = decide_batch(plan, groups, CountingRecorder())
    # the rehearsal route (critical values) rejects exactly where p <= alpha
    np.testing.assert_array_equal(counted.comparison_rejected, whole.comparison_rejected)
    labels = set(whole.path_labels)
    # the batch really mixes branches (see the module docstring)
    assert {"identity / classic", "identity / welch"} <= labels
    assert len(labels) >= 3
    for j in range(60):
        one = decide_batch(plan, [g[j:j + 1] for g in groups], _Detailed())
        assert one.path_labels[one.path[0]] == whole.path_labels[whole.path[j]]
        assert one.omnibus[0] == whole.omnibus[j]
        assert one.omnibus_pvalue[0] == pytest.approx(whole.omnibus_pvalue[j], rel=1e-12)
        assert one.omnibus_rejected[0] == whole.omnibus_rejected[j]
        assert one.comparisons_performed[0] == whole.comparisons_performed[j]
        np.testing.assert_allclose(one.comparison_pvalues[0], whole.comparison_pvalues[j],
                                   rtol=1e-10, equal_nan=True)
        np.testing.assert_array_equal(one.comparison_rejected[0], whole.comparison_rejected[j])
    assert whole.comparisons_performed.any() and whole.comparison_rejected.any()


def test_counting_and_logging_recorders_see_the_same_decisions(tmp_path):
    plan = load(tmp_path).model
    groups = simulate(12, seed=3)
    counter = CountingRecorder()
    decide_batch(plan, groups, counter)
    log = DecisionLog()
    log.start(plan_file="p", plan_sha256="a" * 64, plan_raw_sha256="b" * 64, data_file="d",
              data_sha256="c" * 64, time_utc="2027-01-01T00:00:00Z", operator={},
              command=["t"], software={})
    rec = LogRecorder(log, [f"replicate {i}" for i in range(12)])
    decide_batch(plan, groups, rec)
    rec.flush()
    logged: dict[tuple[str, str, str], int] = {}
    for d in log.decisions():
        key = (d.stage, d.plan_ref, d.outcome)
        logged[key] = logged.get(key, 0) + 1
    assert logged == dict(counter.outcomes)
    # records are written replicate by replicate
    order = [d.endpoint for d in log.decisions()]
    assert order == sorted(order, key=lambda e: int(e.split()[1]))


def write_csv(tmp_path: Path, columns: dict[str, list[np.ndarray]]) -> None:
    names = list(columns)
    lines = ["grp," + ",".join(names)]
    for i, lv in enumerate("abcd"):
        for r in range(8):
            lines.append(lv + "," + ",".join(repr(float(columns[c][i][r])) for c in names))
    (tmp_path / "d.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


def run_csv(tmp_path: Path, loaded):
    plan = loaded.model
    d = plan.data
    spec = DataSpec(file=loaded.data_path, group=d.group, responses=tuple(d.response),
                    levels=tuple(d.levels), min_n=d.min_n, missing=d.missing)
    data = check_data(spec, read_table(spec))
    log = DecisionLog()
    log.start(plan_file="p", plan_sha256="a" * 64, plan_raw_sha256="b" * 64, data_file="d",
              data_sha256="c" * 64, time_utc="2027-01-01T00:00:00Z", operator={},
              command=["t"], software={})
    return analyse(plan, data, LogRecorder(log, list(data.responses))), log, data


@pytest.mark.parametrize("method", ["holm", "benjamini_hochberg"])
def test_across_endpoints_matches_statsmodels(tmp_path, method):
    from statsmodels.stats.multitest import multipletests

    sims = [simulate(1, seed=s) for s in (11, 12, 13, 14)]
    columns = {f"y{i}": [g[0] for g in sim] for i, sim in enumerate(sims)}
    write_csv(tmp_path, columns)
    loaded = load(tmp_path, "[y0, y1, y2, y3]", method)
    analysis, log, data = run_csv(tmp_path, loaded)
    assert len(data.batches()) == 1                     # one complete-case pattern: one batch
    raw = np.array([e["omnibus"]["pvalue"] for e in analysis.endpoints])
    # statsmodels' multipletests with the method named explicitly (its default is Holm-Sidak)
    sm = {"holm": "holm", "benjamini_hochberg": "fdr_bh"}[method]
    reject, expected, _, _ = multipletests(raw, alpha=0.05, method=sm)
    got = np.array([e["across_endpoints"]["p_adjusted"] for e in analysis.endpoints])
    np.testing.assert_allclose(got, expected, rtol=1e-14)
    assert [e["across_endpoints"]["significant"] for e in analysis.endpoints] == list(reject)
    assert analysis.across_endpoints["method"] == method
    recs = [d for d in log.decisions() if d.stage == "across_endpoints"]
    assert [d.endpoint for d in recs] == ["y0", "y1", "y2", "y3"]
    # each endpoint's records come together, the adjustment last
    ends = [d.endpoint for d in log.decisions()]
    assert ends == sorted(ends)


def test_adjust_across_small_cases():
    # Holm (1979) by hand: p = (0.01, 0.04, 0.03), m = 3 -> (0.03, 0.06, 0.06)
    np.testing.assert_allclose(adjust_across(np.array([0.01, 0.04, 0.03]), "holm"),
                               [0.03, 0.06, 0.06])
    # Benjamini-Hochberg (1995) by hand: (0.01, 0.04, 0.03) -> (0.03, 0.04, 0.04)
    np.testing.assert_allclose(adjust_across(np.array([0.01, 0.04, 0.03]),
                                             "benjamini_hochberg"), [0.03, 0.04, 0.04])


def test_endpoints_with_different_patterns_run_separately(tmp_path):
    sims = [simulate(1, seed=s) for s in (21, 22)]
    columns = {f"y{i}": [g[0] for g in sim] for i, sim in enumerate(sims)}
    write_csv(tmp_path, columns)
    text = (tmp_path / "d.csv").read_text().splitlines()
    text[3] = text[3].rsplit(",", 1)[0] + ","           # one missing y1 value
    (tmp_path / "d.csv").write_text("\n".join(text) + "\n")
    p = tmp_path / "plan.yaml"
    p.write_text(PLAN.replace("RESPONSE", "[y0, y1]").replace("ACROSS", "holm")
                 .replace("levels: [a, b, c, d]}", "levels: [a, b, c, d], missing: drop}"))
    analysis, _, data = run_csv(tmp_path, load_plan(p))
    assert len(data.batches()) == 2
    assert [e["endpoint"] for e in analysis.endpoints] == ["y0", "y1"]
    assert analysis.endpoints[1]["groups"][0]["n"] == 7
    assert analysis.endpoints[1]["groups"][0]["n_missing"] == 1
