"""Power of the one-way F test and group size for a target power (explorer.inference.power).

Outside references: Cohen (1988) Statistical Power Analysis, Table 8.4.4 (from memory):
four groups (u = 3), f = 0.25, alpha 0.05, power 0.80 -> n = 45 per group; and the
two-group case d = 0.5 (f = 0.25) -> n = 64 per group (Cohen 1988, Table 2.4.1, from
memory). Direct noncentral F with scipy.stats.ncf; statsmodels FTestAnovaPower and
pingouin.power_anova.
"""

from __future__ import annotations

import numpy as np
import pingouin as pg
import pytest
from groups_support import NIST_TUKEY_GROUPS, random_groups, study_from_groups
from scipy import stats
from statsmodels.stats.power import FTestAnovaPower

from explorer.engine.errors import ExplorerError
from explorer.inference.power import f_test_power, group_size_for_power, power_plan


def test_cohen_table_values() -> None:
    """Cohen (1988) tables, from memory: 45 per group (k=4, f=.25) and 64 per group (k=2, f=.25)."""
    assert group_size_for_power(0.25, 4, power=0.8, alpha=0.05) == 45
    assert group_size_for_power(0.25, 2, power=0.8, alpha=0.05) == 64


@pytest.mark.parametrize(("f", "k", "n"), [(0.1, 3, 120), (0.25, 4, 180), (0.4, 8, 40), (1.2, 2, 6)])
def test_power_matches_direct_noncentral_f(f: float, k: int, n: int) -> None:
    """Power = ncf.sf(F crit; k-1, N-k, N f^2) (scipy.stats.ncf), statsmodels FTestAnovaPower
    and pingouin.power_anova (eta2 = f^2 / (1 + f^2), n per group)."""
    direct = stats.ncf.sf(stats.f.isf(0.05, k - 1, n - k), k - 1, n - k, n * f * f)
    got = f_test_power(f, k, n, 0.05)
    assert got == pytest.approx(direct, rel=1e-10)
    assert got == pytest.approx(FTestAnovaPower().power(effect_size=f, nobs=n, alpha=0.05, k_groups=k), rel=1e-10)
    if n % k == 0:
        assert got == pytest.approx(pg.power_anova(eta_squared=f * f / (1 + f * f), k=k, n=n // k), rel=1e-8)


@pytest.mark.parametrize(("f", "k"), [(0.1, 4), (0.25, 3), (0.6, 6), (0.02, 2)])
def test_group_size_is_the_smallest(f: float, k: int) -> None:
    """n reaches the target power and n - 1 does not (direct noncentral F)."""
    n = group_size_for_power(f, k, power=0.9)
    assert f_test_power(f, k, n * k) >= 0.9
    if n > 2:
        assert f_test_power(f, k, (n - 1) * k) < 0.9


def test_power_plan_on_a_study() -> None:
    """Observed effect: Cohen's f = sqrt(SSB/SSW) and a caution note; a typed effect is used as given."""
    res = study_from_groups(NIST_TUKEY_GROUPS).results
    plan = power_plan(res)
    assert plan.effect_f == pytest.approx(np.sqrt(res.groups.ss_between / res.groups.ss_within))
    assert plan.effect_source == "observed" and "restates the p-value" in plan.notes[0]
    typed = power_plan(res, effect_f=0.25, target_power=0.8)
    assert typed.power == pytest.approx(f_test_power(0.25, 4, 20))
    assert typed.n_per_level_needed == 45 and "45 per level" in typed.sentence()
    unbalanced = power_plan(study_from_groups(random_groups([5, 7, 9], seed=1)).results, effect_f=0.3)
    assert any("Group sizes differ" in n for n in unbalanced.notes)


def test_bad_power_input() -> None:
    with pytest.raises(ExplorerError, match="target power"):
        group_size_for_power(0.3, 3, power=1.2)
    with pytest.raises(ExplorerError, match="positive effect"):
        group_size_for_power(0.0, 3)
    with pytest.raises(ExplorerError, match="more observations than levels"):
        f_test_power(0.3, 3, 3)
