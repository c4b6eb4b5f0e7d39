"""Pure numerics for comparing group means: numpy arrays in, frozen results out.

Every function takes k groups as separate arrays shaped ``(..., n_i)``; the leading axes are a
batch (endpoints or simulated replicates) and results come back shaped ``(...)``. See
:mod:`planrunner.stats._core` for the conventions on degenerate input. This package imports
nothing from the rest of planrunner.
"""

from ._core import DegenerateError, DomainError, InputError, Interval, StatsError
from .anova import (
    BrownForsytheResult,
    KruskalWallisResult,
    OnewayResult,
    WelchResult,
    brown_forsythe_anova,
    kruskal_wallis,
    oneway_anova,
    welch_anova,
)
from .boxcox import BoxCoxProfile, BoxCoxResult, boxcox_oneway
from .comparisons import Comparisons, dunnett, games_howell, pairwise_t, tukey_kramer
from .distributions import (
    dunnett_adjusted_pvalues,
    dunnett_cdf,
    dunnett_critical,
    dunnett_sf,
    fmax_cdf,
    fmax_critical,
    fmax_sf,
    studentized_range_cdf,
    studentized_range_ppf,
    studentized_range_sf,
)
from .effect import EffectSizes, effect_sizes
from .hartley import FmaxResult, hartley_fmax
from .normality import ShapiroResult, shapiro_wilk
from .power import AnovaPower, AnovaSampleSize, anova_power, anova_sample_size
from .summary import (
    GroupSummary,
    StudentizedResiduals,
    describe_groups,
    residuals,
    studentized_residuals,
)
from .transforms import TRANSFORMS, Transform, get_transform
from .variance import VarianceTestResult, bartlett, fligner_killeen, levene

__all__ = [
    "AnovaPower",
    "AnovaSampleSize",
    "BoxCoxProfile",
    "BoxCoxResult",
    "BrownForsytheResult",
    "Comparisons",
    "DegenerateError",
    "DomainError",
    "EffectSizes",
    "FmaxResult",
    "GroupSummary",
    "InputError",
    "Interval",
    "KruskalWallisResult",
    "OnewayResult",
    "ShapiroResult",
    "StatsError",
    "StudentizedResiduals",
    "TRANSFORMS",
    "Transform",
    "VarianceTestResult",
    "WelchResult",
    "anova_power",
    "anova_sample_size",
    "bartlett",
    "boxcox_oneway",
    "brown_forsythe_anova",
    "describe_groups",
    "dunnett",
    "dunnett_adjusted_pvalues",
    "dunnett_cdf",
    "dunnett_critical",
    "dunnett_sf",
    "effect_sizes",
    "fligner_killeen",
    "fmax_cdf",
    "fmax_critical",
    "fmax_sf",
    "games_howell",
    "get_transform",
    "hartley_fmax",
    "kruskal_wallis",
    "levene",
    "oneway_anova",
    "pairwise_t",
    "residuals",
    "shapiro_wilk",
    "studentized_range_cdf",
    "studentized_range_ppf",
    "studentized_range_sf",
    "studentized_residuals",
    "tukey_kramer",
    "welch_anova",
]
