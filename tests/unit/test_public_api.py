"""The public surface: sorted __all__ lists whose names all resolve, and no heavy imports."""

import importlib
import subprocess
import sys

import pytest

import planrunner
import planrunner.stats


@pytest.mark.parametrize("module", [planrunner, planrunner.stats])
def test_all_is_sorted_and_resolves(module):
    names = list(module.__all__)
    assert names == sorted(names)
    assert len(set(names)) == len(names)
    for name in names:
        assert getattr(module, name) is not None, name


def test_stats_exports_the_documented_functions():
    # The names the statistics core promises as its public API.
    promised = {
        "oneway_anova", "welch_anova", "brown_forsythe_anova", "kruskal_wallis",
        "hartley_fmax", "fmax_critical", "fmax_sf", "levene", "bartlett", "fligner_killeen",
        "shapiro_wilk", "boxcox_oneway", "tukey_kramer", "games_howell", "pairwise_t",
        "dunnett", "studentized_range_sf", "studentized_range_ppf", "effect_sizes",
        "anova_power", "anova_sample_size", "get_transform", "TRANSFORMS",
    }
    assert promised <= set(planrunner.stats.__all__)


def test_stats_package_imports_nothing_else_from_planrunner():
    code = (
        "import sys, planrunner.stats; "
        "bad = sorted(m for m in sys.modules if m.startswith('planrunner.') "
        "and not m.startswith('planrunner.stats') and m not in ('planrunner.errors', "
        "'planrunner._version')); "
        "heavy = [m for m in ('pandas', 'pydantic', 'yaml', 'statsmodels') if m in sys.modules]; "
        "print(bad, heavy)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[] []"


def test_top_level_import_is_light():
    code = (
        "import sys, planrunner; "
        "print([m for m in ('numpy', 'scipy', 'pandas', 'statsmodels', 'matplotlib') "
        "if m in sys.modules])"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
