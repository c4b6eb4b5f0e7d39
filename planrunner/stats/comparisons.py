"""Follow-up comparisons of group means: Tukey-Kramer, Games-Howell, pairwise t and Dunnett.

Every function takes k groups as separate arrays shaped ``(..., n_i)`` (the leading axes are
a batch of endpoints or simulated replicates) and returns one :class:`Comparisons` result
whose numeric fields are shaped ``(..., n_pairs)``.

Sign convention, used by every method here: for a pair ``(a, b)`` the reported
``difference`` is ``mean_a - mean_b``, with groups numbered in the order they were passed
(the plan's level order). All-pairs methods list the pairs as ``(0, 1), (0, 2), ...,
(k-2, k-1)``; Dunnett lists ``(i, control)`` for every ``i != control`` in increasing ``i``,
so its differences are *treatment minus control*.

The studentized-range and Dunnett probabilities come from :mod:`planrunner.stats.distributions`
(deterministic, vectorised) through the private ``_srange_*`` and ``_dunnett_*`` functions
below.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from ._core import InputError, Moments, as_groups, flag_cases, group_moments

__all__ = ["Comparisons", "dunnett", "games_howell", "pairwise_t", "tukey_kramer"]

_SQRT2 = np.sqrt(2.0)


# --------------------------------------------------------------------------------------------
# Distribution functions (private indirection over planrunner.stats.distributions)
# --------------------------------------------------------------------------------------------


def _srange_sf(q: np.ndarray, k: int, df: np.ndarray) -> np.ndarray:
    """Upper tail P(Q > q) of the studentized range for k means and df degrees of freedom."""
    from .distributions import studentized_range_sf

    return np.asarray(studentized_range_sf(q, k, df), dtype=np.float64)


def _srange_ppf(p: float, k: int, df: np.ndarray) -> np.ndarray:
    """Quantile of the studentized range: the q with P(Q <= q) = p."""
    from .distributions import studentized_range_ppf

    return np.asarray(studentized_range_ppf(p, k, df), dtype=np.float64)


def _dunnett_pvalues(
    t: np.ndarray, n_control: int, n_treatments: tuple[int, ...], df: float, alternative: str
) -> np.ndarray:
    """Single-step adjusted p-values of observed Dunnett statistics t (any shape)."""
    from .distributions import dunnett_adjusted_pvalues

    return np.asarray(
        dunnett_adjusted_pvalues(t, n_control, n_treatments, df, alternative), dtype=np.float64
    )


def _dunnett_critical(
    alpha: float, n_control: int, n_treatments: tuple[int, ...], df: float, alternative: str
) -> float:
    """The c with P(max |T_i| > c) = alpha (two-sided) or P(max T_i > c) = alpha (one-sided)."""
    from .distributions import dunnett_critical

    return float(dunnett_critical(alpha, n_control, n_treatments, df, alternative))


# --------------------------------------------------------------------------------------------
# Result
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class Comparisons:
    """Pairwise comparisons of group means.

    Attributes
    ----------
    method : str
        ``"tukey_kramer"``, ``"games_howell"``, ``"pairwise_t"`` or ``"dunnett"``.
    pairs : tuple of (int, int)
        The group indices ``(a, b)`` of each comparison, in the order of the last axis.
    difference : ndarray, shape (..., n_pairs)
        ``mean_a - mean_b``. Always computed, also where ``computable`` is False.
    se : ndarray
        Standard error of the difference.
    statistic : ndarray
        ``difference / se`` (a signed t-type value). For Tukey-Kramer and Games-Howell the
        value referred to the studentized range is ``q = sqrt(2) * |statistic|``.
    df : ndarray
        Degrees of freedom of each comparison: ``N - k`` for the pooled methods, the
        Welch-Satterthwaite value of the pair for Games-Howell.
    critical_value : ndarray
        Multiplier of ``se`` that gives the interval: ``ci = difference -/+ critical_value * se``.
    ci_low, ci_high : ndarray
        Confidence limits for ``mean_a - mean_b`` (infinite on the open side of a one-sided
        Dunnett interval). ``interval`` says what kind of interval they are.
    pvalue_adjusted : ndarray
        p-value adjusted for the multiplicity of the family of comparisons.
    confidence_level : float
    adjust : str or None
        The p-value adjustment of :func:`pairwise_t`; None for the other methods.
    alternative : str
        ``"two-sided"``, or for Dunnett ``"less"`` / ``"greater"`` (treatment below / above
        control).
    interval : str
        One sentence saying what the confidence intervals cover.
    computable : ndarray of bool, shape (..., n_pairs)
        False where the comparison is undefined; se, statistic, df, critical value, limits and
        p-value are NaN there only.
    reason : ndarray of str, shape (..., n_pairs)
        Why a comparison is not computable, in one sentence; ``""`` where it is.
    rejected : ndarray of bool, shape (..., n_pairs), or None
        With ``alpha=`` given: True where the comparison is significant at alpha, that is
        where ``pvalue_adjusted <= alpha`` (False where not computable); None otherwise.
    """

    method: str
    pairs: tuple[tuple[int, int], ...]
    difference: np.ndarray
    se: np.ndarray
    statistic: np.ndarray
    df: np.ndarray
    critical_value: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    pvalue_adjusted: np.ndarray
    confidence_level: float
    adjust: str | None
    alternative: str
    interval: str
    computable: np.ndarray
    reason: np.ndarray
    rejected: np.ndarray | None = None


# --------------------------------------------------------------------------------------------
# Shared steps
# --------------------------------------------------------------------------------------------


def _validate_confidence(confidence_level: float) -> float:
    try:
        cl = float(confidence_level)
    except (TypeError, ValueError):
        raise InputError(
            f"confidence_level must be a number between 0 and 1; got {confidence_level!r}"
        ) from None
    if not 0.0 < cl < 1.0:
        raise InputError(f"confidence_level must lie strictly between 0 and 1; got {cl!r}")
    return cl


def _validate_alpha(alpha: float | None) -> float | None:
    if alpha is None:
        return None
    try:
        a = float(alpha)
    except (TypeError, ValueError):
        raise InputError(f"alpha must be a number between 0 and 1; got {alpha!r}") from None
    if not 0.0 < a < 1.0:
        raise InputError(f"alpha must lie strictly between 0 and 1; got {a!r}")
    return a


def _validate_route(alpha: float | None, pvalues: bool) -> float | None:
    level = _validate_alpha(alpha)
    if not pvalues and level is None:
        raise InputError("pvalues=False decides by critical values and needs alpha")
    return level


#: With pvalues=False, statistics within this relative distance of the critical value get
#: their p-value computed, and the decision p <= alpha is taken from it.
_NEAR = 1e-8


def _decide(x: np.ndarray, crit: np.ndarray, ok: np.ndarray, level: float,
            pvalue_of) -> tuple[np.ndarray, np.ndarray]:
    """Rejections at ``level`` from the critical value, and the p-values computed near it.

    The adjusted p-value is a continuous decreasing function of the statistic x that equals
    ``level`` at the critical value, so ``p <= level`` exactly when ``x >= crit``. Both are
    computed numerically (to about 1e-13 relative); where x lies within a relative 1e-8 of
    crit the p-value itself is computed and decides, so the two routes give the same
    rejections unless the numerical error exceeds that margin.
    """
    xs = np.where(ok, x, -np.inf)
    cs = np.broadcast_to(crit, ok.shape)
    rejected = ok & (xs >= cs)
    near = ok & (np.abs(xs - cs) <= _NEAR * np.abs(cs))
    p = np.full(ok.shape, np.nan)
    if near.any():
        p[near] = pvalue_of(near)
        rejected = np.where(near, p <= level, rejected)
    return rejected, p


def _all_pairs(k: int) -> tuple[tuple[int, int], ...]:
    return tuple((a, b) for a in range(k) for b in range(a + 1, k))


def _validate_pooled(groups: tuple, name: str) -> tuple[Moments, float]:
    arrays, _ = as_groups(groups, min_groups=2, min_n=1, name=name)
    m = group_moments(arrays)
    df = float(m.n.sum() - m.n.size)
    if df < 1:
        raise InputError(
            f"{name} needs at least one group with two or more values "
            "(no within-group degrees of freedom)"
        )
    return m, df


def _pooled_variance(m: Moments, df: float) -> np.ndarray:
    """Pooled within-group variance MSw = sum(SS_i) / (N - k), shape (...)."""
    # One-way ANOVA mean square within groups, centred sums of squares from group_moments
    # (exactly zero when every group is constant).
    return m.ss.sum(axis=-1) / df


def _differences(m: Moments, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    # mean_a - mean_b from the means as deviations from one common pivot (keeps the digits of
    # data with many constant leading digits).
    _, centred = m.deviations()
    return centred[..., a] - centred[..., b]


_POOLED_ZERO = (
    "the pooled within-group variance is zero, so standard errors and p-values are undefined"
)


def _pooled_pairs(m: Moments, df: float, pairs) -> dict[str, np.ndarray]:
    """Differences, standard errors and t statistics of the pairs from the pooled variance."""
    a = np.array([p[0] for p in pairs])
    b = np.array([p[1] for p in pairs])
    mse = _pooled_variance(m, df)
    diff = _differences(m, a, b)
    ok, reason = flag_cases(diff.shape, (mse[..., None] == 0.0, _POOLED_ZERO))
    # se of mean_a - mean_b with the pooled variance: sqrt(MSw (1/n_a + 1/n_b)); Kramer (1956).
    se = np.where(ok, np.sqrt(mse[..., None] * (1.0 / m.n[a] + 1.0 / m.n[b])), np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        stat = np.where(ok, diff / se, np.nan)
    dfs = np.where(ok, df, np.nan)
    return {
        "difference": diff,
        "se": se,
        "statistic": stat,
        "df": dfs,
        "computable": ok,
        "reason": reason,
    }


def _masked(fn, ok: np.ndarray, *arrays: np.ndarray) -> np.ndarray:
    """fn(*arrays) on the computable entries only; NaN elsewhere (never evaluated)."""
    out = np.full(ok.shape, np.nan)
    if ok.any():
        out[ok] = fn(*(np.broadcast_to(x, ok.shape)[ok] for x in arrays))
    return out


def _finish(
    *,
    method,
    pairs,
    parts,
    crit,
    cl,
    adjust,
    alternative,
    interval,
    p,
    lower=True,
    upper=True,
    rejected=None,
) -> Comparisons:
    ok = parts["computable"]
    diff, se = parts["difference"], parts["se"]
    half = crit * se
    ci_low = np.where(ok, diff - half, np.nan) if lower else np.where(ok, -np.inf, np.nan)
    ci_high = np.where(ok, diff + half, np.nan) if upper else np.where(ok, np.inf, np.nan)
    p = np.where(ok, np.clip(p, 0.0, 1.0), np.nan)
    return Comparisons(
        method=method,
        pairs=pairs,
        difference=diff,
        se=se,
        statistic=parts["statistic"],
        df=parts["df"],
        critical_value=np.where(ok, crit, np.nan),
        ci_low=ci_low,
        ci_high=ci_high,
        pvalue_adjusted=p,
        confidence_level=cl,
        adjust=adjust,
        alternative=alternative,
        interval=interval,
        computable=np.array(ok, dtype=bool),
        reason=parts["reason"],
        rejected=None if rejected is None else np.array(rejected, dtype=bool),
    )


# --------------------------------------------------------------------------------------------
# Tukey-Kramer
# --------------------------------------------------------------------------------------------


def tukey_kramer(*groups: np.ndarray, confidence_level: float = 0.95,
                 alpha: float | None = None, pvalues: bool = True) -> Comparisons:
    """All pairwise comparisons with the Tukey-Kramer procedure (pooled variance).

    Parameters
    ----------
    *groups : array_like, each shaped (..., n_i)
        Two or more groups; the leading axes are a batch and must broadcast.
    confidence_level : float, optional
        Simultaneous coverage of the intervals, default 0.95.
    alpha : float, optional
        When given, ``rejected`` holds which comparisons are significant at alpha
        (``pvalue_adjusted <= alpha``).
    pvalues : bool, optional
        Default True. False (needs ``alpha``): decide ``rejected`` by comparing the statistic
        with the critical value at alpha, which gives the same rejections, and compute
        adjusted p-values only for statistics within a relative 1e-8 of that critical value
        (NaN elsewhere). For simulations that count decisions.

    Returns
    -------
    Comparisons
        Pairs ``(0, 1), (0, 2), ..., (k-2, k-1)``; ``difference = mean_a - mean_b``.

    Notes
    -----
    Assumptions: independent observations, normal errors, equal variances in all groups.
    With MSw the pooled within-group variance on df = N - k, the standard error of a
    difference is ``sqrt(MSw (1/n_a + 1/n_b))`` and ``q = sqrt(2) |difference| / se`` is
    referred to the studentized range distribution for k means [1]_, [2]_. The intervals
    ``difference -/+ q_crit / sqrt(2) * se`` are simultaneous; exact for equal n and
    conservative for unequal n [3]_. Where the pooled variance is zero the comparisons are
    not computable.

    References
    ----------
    .. [1] Tukey, J. W. (1953). The problem of multiple comparisons. Unpublished manuscript,
       Princeton University.
    .. [2] Kramer, C. Y. (1956). Extension of multiple range tests to group means with
       unequal numbers of replications. Biometrics 12, 307-310.
    .. [3] Hayter, A. J. (1984). A proof of the conjecture that the Tukey-Kramer multiple
       comparisons procedure is conservative. Annals of Statistics 12, 61-75.
    """
    cl = _validate_confidence(confidence_level)
    level = _validate_route(alpha, pvalues)
    m, df = _validate_pooled(groups, "Tukey-Kramer")
    k = m.n.size
    pairs = _all_pairs(k)
    parts = _pooled_pairs(m, df, pairs)
    ok = parts["computable"]
    # p = P(Q_{k, df} > sqrt(2) |t|), Kramer (1956).
    q = _SQRT2 * np.abs(parts["statistic"])
    rejected = None
    if pvalues:
        p = _masked(lambda qq, dd: _srange_sf(qq, k, dd), ok, q, parts["df"])
        if level is not None:
            rejected = ok & (np.nan_to_num(p, nan=1.0) <= level)
    else:
        rejected, p = _decide(q, _srange_ppf(1.0 - level, k, np.float64(df)), ok, level,
                              lambda near: _srange_sf(q[near], k, df))
    crit = _srange_ppf(cl, k, np.float64(df)) / _SQRT2
    return _finish(
        method="tukey_kramer",
        pairs=pairs,
        parts=parts,
        crit=crit,
        cl=cl,
        adjust=None,
        alternative="two-sided",
        interval="simultaneous intervals (Tukey-Kramer; exact for equal n, conservative otherwise)",
        p=p,
        rejected=rejected,
    )


# --------------------------------------------------------------------------------------------
# Games-Howell
# --------------------------------------------------------------------------------------------


_GH_ZERO = "one of the two groups has zero variance, so the Games-Howell comparison is undefined"


def games_howell(*groups: np.ndarray, confidence_level: float = 0.95,
                 alpha: float | None = None, pvalues: bool = True) -> Comparisons:
    """All pairwise comparisons with the Games-Howell procedure (no equal-variance assumption).

    Parameters
    ----------
    *groups : array_like, each shaped (..., n_i)
        Two or more groups of at least two values each; the leading axes are a batch.
    confidence_level : float, optional
        Nominal simultaneous coverage of the intervals, default 0.95.
    alpha : float, optional
        When given, ``rejected`` holds which comparisons are significant at alpha
        (``pvalue_adjusted <= alpha``).
    pvalues : bool, optional
        Default True. False (needs ``alpha``): decide ``rejected`` by comparing the statistic
        with the critical value at alpha, which gives the same rejections, and compute
        adjusted p-values only for statistics within a relative 1e-8 of that critical value
        (NaN elsewhere). For simulations that count decisions.

    Returns
    -------
    Comparisons
        Pairs ``(0, 1), ..., (k-2, k-1)``; ``difference = mean_a - mean_b``; ``df`` holds each
        pair's Welch-Satterthwaite degrees of freedom.

    Notes
    -----
    Assumptions: independent observations, normal errors; variances may differ. For a pair,
    ``se = sqrt(s_a^2/n_a + s_b^2/n_b)`` and
    ``df = (s_a^2/n_a + s_b^2/n_b)^2 / ((s_a^2/n_a)^2/(n_a-1) + (s_b^2/n_b)^2/(n_b-1))``
    (Welch-Satterthwaite); ``q = sqrt(2) |difference| / se`` is referred to the studentized
    range for k means with that df [1]_. Coverage and error rate are approximate. A group with
    zero variance makes every comparison involving it not computable.

    References
    ----------
    .. [1] Games, P. A. and Howell, J. F. (1976). Pairwise multiple comparison procedures
       with unequal n's and/or variances: a Monte Carlo study. Journal of Educational
       Statistics 1, 113-125.
    """
    cl = _validate_confidence(confidence_level)
    level = _validate_route(alpha, pvalues)
    arrays, _ = as_groups(groups, min_groups=2, min_n=2, name="Games-Howell")
    m = group_moments(arrays)
    k = m.n.size
    pairs = _all_pairs(k)
    a = np.array([p[0] for p in pairs])
    b = np.array([p[1] for p in pairs])
    var = m.var
    zero = m.ss == 0.0  # (..., k): a constant group (exactly zero, see group_moments)
    diff = _differences(m, a, b)
    ok, reason = flag_cases(diff.shape, (zero[..., a] | zero[..., b], _GH_ZERO))
    w = var / m.n  # s_i^2 / n_i
    wa, wb = w[..., a], w[..., b]
    with np.errstate(invalid="ignore", divide="ignore"):
        se = np.where(ok, np.sqrt(wa + wb), np.nan)
        stat = np.where(ok, diff / se, np.nan)
        # Welch-Satterthwaite degrees of freedom of the pair; Games & Howell (1976).
        dfs = np.where(
            ok, (wa + wb) ** 2 / (wa**2 / (m.n[a] - 1) + wb**2 / (m.n[b] - 1)), np.nan
        )
    parts = {
        "difference": diff,
        "se": se,
        "statistic": stat,
        "df": dfs,
        "computable": ok,
        "reason": reason,
    }
    q = _SQRT2 * np.abs(stat)
    q_ci = _masked(lambda dd: _srange_ppf(cl, k, dd), ok, dfs)
    rejected = None
    if pvalues:
        p = _masked(lambda qq, dd: _srange_sf(qq, k, dd), ok, q, dfs)
        if level is not None:
            rejected = ok & (np.nan_to_num(p, nan=1.0) <= level)
    else:
        # the critical q of each pair's own df (the interval's when confidence = 1 - alpha)
        q_crit = q_ci if 1.0 - level == cl else _masked(
            lambda dd: _srange_ppf(1.0 - level, k, dd), ok, dfs)
        rejected, p = _decide(q, q_crit, ok, level,
                              lambda near: _srange_sf(q[near], k, dfs[near]))
    crit = q_ci / _SQRT2
    return _finish(
        method="games_howell",
        pairs=pairs,
        parts=parts,
        crit=crit,
        cl=cl,
        adjust=None,
        alternative="two-sided",
        interval="simultaneous intervals, approximate (Games-Howell)",
        p=p,
        rejected=rejected,
    )


# --------------------------------------------------------------------------------------------
# Pairwise t with a multiplicity adjustment
# --------------------------------------------------------------------------------------------

_ADJUSTMENTS = ("bonferroni", "holm", "sidak")
_ALTERNATIVES = ("two-sided", "less", "greater")


def _pvalue_adjust(p: np.ndarray, adjust: str) -> np.ndarray:
    """Adjust raw p-values along the last axis (the family of m comparisons)."""
    m = p.shape[-1]
    if adjust == "bonferroni":
        # Bonferroni: min(1, m p).
        return np.minimum(1.0, m * p)
    if adjust == "sidak":
        # Sidak (1967): 1 - (1 - p)^m, written with log1p/expm1 for small p.
        with np.errstate(divide="ignore"):
            return -np.expm1(m * np.log1p(-p))
    # Holm (1979) step-down: sorted p_(1) <= ... <= p_(m); adjusted p_(i) =
    # max_{j <= i} min(1, (m - j + 1) p_(j)).
    order = np.argsort(p, axis=-1, kind="stable")
    ps = np.take_along_axis(p, order, axis=-1)
    adj_sorted = np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * ps, axis=-1))
    out = np.empty_like(adj_sorted)
    np.put_along_axis(out, order, adj_sorted, axis=-1)
    return out


def _validate_alternative(alternative: str) -> str:
    if alternative not in _ALTERNATIVES:
        raise InputError(
            f"alternative {alternative!r} is not allowed; use one of {', '.join(_ALTERNATIVES)}"
        )
    return alternative


def _validate_control(control: object, k: int) -> int:
    if isinstance(control, bool) or not isinstance(control, (int, np.integer)):
        raise InputError(f"control must be a group index (an integer); got {control!r}")
    if not 0 <= int(control) < k:
        raise InputError(f"control {control!r} is not a group index; use 0 to {k - 1}")
    return int(control)


_WELCH_ZERO = "both groups of the pair have zero variance, so the Welch t test is undefined"


def _welch_pairs(m: Moments, pairs) -> dict[str, np.ndarray]:
    """Differences, Welch standard errors, t statistics and Welch-Satterthwaite df per pair."""
    a = np.array([p[0] for p in pairs])
    b = np.array([p[1] for p in pairs])
    diff = _differences(m, a, b)
    w = m.var / m.n                                   # s_i^2 / n_i, centred sums
    wa, wb = w[..., a], w[..., b]
    ok, reason = flag_cases(diff.shape, ((wa + wb) == 0.0, _WELCH_ZERO))
    with np.errstate(invalid="ignore", divide="ignore"):
        # Welch (1947): se = sqrt(s_a^2/n_a + s_b^2/n_b); Satterthwaite (1946) df.
        se = np.where(ok, np.sqrt(wa + wb), np.nan)
        stat = np.where(ok, diff / se, np.nan)
        dfs = np.where(
            ok, (wa + wb) ** 2 / (wa**2 / (m.n[a] - 1) + wb**2 / (m.n[b] - 1)), np.nan
        )
    return {
        "difference": diff,
        "se": se,
        "statistic": stat,
        "df": dfs,
        "computable": ok,
        "reason": reason,
    }


def pairwise_t(
    *groups: np.ndarray,
    adjust: Literal["bonferroni", "holm", "sidak"] = "bonferroni",
    confidence_level: float = 0.95,
    pairs: Literal["all", "control"] = "all",
    control: int = 0,
    error_term: Literal["pooled", "per_pair"] = "pooled",
    alternative: Literal["two-sided", "less", "greater"] = "two-sided",
    alpha: float | None = None,
) -> Comparisons:
    """Pairwise t tests, all pairs or each group against a control, with a multiplicity adjustment.

    Parameters
    ----------
    *groups : array_like, each shaped (..., n_i)
        Two or more groups; the leading axes are a batch.
    adjust : {"bonferroni", "holm", "sidak"}
        How the m raw p-values of the family are adjusted. ``"holm"`` is Holm's step-down
        procedure (not Holm-Sidak).
    confidence_level : float, optional
        Default 0.95.
    pairs : {"all", "control"}
        ``"all"``: the m = k(k-1)/2 pairs ``(0, 1), ..., (k-2, k-1)``; ``"control"``: the
        m = k - 1 pairs ``(i, control)`` for every ``i != control`` in increasing ``i``
        (differences are then treatment minus control).
    control : int, optional
        Index of the control group when ``pairs="control"``, default 0.
    error_term : {"pooled", "per_pair"}
        ``"pooled"``: one within-group variance pooled over all k groups, df = N - k;
        ``"per_pair"``: Welch's t for each pair from the two groups' own variances, with the
        Welch-Satterthwaite df of the pair (groups need two or more values).
    alternative : {"two-sided", "less", "greater"}
        ``"greater"``: ``mean_a > mean_b`` is the alternative (raw p = P(T > t)); ``"less"``:
        ``mean_a < mean_b``. One-sided intervals are infinite on one side.
    alpha : float, optional
        When given, ``rejected`` holds ``pvalue_adjusted <= alpha``.

    Returns
    -------
    Comparisons
        ``difference = mean_a - mean_b``.

    Notes
    -----
    Assumptions: independent observations, normal errors; equal variances for the pooled
    error term. Each pair uses ``t = difference / se`` with ``se = sqrt(MSw (1/n_a + 1/n_b))``
    (pooled) or ``sqrt(s_a^2/n_a + s_b^2/n_b)`` (per pair). Intervals: for ``"bonferroni"``
    each interval has level ``1 - alpha/m`` and for ``"sidak"`` ``(1 - alpha)^(1/m)``, with
    ``alpha = 1 - confidence_level``; both are simultaneous (exactly so for the pooled error
    term, approximately with Welch's df). Holm's step-down procedure has no simple
    simultaneous interval, so for ``"holm"`` the intervals are the Bonferroni-level ones
    (they do not match Holm's more powerful decisions: a pair can be significant by Holm
    while its interval covers zero). ``interval`` records this. A comparison that is not
    computable counts as raw p = 1 in the adjustment.

    References
    ----------
    .. [1] Holm, S. (1979). A simple sequentially rejective multiple test procedure.
       Scandinavian Journal of Statistics 6, 65-70.
    .. [2] Sidak, Z. (1967). Rectangular confidence regions for the means of multivariate
       normal distributions. JASA 62, 626-633.
    .. [3] Welch, B. L. (1947). The generalization of 'Student's' problem when several
       different population variances are involved. Biometrika 34, 28-35.
    """
    from scipy import special

    cl = _validate_confidence(confidence_level)
    if adjust not in _ADJUSTMENTS:
        raise InputError(f"adjust {adjust!r} is not allowed; use one of {', '.join(_ADJUSTMENTS)}")
    if pairs not in ("all", "control"):
        raise InputError(f"pairs {pairs!r} is not allowed; use one of all, control")
    if error_term not in ("pooled", "per_pair"):
        raise InputError(f"error_term {error_term!r} is not allowed; use one of pooled, per_pair")
    _validate_alternative(alternative)
    level = _validate_alpha(alpha)
    if error_term == "pooled":
        m, df = _validate_pooled(groups, "pairwise t")
    else:
        arrays, _ = as_groups(groups, min_groups=2, min_n=2, name="Welch pairwise t")
        m = group_moments(arrays)
    k = m.n.size
    if pairs == "all":
        family = _all_pairs(k)
    else:
        c = _validate_control(control, k)
        family = tuple((i, c) for i in range(k) if i != c)
    n_pairs = len(family)
    parts = _pooled_pairs(m, df, family) if error_term == "pooled" else _welch_pairs(m, family)
    ok = parts["computable"]
    dfs = parts["df"]
    # Raw p-values from the Student t distribution (stdtr is its cdf): two-sided
    # 2 P(T_df > |t|), "greater" P(T_df > t), "less" P(T_df < t).
    if alternative == "two-sided":
        raw = _masked(lambda tt, dd: 2.0 * special.stdtr(dd, -np.abs(tt)), ok,
                      parts["statistic"], dfs)
    elif alternative == "greater":
        raw = _masked(lambda tt, dd: special.stdtr(dd, -tt), ok, parts["statistic"], dfs)
    else:
        raw = _masked(lambda tt, dd: special.stdtr(dd, tt), ok, parts["statistic"], dfs)
    p = np.where(ok, _pvalue_adjust(np.where(ok, np.clip(raw, 0.0, 1.0), 1.0), adjust), np.nan)
    a_level = 1.0 - cl
    if adjust == "sidak":
        alpha_each = -np.expm1(np.log1p(-a_level) / n_pairs)  # 1 - (1 - alpha)^(1/m)
        interval = "simultaneous intervals (Sidak), each at level (1 - alpha)^(1/m)"
    else:
        alpha_each = a_level / n_pairs
        interval = (
            "simultaneous intervals (Bonferroni), each at level 1 - alpha/m"
            if adjust == "bonferroni"
            else "Bonferroni-level intervals, each at level 1 - alpha/m: Holm's step-down "
            "tests have no matching simultaneous interval"
        )
    if error_term == "per_pair":
        interval += "; Welch's df, so the coverage is approximate"
    sides = 2.0 if alternative == "two-sided" else 1.0
    crit = _masked(lambda dd: special.stdtrit(dd, 1.0 - alpha_each / sides), ok, dfs)
    return _finish(
        method="pairwise_t",
        pairs=family,
        parts=parts,
        crit=crit,
        cl=cl,
        adjust=adjust,
        alternative=alternative,
        interval=interval,
        p=p,
        lower=alternative != "less",
        upper=alternative != "greater",
        rejected=None if level is None else ok & (np.nan_to_num(p, nan=1.0) <= level),
    )


# --------------------------------------------------------------------------------------------
# Dunnett
# --------------------------------------------------------------------------------------------

def dunnett(
    *groups: np.ndarray,
    control: int = 0,
    alternative: Literal["two-sided", "less", "greater"] = "two-sided",
    confidence_level: float = 0.95,
    alpha: float | None = None,
    pvalues: bool = True,
) -> Comparisons:
    """Comparisons of every treatment group with one control group (Dunnett's many-to-one).

    Parameters
    ----------
    *groups : array_like, each shaped (..., n_i)
        Two or more groups, the control among them; the leading axes are a batch.
    control : int, optional
        Index of the control group, default 0.
    alternative : {"two-sided", "less", "greater"}
        ``"greater"``: a treatment mean above the control is the alternative; ``"less"``:
        below it.
    confidence_level : float, optional
        Simultaneous coverage, default 0.95.
    alpha : float, optional
        When given, ``rejected`` holds which comparisons are significant at alpha
        (``pvalue_adjusted <= alpha``).
    pvalues : bool, optional
        Default True. False (needs ``alpha``): decide ``rejected`` by comparing the statistic
        with the critical value at alpha, which gives the same rejections, and compute
        adjusted p-values only for statistics within a relative 1e-8 of that critical value
        (NaN elsewhere). For simulations that count decisions.

    Returns
    -------
    Comparisons
        Pairs ``(i, control)`` for every ``i != control`` in increasing order;
        ``difference = mean_i - mean_control``. One-sided intervals are infinite on one side.

    Notes
    -----
    Assumptions: independent observations, normal errors, equal variances. With MSw pooled
    over all k groups (df = N - k), ``t_i = difference_i / sqrt(MSw (1/n_i + 1/n_0))``; the
    t_i are jointly multivariate t with correlations
    ``rho_ij = 1 / sqrt((n_0/n_i + 1)(n_0/n_j + 1))`` [1]_ (p. 1103). The adjusted p-value of a
    comparison is the probability, under the global null, that the largest |t| (two-sided) or
    largest t (one-sided) reaches it; the critical value is the matching quantile, so
    ``pvalue_adjusted <= alpha`` exactly when the interval excludes zero.

    References
    ----------
    .. [1] Dunnett, C. W. (1955). A multiple comparison procedure for comparing several
       treatments with a control. JASA 50, 1096-1121.
    """
    cl = _validate_confidence(confidence_level)
    _validate_alternative(alternative)
    level = _validate_route(alpha, pvalues)
    m, df = _validate_pooled(groups, "Dunnett")
    k = len(groups)
    control = _validate_control(control, k)
    pairs = tuple((i, control) for i in range(k) if i != control)
    parts = _pooled_pairs(m, df, pairs)
    ok = parts["computable"]
    n_control = int(m.n[control])
    n_treat = tuple(int(m.n[i]) for i, _ in pairs)
    # Dunnett (1955), sec. 3: p_i = P(max_j |T_j| >= |t_i|) two-sided, P(max_j T_j >= t_i)
    # "greater", P(min_j T_j <= t_i) "less", under the global null.
    rejected = None
    if pvalues:
        p = _masked(
            lambda tt: _dunnett_pvalues(tt, n_control, n_treat, df, alternative),
            ok,
            parts["statistic"],
        )
        if level is not None:
            rejected = ok & (np.nan_to_num(p, nan=1.0) <= level)
    else:
        t = parts["statistic"]
        # the value referred to the distribution of max |T| (or max T): |t|, t or -t
        x = np.abs(t) if alternative == "two-sided" else (t if alternative == "greater" else -t)
        rejected, p = _decide(
            x, _dunnett_critical(level, n_control, n_treat, df, alternative), ok, level,
            lambda near: _dunnett_pvalues(t[near], n_control, n_treat, df, alternative))
    crit = _dunnett_critical(1.0 - cl, n_control, n_treat, df, alternative)
    kind = "two-sided" if alternative == "two-sided" else "one-sided"
    return _finish(
        method="dunnett",
        pairs=pairs,
        parts=parts,
        crit=crit,
        cl=cl,
        adjust=None,
        alternative=alternative,
        interval=f"simultaneous {kind} intervals for treatment minus control (Dunnett)",
        p=p,
        lower=alternative != "less",
        upper=alternative != "greater",
        rejected=rejected,
    )
