"""Plain-language pieces of the decision records: names of methods and scales, numbers.

The sentences themselves are assembled in :mod:`planrunner.engine.stages`, next to the choice
they explain; this module keeps the wording of names and numbers in one place so every record
says the same thing the same way.
"""

from __future__ import annotations

import numpy as np

import math

__all__ = [
    "CHECK_NAMES",
    "COMPARISON_NAMES",
    "OMNIBUS_NAMES",
    "compared_words",
    "fmt",
    "fmt_p",
    "join",
    "scale_words",
]

CHECK_NAMES = {
    "hartley_fmax": "Hartley's Fmax",
    "levene_median": "Levene's test (median-centred)",
    "levene_mean": "Levene's test (mean-centred)",
    "bartlett": "Bartlett's test",
    "fligner_killeen": "the Fligner-Killeen test",
    "shapiro_wilk": "Shapiro-Wilk",
}
OMNIBUS_NAMES = {
    "classic": "the classic one-way ANOVA",
    "welch": "Welch's ANOVA",
    "kruskal_wallis": "the Kruskal-Wallis test",
}
COMPARISON_NAMES = {
    "tukey_kramer": "Tukey-Kramer",
    "games_howell": "Games-Howell",
    "pairwise_t": "pairwise t tests",
    "dunnett": "Dunnett's comparisons with the control",
    "none": "no comparisons",
}
_SCALE_WORDS = {
    "identity": "the original scale",
    "sqrt": "the square-root scale",
    "log": "the natural-log scale",
    "log10": "the log10 scale",
    "reciprocal": "the reciprocal scale",
    "arcsine_sqrt": "the arcsine-square-root scale",
    "ranks": "ranks",
}
_COMPARED_WORDS = {
    "means": "means",
    "geometric_means": "geometric means",
    "locations": "rank-based locations",
}


def fmt(x: float | None, digits: int = 3) -> str:
    """A number for a sentence: ``digits`` significant digits, no exponent for ordinary sizes."""
    if x is None or not math.isfinite(float(x)):
        return "not computable"
    x = float(x)
    if x == 0:
        return "0"
    if x == int(x) and abs(x) < 1e6:
        return str(int(x))
    text = f"{x:.{digits}g}"
    if "e" in text and 1e-4 <= abs(x) < 1e7:
        text = f"{x:.{max(digits - int(math.floor(math.log10(abs(x)))) - 1, 0)}f}"
    return text


def fmt_p(p: float | None) -> str:
    """``p = 0.0123`` or ``p < 0.0001``."""
    if p is None or not math.isfinite(float(p)):
        return "p not computable"
    p = float(p)
    if p < 1e-4:
        return "p < 0.0001"
    return f"p = {fmt(p, 2) if p < 0.001 else fmt(p, 3)}"


def scale_words(name: str, lmbda: float | None = None) -> str:
    """``"the log10 scale"``, ``"the Box-Cox scale with lambda = -0.5"``."""
    if name.startswith("boxcox"):
        if lmbda is None or not np.isfinite(lmbda):
            return "the Box-Cox scale"
        return f"the Box-Cox scale with lambda = {fmt(lmbda)}"
    return _SCALE_WORDS.get(name, f"the {name} scale")


def compared_words(compared: str) -> str:
    return _COMPARED_WORDS.get(compared, compared.replace("_", " "))


def join(words: list[str], last: str = "and") -> str:
    if len(words) <= 1:
        return "".join(words)
    return ", ".join(words[:-1]) + f" {last} " + words[-1]
