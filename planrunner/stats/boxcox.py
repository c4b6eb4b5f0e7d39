"""Box-Cox power parameter under the one-way model, with a likelihood-ratio interval.

The exponent is chosen to make the *one-way layout* fit best on the transformed scale: the
profile log-likelihood uses the within-group residuals, not the spread of one pooled sample
(which would mix the differences between groups into the "error" and pull lambda towards
whatever makes the group means look alike).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ._core import DomainError, InputError, Interval, as_groups, concat_groups, flag_cases, scalarize

__all__ = ["BoxCoxProfile", "BoxCoxResult", "boxcox_oneway"]

_GRID_STEP = 0.01
_REFINE_ITER = 100
_CHUNK = 2_000_000  # elements of (batch, grid, N) evaluated at once


@dataclass(frozen=True, slots=True, kw_only=True)
class BoxCoxProfile:
    """The profile log-likelihood on the search grid: ``lmbda`` (G,), ``loglik`` (..., G)."""

    lmbda: np.ndarray
    loglik: np.ndarray


@dataclass(frozen=True, slots=True, kw_only=True)
class BoxCoxResult:
    """Maximum-likelihood Box-Cox lambda for a one-way layout.

    ``lmbda`` is the estimate, ``ci`` the likelihood-ratio interval, ``loglik`` the maximised
    log-likelihood. ``lmbda_snapped`` is the value to use: the nearest entry of ``snap``
    inside the interval when there is one (``snapped`` True), otherwise the estimate;
    ``snap_note`` says which happened. ``at_bound`` marks an estimate on the edge of the
    search ``bounds``; ``ci_open_low`` / ``ci_open_high`` mark an interval end that reached a
    bound (the true end lies beyond it).
    """

    lmbda: np.ndarray
    ci: Interval
    loglik: np.ndarray
    profile: BoxCoxProfile
    lmbda_snapped: np.ndarray
    snapped: np.ndarray
    snap_note: np.ndarray
    at_bound: np.ndarray
    ci_open_low: np.ndarray
    ci_open_high: np.ndarray
    bounds: tuple[float, float]
    confidence_level: float
    snap: tuple[float, ...] | None
    computable: np.ndarray
    reason: np.ndarray


class _Profile:
    """Evaluates the one-way Box-Cox profile log-likelihood for a batch.

    With z = y / gm(y) (gm the geometric mean of all N values, per batch element), the
    log-likelihood of the transformed data plus the Jacobian term (lambda - 1) sum log y is
    -(N/2) (log(2 pi) + 1 + log(SS_z(lambda) / N)) - N log gm, where SS_z is the within-group
    sum of squares of (z^lambda - 1) / lambda. Scaling by the geometric mean, as Box & Cox
    (1964) do with their normalised transformation, keeps z^lambda near 1 so nothing
    overflows, and makes the Jacobian of z vanish (sum log z = 0).
    """

    def __init__(self, log_y: np.ndarray, bounds_idx: np.ndarray, ok: np.ndarray):
        self.n_total = log_y.shape[-1]
        self.log_gm = log_y.mean(axis=-1)
        self.lz = log_y - self.log_gm[..., None]
        self.bounds = bounds_idx
        self.ok = ok

    def _ss_within(self, u: np.ndarray) -> np.ndarray:
        total = np.zeros(u.shape[:-1])
        for i in range(len(self.bounds) - 1):
            part = u[..., self.bounds[i] : self.bounds[i + 1]]
            e = part - part.mean(axis=-1, keepdims=True)
            total += (e * e).sum(axis=-1)
        return total

    def __call__(self, lam: np.ndarray, lz: np.ndarray | None = None) -> np.ndarray:
        """Log-likelihood at ``lam``; ``lam`` broadcasts against ``lz[..., 0]``."""
        lz = self.lz if lz is None else lz
        lam = np.asarray(lam, dtype=np.float64)
        x = lam[..., None] * lz
        zero = lam[..., None] == 0.0
        # (z^lam - 1)/lam as expm1(lam log z)/lam: accurate for lam near 0; log z at lam = 0.
        u = np.where(zero, lz, np.expm1(x) / np.where(zero, 1.0, lam[..., None]))
        ss = self._ss_within(u)
        n = self.n_total
        good = ss > 0.0
        ll = -0.5 * n * (np.log(2.0 * np.pi) + 1.0 + np.log(np.where(good, ss, 1.0) / n))
        return np.where(good, ll, -np.inf)


def _validate_boxcox(groups, bounds, confidence_level, snap):
    arrays, batch = as_groups(groups, min_groups=1, min_n=1, name="the Box-Cox estimate")
    n_total = sum(a.shape[-1] for a in arrays)
    if n_total - len(arrays) < 1:
        raise InputError(
            "the Box-Cox estimate needs more values than groups (N - k >= 1); got"
            f" N = {n_total} in k = {len(arrays)} groups"
        )
    try:
        lo, hi = (float(b) for b in bounds)
    except (TypeError, ValueError):
        raise InputError(f"bounds must be two numbers (low, high); got {bounds!r}") from None
    if not (np.isfinite(lo) and np.isfinite(hi) and lo < hi):
        raise InputError(f"bounds must be finite with low < high; got {bounds!r}")
    level = float(confidence_level)
    if not 0.0 < level < 1.0:
        raise InputError(f"confidence_level must lie strictly between 0 and 1; got {confidence_level!r}")
    snap_t = None
    if snap is not None:
        snap_t = tuple(float(s) for s in snap)
        if not snap_t or not all(np.isfinite(snap_t)):
            raise InputError("snap must be a non-empty sequence of finite lambda values")
    values, bidx = concat_groups(arrays)
    bad = values <= 0
    if np.any(bad):
        raise DomainError(
            f"Box-Cox needs values > 0; {int(bad.sum())} value{'s are' if bad.sum() > 1 else ' is'}"
            f" outside it (smallest offending value {float(values[bad].min()):.6g}); add a shift"
            " to every value first"
        )
    return values, bidx, batch, (lo, hi), level, snap_t


def _grid(lo: float, hi: float) -> np.ndarray:
    count = max(61, int(round((hi - lo) / _GRID_STEP)) + 1)
    return np.linspace(lo, hi, count)


def _profile_on_grid(prof: _Profile, grid: np.ndarray, batch) -> np.ndarray:
    out = np.empty(batch + grid.shape)
    per = max(1, _CHUNK // max(1, int(np.prod(batch, dtype=np.int64)) * prof.n_total))
    lz = prof.lz[..., None, :]
    for s in range(0, grid.size, per):
        g = grid[s : s + per]
        out[..., s : s + per] = prof(np.broadcast_to(g, batch + g.shape), lz)
    return out


def _golden_max(prof: _Profile, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Vectorised golden-section search for the maximum on [a, b] (one bracket per element).

    Every batch element is refined at once (no loop over the batch); 100 steps shrink the
    bracket below the resolution of the log-likelihood.
    """
    r = (np.sqrt(5.0) - 1.0) / 2.0
    c = b - r * (b - a)
    d = a + r * (b - a)
    fc, fd = prof(c), prof(d)
    for _ in range(_REFINE_ITER):
        left = fc >= fd  # maximum lies in [a, d]
        a, b = np.where(left, a, c), np.where(left, d, b)
        new = np.where(left, b - r * (b - a), a + r * (b - a))
        fnew = prof(new)
        c, d, fc, fd = (
            np.where(left, new, d),
            np.where(left, c, new),
            np.where(left, fnew, fd),
            np.where(left, fc, fnew),
        )
    return 0.5 * (a + b)


def _bisect_cut(prof: _Profile, below: np.ndarray, above: np.ndarray, cut: np.ndarray) -> np.ndarray:
    """Vectorised bisection for loglik(lam) = cut between ``below`` (< cut) and ``above``."""
    for _ in range(60):
        mid = 0.5 * (below + above)
        under = prof(mid) < cut
        below = np.where(under, mid, below)
        above = np.where(under, above, mid)
    return 0.5 * (below + above)


def boxcox_oneway(
    *groups,
    bounds: tuple[float, float] = (-3.0, 3.0),
    confidence_level: float = 0.95,
    snap: Sequence[float] | None = None,
) -> BoxCoxResult:
    """Estimate the Box-Cox lambda that best fits a one-way layout, with a likelihood interval.

    Parameters
    ----------
    *groups : array_like, each shaped ``(..., n_i)``, all values > 0
        One or more groups; leading axes are a batch. Shift the data first if needed.
    bounds : (float, float)
        Search interval for lambda.
    confidence_level : float
        Coverage of the likelihood-ratio interval.
    snap : sequence of float, optional
        Interpretable exponents (for example -1, -0.5, 0, 0.5, 1). The nearest one inside the
        interval is reported as ``lmbda_snapped``; ties go to the earlier entry.

    Returns
    -------
    BoxCoxResult

    Notes
    -----
    For each lambda the transformed values y^(lambda) = (y^lambda - 1) / lambda (log y at 0)
    are fitted by the one-way model (one mean per group, one common variance); maximising
    over the means and the variance leaves the profile log-likelihood

        loglik(lambda) = -(N/2) (log(2 pi) + 1 + log(SS_within(lambda) / N))
                         + (lambda - 1) sum log y,

    which is the Gaussian log-likelihood of the one-way model on the transformed scale plus
    the log-Jacobian of the transformation, i.e. a log-likelihood of the original data. With
    one group it is the usual single-sample Box-Cox likelihood.

    Search: the profile is evaluated on a grid of step 0.01 over ``bounds`` (vectorised
    over the batch; the only Python loop runs over chunks of the grid, to bound memory),
    then the best grid point's neighbourhood is refined by a golden-section search that
    updates every batch element at once (no loop over the batch). The interval is {lambda : loglik(lambda) >= max - chi2_1(level)/2},
    its ends found by bisection from the grid crossings nearest the estimate. Ends that do
    not cross inside ``bounds`` are reported at the bound and flagged.

    Assumptions: positive data; on the chosen scale, normal errors with equal variances.
    Not computable where every group is constant.

    References
    ----------
    .. [1] Box, G. E. P. & Cox, D. R. (1964). An analysis of transformations. Journal of the
           Royal Statistical Society B 26, 211-252.
    """
    from scipy.special import chdtri

    values, bidx, batch, (lo, hi), level, snap_t = _validate_boxcox(
        groups, bounds, confidence_level, snap
    )
    log_y = np.log(values)
    const = np.stack(
        [np.all(log_y[..., bidx[i] : bidx[i + 1]] == log_y[..., bidx[i] : bidx[i] + 1], axis=-1)
         for i in range(len(bidx) - 1)],
        axis=-1,
    ).all(axis=-1)
    computable, reason = flag_cases(
        batch, (const, "every group is constant, so no power makes the within-group spread informative")
    )
    # Not computable elements get harmless stand-in data so no warning or NaN arises.
    stand_in = np.linspace(-1.0, 1.0, values.shape[-1])
    log_y = np.where(computable[..., None], log_y, stand_in)
    prof = _Profile(log_y, bidx, computable)
    jac_offset = -prof.n_total * prof.log_gm  # -N log gm: the lambda-free part of the Jacobian

    grid = _grid(lo, hi)
    ll_grid = _profile_on_grid(prof, grid, batch)
    j = np.argmax(ll_grid, axis=-1)
    a = grid[np.maximum(j - 1, 0)]
    b = grid[np.minimum(j + 1, grid.size - 1)]
    refined = _golden_max(prof, a, b)
    use_grid = prof(grid[j]) >= prof(refined)
    lam_hat = np.where(use_grid, grid[j], refined)
    ll_max = prof(lam_hat)

    # Likelihood-ratio interval: loglik >= max - chi2_1(level) / 2.
    cut = ll_max - 0.5 * chdtri(1.0, 1.0 - level)
    idx = np.arange(grid.size)
    under = ll_grid < cut[..., None]
    left = np.where(under & (idx <= j[..., None]), idx, -1).max(axis=-1)
    right = np.where(under & (idx >= j[..., None]), idx, grid.size).min(axis=-1)
    open_low = left < 0
    open_high = right >= grid.size
    low_b = grid[np.maximum(left, 0)]
    low_a = np.minimum(grid[np.clip(left + 1, 0, grid.size - 1)], lam_hat)
    high_b = grid[np.minimum(right, grid.size - 1)]
    high_a = np.maximum(grid[np.clip(right - 1, 0, grid.size - 1)], lam_hat)
    ci_low = np.where(open_low, lo, _bisect_cut(prof, low_b, low_a, cut))
    ci_high = np.where(open_high, hi, _bisect_cut(prof, high_b, high_a, cut))
    at_bound = (lam_hat <= lo) | (lam_hat >= hi)

    # Snapping to an interpretable exponent inside the interval.
    if snap_t is None:
        lam_snap = lam_hat
        snapped = np.zeros(batch, dtype=bool)
        note = np.full(batch, "no snapping requested")
    else:
        cand = np.asarray(snap_t)
        inside = (cand >= ci_low[..., None]) & (cand <= ci_high[..., None])
        dist = np.where(inside, np.abs(cand - lam_hat[..., None]), np.inf)
        pick = np.argmin(dist, axis=-1)  # first of equal distances: earlier entry wins
        snapped = inside.any(axis=-1)
        lam_snap = np.where(snapped, cand[pick], lam_hat)
        listed = ", ".join(f"{s:g}" for s in snap_t)
        note = np.where(
            snapped,
            "the nearest listed value inside the interval was used",
            f"no listed value ({listed}) lies inside the interval; the estimate is kept",
        )

    def fin(x):
        return scalarize(np.where(computable, x, np.nan))

    ll_grid = np.where(computable[..., None], ll_grid + jac_offset[..., None], np.nan)
    return BoxCoxResult(
        lmbda=fin(lam_hat),
        ci=Interval(low=fin(ci_low), high=fin(ci_high)),
        loglik=fin(ll_max + jac_offset),
        profile=BoxCoxProfile(lmbda=grid, loglik=scalarize(ll_grid)),
        lmbda_snapped=fin(lam_snap),
        snapped=scalarize(snapped & computable),
        snap_note=scalarize(np.where(computable, note, "not computable")),
        at_bound=scalarize(at_bound & computable),
        ci_open_low=scalarize(open_low & computable),
        ci_open_high=scalarize(open_high & computable),
        bounds=(lo, hi),
        confidence_level=level,
        snap=snap_t,
        computable=scalarize(computable),
        reason=scalarize(reason),
    )
