"""Effect sizes of the one-way layout: eta squared, omega squared and Cohen's f, with intervals.

The intervals invert the noncentral F distribution for its noncentrality parameter lambda
(Steiger & Fouladi 1997; Smithson 2003; Steiger 2004) and map the limits for lambda to each
effect size. The root finding is vectorised over the batch (Chandrupatla's bracketing method,
``scipy.optimize.elementwise.find_root``); there is no Python loop over batch elements.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._core import InputError, Interval, as_groups, flag_cases, group_moments, scalarize

__all__ = ["EffectSizes", "effect_sizes"]

_ZERO_WITHIN = (
    "every group has zero spread, so the within-group variance is zero and F and the effect "
    "sizes are undefined"
)


@dataclass(frozen=True, slots=True, kw_only=True)
class EffectSizes:
    """Effect sizes of a one-way layout with confidence intervals.

    Batch-shaped fields have the batch shape of the groups (numpy scalars for a single
    analysis).

    Attributes
    ----------
    eta_squared, eta_squared_ci
        ``SS_between / SS_total`` and its interval (an :class:`Interval` with ``low``, ``high``).
    omega_squared, omega_squared_ci
        ``(SS_between - (k-1) MS_within) / (SS_total + MS_within)``, set to zero where that is
        negative (see ``omega_squared_clipped``), and its interval.
    omega_squared_clipped : bool array
        True where the raw omega squared was negative and is reported as zero.
    cohens_f, cohens_f_ci
        ``sqrt(eta^2 / (1 - eta^2)) = sqrt(SS_between / SS_within)`` and its interval.
    noncentrality_ci
        Confidence limits for the noncentrality lambda of the F statistic.
    ci_low_at_zero, ci_high_at_zero : bool array
        True where a limit for lambda was clipped at zero (the observed F lies so low that no
        positive lambda puts it at the required quantile).
    statistic : array
        The classic one-way F statistic.
    df1, df2 : float
        ``k - 1`` and ``N - k``.
    n_total : float
        N, the number of observations.
    confidence_level : float
    computable : bool array
        False where the within-group variance is zero; the numeric fields are NaN there only.
    reason : str array
        Why an element is not computable, in one sentence; ``""`` where it is.
    """

    eta_squared: np.ndarray
    eta_squared_ci: Interval
    omega_squared: np.ndarray
    omega_squared_ci: Interval
    omega_squared_clipped: np.ndarray
    cohens_f: np.ndarray
    cohens_f_ci: Interval
    noncentrality_ci: Interval
    ci_low_at_zero: np.ndarray
    ci_high_at_zero: np.ndarray
    statistic: np.ndarray
    df1: float
    df2: float
    n_total: float
    confidence_level: float
    computable: np.ndarray
    reason: np.ndarray


def _validate_effect(groups, confidence_level):
    try:
        cl = float(confidence_level)
    except (TypeError, ValueError):
        raise InputError(
            f"confidence_level must be a number between 0 and 1; got {confidence_level!r}"
        ) from None
    if not 0.0 < cl < 1.0:
        raise InputError(f"confidence_level must lie strictly between 0 and 1; got {cl!r}")
    arrays, batch = as_groups(groups, min_groups=2, min_n=1, name="effect sizes")
    m = group_moments(arrays)
    if m.n.sum() - m.n.size < 1:
        raise InputError(
            "effect sizes need at least one group with two or more values "
            "(no within-group degrees of freedom)"
        )
    return m, batch, cl


def _noncentrality_limit(f_obs, df1, df2, target):
    """The lambda >= 0 with P(F' <= f_obs | df1, df2, lambda) = target, elementwise.

    The noncentral F cdf decreases in lambda; where it is already <= target at lambda = 0 the
    limit is 0 (clipped). Returns the limits and the clipped mask.
    """
    from scipy import special
    from scipy.optimize import elementwise

    f_obs = np.asarray(f_obs, dtype=np.float64)

    def excess(lam, f):
        # ncfdtr(dfn, dfd, nc, x) is the noncentral F cdf (scipy.stats.ncf.cdf).
        return special.ncfdtr(df1, df2, lam, f) - target

    at0 = special.fdtr(df1, df2, f_obs)  # central F cdf: lambda = 0
    clipped = at0 <= target
    out = np.zeros_like(f_obs)
    todo = ~clipped
    if not todo.any():
        return out, clipped
    f = f_obs[todo]
    # Upper end of the bracket: E[F'] ~ (df1 + lambda)/df1 suggests lambda near df1 * F;
    # widen until the cdf falls below the target (vectorised doubling, few rounds).
    hi = np.maximum(df1 * f * 2.0 + 10.0, 10.0)
    for _ in range(200):
        bad = excess(hi, f) >= 0
        if not bad.any():
            break
        hi = np.where(bad, hi * 2.0, hi)
    res = elementwise.find_root(
        excess, (np.zeros_like(f), hi), args=(f,), tolerances={"xrtol": 1e-13, "xatol": 1e-300}
    )
    out[todo] = res.x
    return out, clipped


def effect_sizes(*groups: np.ndarray, confidence_level: float = 0.95) -> EffectSizes:
    """Eta squared, omega squared and Cohen's f of a one-way layout, with confidence intervals.

    Parameters
    ----------
    *groups : array_like, each shaped (..., n_i)
        Two or more groups; the leading axes are a batch.
    confidence_level : float, optional
        Coverage of the two-sided intervals, default 0.95 (each limit leaves
        ``(1 - confidence_level) / 2`` outside).

    Returns
    -------
    EffectSizes

    Notes
    -----
    Point estimates use the centred sums of squares: ``eta^2 = SSb / SSt``;
    ``omega^2 = (SSb - (k-1) MSw) / (SSt + MSw)`` [3]_, reported as zero where negative
    (``omega_squared_clipped``); ``f = sqrt(eta^2 / (1 - eta^2))`` [4]_.

    Intervals: with F the classic one-way statistic on (k-1, N-k) degrees of freedom, the
    limits for the noncentrality lambda solve ``P(F' <= F | lambda_low) = 1 - alpha/2`` and
    ``P(F' <= F | lambda_high) = alpha/2`` (each clipped at zero when no lambda >= 0 solves
    it) [1]_, [2]_. With the population effect ``f^2 = sum n_i (mu_i - mu)^2 / (N sigma^2) =
    lambda / N``, the limits map to ``f = sqrt(lambda / N)`` and to the population proportion
    of variance explained ``lambda / (lambda + N)`` [1]_, [2]_. Eta squared and omega squared
    are two estimators of that one population proportion, so both are given this same
    interval. Assumptions are those of the classic F test: independent normal errors with one
    common variance.

    References
    ----------
    .. [1] Steiger, J. H. (2004). Beyond the F test: effect size confidence intervals and
       tests of close fit in the analysis of variance and contrast analysis. Psychological
       Methods 9, 164-182.
    .. [2] Smithson, M. (2003). Confidence Intervals. Sage, Quantitative Applications in the
       Social Sciences 140.
    .. [3] Hays, W. L. (1963). Statistics for Psychologists. Holt, Rinehart and Winston.
    .. [4] Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.
    """
    m, batch, cl = _validate_effect(groups, confidence_level)
    k = m.n.size
    n_total = float(m.n.sum())
    df1, df2 = float(k - 1), n_total - k
    # Between-group sum of squares about the weighted grand mean; the means are relative to a
    # common pivot, so this keeps its digits for data with many constant leading digits.
    _, centred = m.deviations()
    grand = (m.n * centred).sum(axis=-1) / n_total
    ssb = (m.n * (centred - grand[..., None]) ** 2).sum(axis=-1)
    ssw = m.ss.sum(axis=-1)
    sst = ssb + ssw
    msw = ssw / df2
    ok, reason = flag_cases(batch, (ssw == 0.0, _ZERO_WITHIN))

    nan = np.full(ok.shape, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        eta2 = np.where(ok, ssb / sst, np.nan)
        omega_raw = np.where(ok, (ssb - df1 * msw) / (sst + msw), np.nan)
        f_eff = np.where(ok, np.sqrt(ssb / ssw), np.nan)
        fstat = np.where(ok, (ssb / df1) / msw, np.nan)
    omega_clipped = ok & (omega_raw < 0)
    omega2 = np.where(omega_clipped, 0.0, omega_raw)

    alpha = 1.0 - cl
    lam_lo, lam_hi = nan.copy(), nan.copy()
    lo_zero = np.zeros(ok.shape, dtype=bool)
    hi_zero = np.zeros(ok.shape, dtype=bool)
    if ok.any():
        lam_lo[ok], lo_zero[ok] = _noncentrality_limit(fstat[ok], df1, df2, 1.0 - alpha / 2.0)
        lam_hi[ok], hi_zero[ok] = _noncentrality_limit(fstat[ok], df1, df2, alpha / 2.0)

    def prop(lam):
        # Steiger (2004): proportion of variance explained = lambda / (lambda + N).
        return lam / (lam + n_total)

    def cohen(lam):
        # Steiger (2004): f = sqrt(lambda / N).
        return np.sqrt(lam / n_total)

    s = scalarize

    def interval(lo, hi):
        return Interval(low=s(lo), high=s(hi))

    return EffectSizes(
        eta_squared=s(eta2),
        eta_squared_ci=interval(prop(lam_lo), prop(lam_hi)),
        omega_squared=s(omega2),
        omega_squared_ci=interval(prop(lam_lo), prop(lam_hi)),
        omega_squared_clipped=s(omega_clipped),
        cohens_f=s(f_eff),
        cohens_f_ci=interval(cohen(lam_lo), cohen(lam_hi)),
        noncentrality_ci=interval(lam_lo, lam_hi),
        ci_low_at_zero=s(lo_zero),
        ci_high_at_zero=s(hi_zero),
        statistic=s(fstat),
        df1=df1,
        df2=df2,
        n_total=n_total,
        confidence_level=cl,
        computable=s(ok),
        reason=s(reason),
    )
