"""Write the invented example data in plans/data/ (deterministic: fixed seeds).

Every data set here is made up for demonstrations; none comes from a real study. Run from
anywhere:

    python plans/make_data.py

Each file is produced by its own generator seeded with a fixed number, so changing one data
set leaves the others byte-identical.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent / "data"


def _write(name: str, header: list[str], rows: list[list[object]]) -> None:
    HERE.mkdir(parents=True, exist_ok=True)
    with open(HERE / name, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)


def _lognormal(rng: np.random.Generator, mean: float, cv: float, size: int) -> np.ndarray:
    # arithmetic mean and coefficient of variation -> parameters of log(x)
    sigma2 = math.log1p(cv * cv)
    return rng.lognormal(math.log(mean) - sigma2 / 2, math.sqrt(sigma2), size)


def hatchery_vibrio_counts() -> None:
    """Vibrio colonies per plate from shrimp larval tanks under four probiotic regimes."""
    rng = np.random.default_rng(20270101)
    means = {"none": 240.0, "bacillus_low": 150.0, "bacillus_high": 90.0, "lactobacillus": 130.0}
    dispersion = 0.15  # variance = mean + dispersion * mean**2
    rows, tank = [], 0
    for regime, mu in means.items():
        size = 1.0 / dispersion
        for count in rng.negative_binomial(size, size / (size + mu), 6):
            tank += 1
            rows.append([f"T{tank:02d}", regime, int(count)])
    _write("hatchery-vibrio-counts.csv", ["tank", "regime", "vibrio_cfu"], rows)


def seed_priming_germination() -> None:
    """Fraction of 50 seeds germinated per dish after four priming treatments."""
    rng = np.random.default_rng(20270202)
    probabilities = {"unprimed": 0.70, "hydro": 0.76, "kno3": 0.84, "peg": 0.80}
    rows, dish = [], 0
    for treatment, p in probabilities.items():
        for germinated in rng.binomial(50, p, 8):
            dish += 1
            rows.append([f"D{dish:02d}", treatment, f"{germinated / 50:.2f}"])
    _write("seed-priming-germination.csv", ["dish", "treatment", "germinated_fraction"], rows)


def tablet_coating_thickness() -> None:
    """Film-coat thickness of one tablet per pan load, current spray setting and three new."""
    rng = np.random.default_rng(20270303)
    means = {"current": 62.0, "setting_a": 63.5, "setting_b": 59.0, "setting_c": 62.5}
    rows, load = [], 0
    for setting, mu in means.items():
        for value in rng.normal(mu, 2.4, 8):
            load += 1
            rows.append([f"P{load:03d}", setting, f"{value:.1f}"])
    _write("tablet-coating-thickness.csv", ["pan_load", "setting", "thickness_um"], rows)


def soil_remediation_metals() -> None:
    """Lead, zinc and cadmium in soil cores from plots under four remediation methods."""
    rng = np.random.default_rng(20270404)
    methods = {
        #                lead   zinc  cadmium (arithmetic means, mg/kg)
        "untreated": (420.0, 610.0, 1.10),
        "phytoextraction": (350.0, 470.0, 0.70),
        "soil_washing": (210.0, 330.0, 0.40),
        "stabilisation": (400.0, 580.0, 0.95),
    }
    limit = 0.2  # reporting limit for cadmium
    rows, core = [], 0
    for method, (lead, zinc, cadmium) in methods.items():
        pb = _lognormal(rng, lead, 0.45, 6)
        zn = _lognormal(rng, zinc, 0.40, 6)
        cd = _lognormal(rng, cadmium, 0.80, 6)
        for i in range(6):
            core += 1
            cd_text = f"<{limit:g}" if cd[i] < limit else f"{cd[i]:.2f}"
            rows.append([f"C{core:02d}", method, f"{pb[i]:.0f}", f"{zn[i]:.0f}", cd_text])
    _write(
        "soil-remediation-metals.csv",
        ["core", "method", "lead_mg_kg", "zinc_mg_kg", "cadmium_mg_kg"],
        rows,
    )


def trout_feed_additive() -> None:
    """Weight gain per tank of rainbow trout fed four doses of a feed additive for 8 weeks."""
    rng = np.random.default_rng(20270505)
    groups = {"dose_0": (182.0, 9.0), "dose_0.5": (188.0, 10.0), "dose_1": (195.0, 12.0),
              "dose_2": (193.0, 20.0)}
    rows, tank = [], 0
    for diet, (mu, sd) in groups.items():
        for value in rng.normal(mu, sd, 5):
            tank += 1
            rows.append([f"R{tank:02d}", diet, f"{value:.1f}"])
    _write("trout-feed-additive.csv", ["tank", "diet", "weight_gain_g"], rows)


def compost_heating_time() -> None:
    """Hours for a compost windrow to reach 55 °C under four aeration schedules.

    The spread grows faster than the mean (about as the mean to the power 1.5), which a
    Box-Cox power near -0.5 evens out: values are drawn as y = (1 + lam x)^(1/lam), lam =
    -0.5, with x normal on that scale.
    """
    rng = np.random.default_rng(20270609)
    lam = -0.5
    medians = {"passive": 62.0, "turned_weekly": 44.0, "forced_low": 36.0, "forced_high": 30.0}
    rows, pile = [], 0
    for schedule, median in medians.items():
        centre = (median ** lam - 1.0) / lam
        for x in rng.normal(centre, 0.036, 10):
            pile += 1
            rows.append([f"W{pile:02d}", schedule, f"{(1.0 + lam * x) ** (1.0 / lam):.1f}"])
    _write("compost-heating-time.csv", ["windrow", "aeration", "hours_to_55c"], rows)


def main() -> None:
    hatchery_vibrio_counts()
    seed_priming_germination()
    tablet_coating_thickness()
    soil_remediation_metals()
    trout_feed_additive()
    compost_heating_time()


if __name__ == "__main__":
    main()
