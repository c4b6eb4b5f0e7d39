"""Rehearsal: simulation, the rehearsal driver and the files it writes.

The simulated distributions are checked against their textbook moments (each formula named
beside its check); the driver against its own promises: determinism, independence from the
chunk size, scenarios that do not disturb each other, degenerate replicates counted, progress
reported, and every example plan rehearsing.
"""

from __future__ import annotations

import copy
import json
import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import yaml

from planrunner.engine.rehearse import (
    BLOCK,
    REHEARSAL_FORMAT,
    rehearse_plan,
    rehearse_scenario,
    search_sample_size,
    simulate,
)
from planrunner.errors import PlanError
from planrunner.plan.load import load_plan_bytes

PLANS_DIR = Path(__file__).resolve().parents[2] / "plans"

_BASE: dict[str, Any] = {
    "planrunner": 1,
    "id": "rehearse-demo",
    "title": "Rehearsal demo",
    "question": "Do the group means differ?",
    "hypotheses": {"family": "all_pairs"},
    "data": {"file": "data/demo.csv", "group": "grp", "response": "y",
             "levels": ["a", "b", "c"]},
    "omnibus": "classic",
    "comparisons": {"method": "tukey_kramer", "only_after_significant_omnibus": True},
    "sample_size": {"justification": "Demo only."},
    "rehearsal": {"replicates": 200, "seed": 5, "scenarios": [
        {"name": "null", "distribution": "normal", "means": [10, 10, 10], "sd": 2, "n": 6},
        {"name": "shift", "distribution": "normal", "means": [10, 11, 13], "sd": 2, "n": 6},
    ]},
}


def _plan(**changes: Any) -> Any:
    d = copy.deepcopy(_BASE)
    for key, value in changes.items():
        if key == "data":
            d["data"].update(value)
        else:
            d[key] = value
    return load_plan_bytes(yaml.safe_dump(d, sort_keys=False).encode("utf-8"))


def _scenario(model: Any, name: str) -> Any:
    return next(s for s in model.rehearsal.scenarios if s.name == name)


# --------------------------------------------------------------------------------------------
# simulation

_ALL_SIX = [
    {"name": "s-normal", "distribution": "normal", "means": [5, 7, 9], "sd": [1, 2, 3], "n": 4},
    {"name": "s-lognormal", "distribution": "lognormal", "means": [50, 80, 120], "cv": 0.6,
     "n": 4},
    {"name": "s-gamma", "distribution": "gamma", "means": [3, 4, 5], "cv": [0.3, 0.5, 0.8],
     "n": 4},
    {"name": "s-poisson", "distribution": "poisson", "means": [2, 20, 200], "n": 4},
    {"name": "s-nb", "distribution": "negative_binomial", "means": [5, 50, 500],
     "dispersion": 0.3, "n": 4},
    {"name": "s-binomial", "distribution": "binomial", "means": [0.2, 0.5, 0.9],
     "trials": [10, 20, 40], "n": 4},
]


def _six() -> list[Any]:
    scen = copy.deepcopy(_ALL_SIX)
    plain = _plan(rehearsal={"replicates": 100, "seed": 3, "scenarios": scen[:5]})
    prop = _plan(data={"response_kind": "proportion"},
                 rehearsal={"replicates": 100, "seed": 3, "scenarios": scen[5:]})
    return list(plain.model.rehearsal.scenarios) + list(prop.model.rehearsal.scenarios)


@pytest.mark.parametrize("index", range(6))
def test_fewer_values_per_group_are_a_prefix_of_more(index: int) -> None:
    # common random numbers across group sizes: the first n values do not depend on n
    s = _six()[index]
    small = simulate(s, 11, 0, 700, n=(3, 2, 5))
    large = simulate(s, 11, 0, 700, n=(9, 7, 12))
    for a, b in zip(small, large):
        assert a.shape[0] == 700
        np.testing.assert_array_equal(a, b[:, : a.shape[1]])


@pytest.mark.parametrize("index", range(6))
def test_any_replicate_range_is_a_slice_of_the_whole(index: int) -> None:
    s = _six()[index]
    whole = simulate(s, 2, 0, 1300)
    part = simulate(s, 2, 480, 1010)
    for w, p in zip(whole, part):
        np.testing.assert_array_equal(w[480:1010], p)


def _moments(s: Any, i: int) -> tuple[float, float]:
    """Theoretical mean and variance of group i (formula beside each case)."""
    m = float(s.means[i])

    def per(v: Any) -> float:
        return float(v[i] if isinstance(v, list) else v)

    if s.distribution == "normal":
        return m, per(s.sd) ** 2
    if s.distribution in ("lognormal", "gamma"):
        return m, (per(s.cv) * m) ** 2                 # CV = sd / mean, both distributions
    if s.distribution == "poisson":
        return m, m                                     # Poisson: variance = mean
    if s.distribution == "negative_binomial":
        return m, m + per(s.dispersion) * m * m         # NB2: variance = mean + d mean^2
    t = per(s.trials)
    return m, m * (1 - m) / t                           # proportion of t trials: p(1-p)/t


@pytest.mark.parametrize("index", range(6))
def test_simulated_moments_match_the_scenario(index: int) -> None:
    # Moments of the textbook parametrisations (Johnson, Kotz & Kemp, Univariate Discrete
    # Distributions; Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions):
    # lognormal sigma^2 = log(1 + cv^2), mu = log(mean) - sigma^2/2; gamma shape 1/cv^2,
    # scale mean cv^2; NB variance mean + d mean^2.
    s = _six()[index]
    groups = simulate(s, 99, 0, 40_000, n=(5, 5, 5))
    for i, g in enumerate(groups):
        x = g.ravel()
        mean, var = _moments(s, i)
        se_mean = math.sqrt(var / x.size)
        assert abs(x.mean() - mean) < 5 * se_mean
        # the sample variance of 200,000 values is within 6% of the truth for these shapes
        assert x.var(ddof=1) == pytest.approx(var, rel=0.06)
    if s.distribution in ("poisson", "negative_binomial"):
        assert all(np.all(g == np.round(g)) for g in groups)
    if s.distribution == "binomial":
        assert all(np.all((g >= 0) & (g <= 1)) for g in groups)


# --------------------------------------------------------------------------------------------
# the driver


def test_chunk_size_does_not_change_the_results() -> None:
    loaded = _plan(variance_check={"method": "levene_median", "alpha": 0.05, "role": "gate"},
                   transform={"policy": "ladder", "ladder": ["identity", "sqrt", "log10"]})
    s = _scenario(loaded.model, "shift")
    ref = rehearse_scenario(loaded.model, s, seed=4, replicates=1100, chunk=2000)
    for chunk in (BLOCK, 300, 1000):
        assert rehearse_scenario(loaded.model, s, seed=4, replicates=1100, chunk=chunk) == ref


def test_same_seed_gives_identical_files(tmp_path: Path) -> None:
    loaded = _plan()
    a = rehearse_plan(loaded, out=tmp_path / "a", replicates=300)
    b = rehearse_plan(loaded, out=tmp_path / "b", replicates=300)
    for name in a.files:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    c = rehearse_plan(loaded, out=tmp_path / "c", replicates=300, seed=6)
    assert (tmp_path / "c" / "rehearsal.json").read_bytes() != (
        tmp_path / "a" / "rehearsal.json").read_bytes()
    doc = json.loads((tmp_path / "a" / "rehearsal.json").read_text("utf-8"))
    assert doc["format"] == REHEARSAL_FORMAT
    assert doc["plan_fingerprint"] == loaded.fingerprints.plan
    assert doc["seed"] == 5 and doc["replicates"] == 300
    assert list(doc) == sorted(doc)          # keys sorted at the top level
    text = (tmp_path / "a" / "rehearsal.json").read_text("utf-8")
    assert not re.search(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}", text)      # no timestamps


def test_adding_a_scenario_leaves_the_others_unchanged() -> None:
    one = _plan()
    scen = copy.deepcopy(_BASE["rehearsal"]["scenarios"])
    scen.insert(1, {"name": "extra", "distribution": "normal", "means": [9, 10, 12],
                    "sd": [1, 2, 3], "n": [5, 6, 7]})
    two = _plan(rehearsal={"replicates": 200, "seed": 5, "scenarios": scen})
    for name in ("null", "shift"):
        a = rehearse_scenario(one.model, _scenario(one.model, name), seed=5, replicates=400)
        b = rehearse_scenario(two.model, _scenario(two.model, name), seed=5, replicates=400)
        assert a == b


def test_rates_are_shares_of_all_replicates_with_their_standard_errors() -> None:
    loaded = _plan(variance_check={"method": "levene_median", "alpha": 0.05, "role": "gate"},
                   when_variances_differ="welch")
    s = _scenario(loaded.model, "shift")
    res = rehearse_scenario(loaded.model, s, seed=1, replicates=600)
    assert sum(p["count"] for p in res["paths"]) == 600
    assert {p["label"] for p in res["paths"]} <= {"identity / classic", "identity / welch"}
    om = res["omnibus"]
    assert om["rate"] == om["count"] / 600
    assert om["se"] == pytest.approx(math.sqrt(om["rate"] * (1 - om["rate"]) / 600))
    assert om["measures"] == "power"
    fu = res["follow_ups"]
    assert [(p["a"], p["b"]) for p in fu["pairs"]] == [("a", "b"), ("a", "c"), ("b", "c")]
    assert [p["true_difference"] for p in fu["pairs"]] == [-1.0, -3.0, -2.0]
    assert fu["familywise_error_truly_null"] is None            # no truly null pair here
    # the comparisons run only after a significant omnibus test
    assert fu["performed"]["count"] == om["count"]
    assert fu["any_significant"]["count"] <= om["count"]
    checks = [d for d in res["decisions"] if d["stage"] == "check_assumptions"]
    assert sum(d["count"] for d in checks) == 600


def test_truly_null_pairs_among_unequal_means() -> None:
    loaded = _plan(rehearsal={"replicates": 200, "seed": 5, "scenarios": [
        {"name": "one differs", "distribution": "normal", "means": [10, 10, 14], "sd": 2,
         "n": 6}]})
    res = rehearse_scenario(loaded.model, loaded.model.rehearsal.scenarios[0], seed=5,
                            replicates=500)
    fu = res["follow_ups"]
    assert [p["truly_null"] for p in fu["pairs"]] == [True, False, False]
    assert fu["truly_null_pairs"] == 1
    assert fu["familywise_error_truly_null"]["count"] == fu["pairs"][0]["count"]


@pytest.mark.parametrize("rule, status", [("halt", "halted"), ("reject", "rejected")])
def test_degenerate_replicates_are_counted_not_dropped(rule: str, status: str) -> None:
    # Poisson counts with mean 0.15 in groups of 3: a group of all zeros is common
    # (P = exp(-0.45) = 0.64 per group), and such a replicate is degenerate.
    loaded = _plan(data={"response_kind": "count", "min_n": 3, "degenerate_groups": rule},
                   rehearsal={"replicates": 100, "seed": 1, "scenarios": [
                       {"name": "rare", "distribution": "poisson", "means": [0.15, 0.15, 3],
                        "n": 3}]})
    res = rehearse_scenario(loaded.model, loaded.model.rehearsal.scenarios[0], seed=1,
                            replicates=400)
    assert sum(p["count"] for p in res["paths"]) == 400
    stopped = res["status"][status]["count"]
    assert stopped > 0
    assert res["degenerate"]["count"] == stopped
    assert {p["label"]: p["count"] for p in res["paths"]}[status] == stopped
    assert res["status"]["completed"]["count"] + stopped == 400
    # a stopped replicate never counts as a rejection of the null
    assert res["omnibus"]["count"] <= 400 - stopped


def test_progress_is_reported_per_chunk(tmp_path: Path) -> None:
    calls: list[tuple[int, int]] = []
    out = rehearse_plan(_plan(), out=tmp_path, replicates=1200, chunk=500,
                        progress=lambda done, total: calls.append((done, total)))
    assert calls[0] == (0, 2400)
    assert calls[-1] == (2400, 2400)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    assert len(calls) == 1 + 2 * 3                     # chunks of 500, 500, 200 per scenario
    assert out.exit_code == 0


def test_one_scenario_and_summary(tmp_path: Path) -> None:
    out = rehearse_plan(_plan(), out=tmp_path, replicates=200, scenario="shift")
    assert [s["name"] for s in out.scenarios] == ["shift"]
    text = out.summary()
    assert "scenario 'shift'" in text and "omnibus rejects (power)" in text
    assert "identity / classic" in text
    assert str(tmp_path) in text


def test_written_files(tmp_path: Path) -> None:
    out = rehearse_plan(_plan(), out=tmp_path, replicates=200)
    assert out.files == ("rehearsal.json", "rehearsal.md", "rehearsal.html")
    html = (tmp_path / "rehearsal.html").read_text("utf-8")
    assert html.count("<svg") == 1 and "<style>" in html
    assert "<script" not in html and "http://" not in html.replace(
        'xmlns="http://www.w3.org/2000/svg"', "").replace(
        'xmlns:xlink="http://www.w3.org/1999/xlink"', "")
    assert "Date" not in html.split("<svg", 1)[1].split(">", 1)[0]
    md = (tmp_path / "rehearsal.md").read_text("utf-8")
    assert "| null |" in md and "| shift |" in md
    assert "Rehearsal demo" in md


def test_html_escapes_scenario_names(tmp_path: Path) -> None:
    loaded = _plan(rehearsal={"replicates": 100, "seed": 5, "scenarios": [
        {"name": "a <b> & c | d", "distribution": "normal", "means": [1, 1, 1], "sd": 1,
         "n": 4}]})
    rehearse_plan(loaded, out=tmp_path, replicates=100)
    html = (tmp_path / "rehearsal.html").read_text("utf-8")
    assert "a <b>" not in html and "a &lt;b&gt; &amp; c" in html
    assert "a <b> & c \\| d" in (tmp_path / "rehearsal.md").read_text("utf-8")


def test_unequal_cv_null_is_explained() -> None:
    loaded = _plan(rehearsal={"replicates": 100, "seed": 5, "scenarios": [
        {"name": "cv differs", "distribution": "lognormal", "means": [40, 40, 40],
         "cv": [0.3, 0.6, 1.0], "n": 6}]})
    res = rehearse_scenario(loaded.model, loaded.model.rehearsal.scenarios[0], seed=5,
                            replicates=100)
    assert res["null"] is True
    assert any("still a null of equal means" in n for n in res["notes"])


@pytest.mark.parametrize("kwargs, words", [
    ({"scenario": "shfit"}, "did you mean 'shift'"),
    ({"target_power": 0.8, "scenario": "null"}, "equal means"),
    ({"target_power": 0.01, "scenario": "shift"}, "between alpha"),
    ({"replicates": 1}, "at least 2"),
    ({"seed": -1}, "seed"),
])
def test_misuse_is_a_plan_error(tmp_path: Path, kwargs: dict, words: str) -> None:
    with pytest.raises(PlanError, match=words):
        rehearse_plan(_plan(), out=tmp_path, **kwargs)
    assert not any(tmp_path.iterdir())


def test_target_power_needs_a_named_scenario_when_several_differ(tmp_path: Path) -> None:
    scen = copy.deepcopy(_BASE["rehearsal"]["scenarios"])
    scen.append({"name": "bigger", "distribution": "normal", "means": [10, 12, 15], "sd": 2,
                 "n": 6})
    loaded = _plan(rehearsal={"replicates": 100, "seed": 5, "scenarios": scen})
    with pytest.raises(PlanError, match="name the scenario"):
        rehearse_plan(loaded, out=tmp_path, target_power=0.8)


def test_a_plan_without_rehearsal_is_refused(tmp_path: Path) -> None:
    d = copy.deepcopy(_BASE)
    del d["rehearsal"]
    loaded = load_plan_bytes(yaml.safe_dump(d).encode("utf-8"))
    with pytest.raises(PlanError, match="no rehearsal section"):
        rehearse_plan(loaded, out=tmp_path)


# --------------------------------------------------------------------------------------------
# sample size


def test_sample_size_search_on_common_random_numbers() -> None:
    loaded = _plan()
    model = loaded.model
    s = _scenario(model, "shift")
    res = search_sample_size(model, s, 0.8, seed=5, replicates=1000)
    assert res["reached"]
    m = res["multiplier"]
    assert res["power"] >= 0.8
    assert res["power_one_less"] is not None and res["power_one_less"] < 0.8
    ns = [e["n"][0] for e in res["evaluations"]]
    assert ns == sorted(ns) and ns[0] == model.data.min_n        # doubling from the floor
    # the evaluation at the scenario's own n uses the scenario's own random numbers
    own = rehearse_scenario(model, s, seed=5, replicates=1000)
    at6 = next((e for e in res["evaluations"] if e["n"] == [6, 6, 6]), None)
    if at6 is None:
        at6 = search_sample_size(model, s, 0.999, seed=5, replicates=1000)["evaluations"]
        at6 = next(e for e in at6 if e["n"] == [6, 6, 6])
    assert at6["count"] == own["omnibus"]["count"]
    # no preliminary test, normal data, common sd: the noncentral-F answer is given beside
    # it, and 1,000 replicates land within one group size of it here
    ana = res["analytic"]
    assert ana is not None and ana["counterpart"] == "exact"
    assert abs(ana["multiplier"] - m) <= 1


def test_sample_size_keeps_a_per_level_allocation() -> None:
    loaded = _plan(rehearsal={"replicates": 100, "seed": 5, "scenarios": [
        {"name": "uneven", "distribution": "normal", "means": [10, 11, 13], "sd": 2,
         "n": [4, 4, 8]}]})
    model = loaded.model
    res = search_sample_size(model, model.rehearsal.scenarios[0], 0.8, seed=5,
                             replicates=600)
    assert res["allocation"] == [1, 1, 2] and res["planned_multiplier"] == 4
    assert res["n"] == [res["multiplier"], res["multiplier"], 2 * res["multiplier"]]
    assert all(e["n"][2] == 2 * e["n"][0] for e in res["evaluations"])


def test_target_power_through_the_api(tmp_path: Path) -> None:
    calls: list[tuple[int, int]] = []
    out = rehearse_plan(_plan(), out=tmp_path, replicates=300, target_power=0.8,
                        progress=lambda d, t: calls.append((d, t)))
    size = out.sample_size
    assert size is not None and size["scenario"] == "shift" and size["reached"]
    assert calls[-1][0] == calls[-1][1]
    assert "sample size for 'shift'" in out.summary()
    assert "Sample size for shift" in (tmp_path / "rehearsal.md").read_text("utf-8")


def test_no_analytic_figure_for_a_gated_plan() -> None:
    loaded = _plan(variance_check={"method": "levene_median", "alpha": 0.05, "role": "gate"})
    s = _scenario(loaded.model, "shift")
    res = rehearse_scenario(loaded.model, s, seed=5, replicates=100)
    assert res["analytic"] is None
    size = search_sample_size(loaded.model, s, 0.6, seed=5, replicates=200)
    assert size["analytic"] is None
    assert "preliminary check" in size["analytic_not_applicable"]


# --------------------------------------------------------------------------------------------
# every example plan


@pytest.mark.parametrize("path", sorted(PLANS_DIR.glob("*.yaml")), ids=lambda p: p.stem)
def test_every_example_plan_rehearses(path: Path, tmp_path: Path) -> None:
    out = rehearse_plan(path, out=tmp_path, replicates=100)
    assert out.exit_code == 0
    doc = json.loads((tmp_path / "rehearsal.json").read_text("utf-8"))
    assert doc["format"] == REHEARSAL_FORMAT
    assert len(doc["scenarios"]) == len(out.scenarios) >= 1
    for s in doc["scenarios"]:
        assert s["replicates"] == 100
        assert sum(p["count"] for p in s["paths"]) == 100
        assert 0.0 <= s["omnibus"]["rate"] <= 1.0
    assert (tmp_path / "rehearsal.html").stat().st_size > 0


def test_the_engine_decides_and_a_counting_recorder_counts(monkeypatch: pytest.MonkeyPatch
                                                           ) -> None:
    # one decision tree: the rehearsal sends every chunk through engine.run.decide_batch
    import planrunner.engine.rehearse as rehearse_module
    from planrunner.engine.record import CountingRecorder
    from planrunner.engine.run import decide_batch

    seen: list[tuple[int, type]] = []

    def spy(plan: Any, groups: Any, recorder: Any, **kw: Any) -> Any:
        seen.append((groups[0].shape[0], type(recorder)))
        return decide_batch(plan, groups, recorder, **kw)

    monkeypatch.setattr(rehearse_module, "decide_batch", spy)
    loaded = _plan()
    rehearse_scenario(loaded.model, _scenario(loaded.model, "null"), seed=5, replicates=1200,
                      chunk=500)
    assert seen == [(500, CountingRecorder), (500, CountingRecorder), (200, CountingRecorder)]
