"""The engine's results against direct computations with reference libraries and NIST.

Each check runs the real pieces (a plan YAML loaded by planrunner.plan.load, a CSV read and
checked by planrunner.data, the engine with a LogRecorder) and compares what the engine
reports with a direct computation on the same transformed values:

* classic F: scipy.stats.f_oneway;
* Welch: scipy.stats.f_oneway(..., equal_var=False);
* Kruskal-Wallis: scipy.stats.kruskal;
* Tukey-Kramer: scipy.stats.tukey_hsd (scipy's ``statistic[i, j]`` is mean_i - mean_j, the
  same sign as ours, a - b in level order; checked below on the differences themselves);
* NIST StRD SmLs07 (certified values, 15 significant digits; data copied into
  tests/reference/data/nist_strd_anova) through the engine with exact decimal reading.
"""

from __future__ import annotations

import json
import math
import textwrap
from decimal import Decimal, getcontext
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from planrunner.audit.log import DecisionLog
from planrunner.data import DataSpec, check_data, read_table
from planrunner.engine import LogRecorder, analyse
from planrunner.plan.load import load_plan

NIST = Path(__file__).parent / "data" / "nist_strd_anova"
LEVELS = ("a", "b", "c", "d")
Z = np.random.default_rng(99).standard_normal((4, 9))


def run(tmp_path: Path, body: str, groups, levels=LEVELS, csv: Path | None = None,
        group_col: str = "grp", response: str = "y"):
    if csv is None:
        lines = [f"{group_col},{response}"]
        for lv, g in zip(levels, groups):
            lines += [f"{lv},{float(v)!r}" for v in g]
        csv = tmp_path / "d.csv"
        csv.write_text("\n".join(lines) + "\n", encoding="utf-8")
    head = textwrap.dedent(f"""\
        planrunner: 1
        id: ref-test
        title: Reference test
        question: Do the group means differ?
        data: {{file: {csv.as_posix()}, group: {group_col}, response: {response},
                levels: [{', '.join(repr(str(lv)) for lv in levels)}]}}
        """)
    (tmp_path / "plan.yaml").write_text(head + textwrap.dedent(body), encoding="utf-8")
    loaded = load_plan(tmp_path / "plan.yaml")
    d = loaded.model.data
    spec = DataSpec(file=loaded.data_path, group=d.group, responses=tuple(d.response),
                    levels=tuple(d.levels), min_n=d.min_n)
    data = check_data(spec, read_table(spec))
    log = DecisionLog()
    log.start(plan_file="plan.yaml", plan_sha256="a" * 64, plan_raw_sha256="b" * 64,
              data_file="d.csv", data_sha256="c" * 64, time_utc="2027-01-01T00:00:00Z",
              operator={}, command=["t"], software={})
    return analyse(loaded.model, data, LogRecorder(log, list(data.responses))).endpoints[0]


SQRT_LADDER = """\
hypotheses: {family: all_pairs}
omnibus: classic
variance_check: {method: hartley_fmax, role: gate}
transform: {policy: ladder, ladder: [identity, sqrt, log10]}
comparisons: {method: tukey_kramer}
effect_sizes: [eta_squared, omega_squared]
"""


def test_classic_and_tukey_on_the_sqrt_scale(tmp_path):
    # sqrt(y) = m_i + 0.6 z: equal spread on the sqrt scale, very unequal on the original
    groups = [(m + 0.6 * z) ** 2 for m, z in zip((4.0, 8.0, 16.0, 32.0), Z)]
    ep = run(tmp_path, SQRT_LADDER, groups)
    assert ep["analysis_scale"] == "sqrt"
    roots = [np.sqrt(g) for g in groups]
    ref = stats.f_oneway(*roots)                        # scipy.stats.f_oneway
    assert ep["omnibus"]["statistic"] == pytest.approx(ref.statistic, rel=1e-12)
    assert ep["omnibus"]["pvalue"] == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-300)
    hsd = stats.tukey_hsd(*roots)                       # scipy.stats.tukey_hsd
    ci = hsd.confidence_interval(confidence_level=0.95)
    for pair in ep["comparisons"]["pairs"]:
        a, b = LEVELS.index(pair["a"]), LEVELS.index(pair["b"])
        assert pair["difference"] == pytest.approx(hsd.statistic[a, b], rel=1e-12)
        assert pair["difference"] == pytest.approx(roots[a].mean() - roots[b].mean(), rel=1e-12)
        assert pair["p_adjusted"] == pytest.approx(hsd.pvalue[a, b], rel=1e-5, abs=1e-9)
        assert pair["ci"][0] == pytest.approx(ci.low[a, b], rel=1e-6)
        assert pair["ci"][1] == pytest.approx(ci.high[a, b], rel=1e-6)
        assert pair["back_transformed"]["kind"] == "none"
    # eta squared = SS_between / SS_total of the sqrt values (definition)
    eta = next(e for e in ep["effect_sizes"] if e["name"] == "eta_squared")
    allv = np.concatenate(roots)
    ssb = sum(len(r) * (r.mean() - allv.mean()) ** 2 for r in roots)
    assert eta["estimate"] == pytest.approx(ssb / ((allv - allv.mean()) ** 2).sum(), rel=1e-12)
    # group estimates back-transformed with the inverse of sqrt: (mean of sqrt values)^2
    for g, r in zip(ep["groups"], roots):
        assert g["analysis"]["mean"] == pytest.approx(r.mean(), rel=1e-13)
        assert g["back_transformed"]["estimate"] == pytest.approx(r.mean() ** 2, rel=1e-12)


UNEQUAL = """\
hypotheses: {family: all_pairs}
omnibus: classic
variance_check: {method: levene_median, role: gate}
when_variances_differ: FALLBACK
comparisons: {method: games_howell}
"""


def unequal_groups():
    # one group with twenty times the spread: Levene's p is far below 0.05
    return [10.0 + i + (20.0 if i == 3 else 1.0) * z for i, z in enumerate(Z)]


def test_welch_fallback_matches_scipy(tmp_path):
    groups = unequal_groups()
    ep = run(tmp_path, UNEQUAL.replace("FALLBACK", "welch"), groups)
    assert ep["checks"][0]["passed"] is False
    lev = stats.levene(*groups, center="median")        # scipy.stats.levene
    assert ep["checks"][0]["pvalue"] == pytest.approx(lev.pvalue, rel=1e-9)
    ref = stats.f_oneway(*groups, equal_var=False)      # scipy.stats.f_oneway, Welch
    assert ep["omnibus"]["method"] == "welch"
    assert ep["omnibus"]["statistic"] == pytest.approx(ref.statistic, rel=1e-12)
    assert ep["omnibus"]["pvalue"] == pytest.approx(ref.pvalue, rel=1e-9)


def test_kruskal_wallis_fallback_matches_scipy(tmp_path):
    groups = unequal_groups()
    body = UNEQUAL.replace("FALLBACK", "kruskal_wallis")
    ep = run(tmp_path, body, groups)
    ref = stats.kruskal(*groups)                        # scipy.stats.kruskal
    assert ep["omnibus"]["method"] == "kruskal_wallis"
    assert ep["omnibus"]["statistic"] == pytest.approx(ref.statistic, rel=1e-12)
    assert ep["omnibus"]["pvalue"] == pytest.approx(ref.pvalue, rel=1e-10)


def test_fixed_log_geometric_means_match_direct_computation(tmp_path):
    groups = [np.exp(m + 0.3 * z) for m, z in zip((1.0, 1.5, 2.0, 2.2), Z)]
    body = """\
        hypotheses: {family: all_pairs}
        compare: geometric_means
        omnibus: welch
        transform: {policy: fixed, transform: log}
        comparisons: {method: games_howell}
        """
    ep = run(tmp_path, textwrap.dedent(body), groups)
    logs = [np.log(g) for g in groups]
    ref = stats.f_oneway(*logs, equal_var=False)        # scipy.stats.f_oneway, Welch
    assert ep["omnibus"]["statistic"] == pytest.approx(ref.statistic, rel=1e-12)
    for g, lg in zip(ep["groups"], logs):
        # geometric mean = exp(mean(log y)) = scipy.stats.gmean
        assert g["back_transformed"]["estimate"] == pytest.approx(stats.gmean(np.exp(lg)),
                                                                  rel=1e-12)
        # t interval of the mean log, back-transformed (exp is increasing)
        half = stats.t.ppf(0.975, len(lg) - 1) * lg.std(ddof=1) / math.sqrt(len(lg))
        assert g["back_transformed"]["ci"][0] == pytest.approx(math.exp(lg.mean() - half),
                                                               rel=1e-10)
    pair = ep["comparisons"]["pairs"][0]                # a - b on the log scale -> ratio a/b
    assert pair["back_transformed"]["kind"] == "ratio"
    assert pair["back_transformed"]["estimate"] == pytest.approx(
        stats.gmean(groups[0]) / stats.gmean(groups[1]), rel=1e-12)


def lre(x: float, c: float) -> float:
    """Log relative error, capped at 15 (NIST StRD convention)."""
    if x == c:
        return 15.0
    return max(0.0, min(15.0, -math.log10(abs(x - c) / abs(c))))


@pytest.mark.parametrize("name", ["SmLs07", "SmLs08", "SmLs09"])
def test_nist_hard_sets_through_the_engine(tmp_path, name):
    cert_all = json.loads((NIST / f"{name}.certified.json").read_text(encoding="utf-8"))
    cert = {k: float(v) for k, v in cert_all["certified"].items()}
    levels = tuple(sorted(cert_all["group_sizes"], key=int))
    body = """\
        hypotheses: {family: omnibus}
        omnibus: classic
        comparisons: {method: none}
        effect_sizes: []
        """
    ep = run(tmp_path, textwrap.dedent(body), None, levels=levels, csv=NIST / f"{name}.csv",
             group_col="group", response="response")
    o = ep["omnibus"]
    for key, field in (("F", "statistic"), ("ss_between", "ss_between"),
                       ("ss_within", "ss_within"), ("ms_between", "ms_between"),
                       ("ms_within", "ms_within"), ("r_squared", "r_squared"),
                       ("residual_sd", "residual_sd")):
        # NIST StRD ANOVA certified values (15 significant digits)
        assert lre(o[field], cert[key]) >= 13, (name, key, o[field], cert[key])
    # group means: exact decimal means of the CSV text, against the engine's restored means
    getcontext().prec = 60
    text = (NIST / f"{name}.csv").read_text(encoding="utf-8").splitlines()[1:]
    for g in ep["groups"]:
        vals = [Decimal(line.split(",")[1]) for line in text if line.split(",")[0] == g["level"]]
        exact = float(sum(vals) / len(vals))
        assert lre(g["original"]["mean"], exact) >= 13
