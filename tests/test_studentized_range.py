"""The studentized range distribution (quadrature in explorer.engine.studentized_range).

Outside references: the exact identity Q = sqrt(2)|T| for two means (t distribution
from scipy.stats.t); scipy.stats.studentized_range (scipy 1.17) for k >= 3; the
published 5% points q(0.95; 3, 12) = 3.773 and q(0.95; 4, 16) = 4.046 (any studentized
range table, e.g. NIST/SEMATECH e-Handbook; listed with the project's references).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from explorer.engine.studentized_range import srange_cdf, srange_ppf, srange_sf


@pytest.mark.parametrize("df", [1, 2, 5, 12, 40, 300, 5000, 1e5, np.inf])
def test_two_means_equals_t_tail(df: float) -> None:
    """k = 2: P(Q > q) = 2 P(T > q / sqrt(2)) exactly (scipy.stats.t.sf), tails included."""
    q = np.array([0.1, 0.5, 1.0, 2.0, 3.0, 4.5, 6.0, 8.0, 10.0])
    want = 2 * stats.t.sf(q / np.sqrt(2), df)
    keep = want > 1e-14
    np.testing.assert_allclose(srange_sf(q, 2, df)[keep], want[keep], rtol=2e-7)


@pytest.mark.parametrize("k", [3, 8, 20])
@pytest.mark.parametrize("df", [2, 12, 100, 9992])
def test_tail_matches_scipy(k: int, df: float) -> None:
    """Against scipy.stats.studentized_range.sf (adaptive integration), p above 1e-9."""
    q = np.array([0.5, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0])
    want = stats.studentized_range.sf(q, k, df)
    keep = want > 1e-9
    np.testing.assert_allclose(srange_sf(q, k, df)[keep], want[keep], rtol=2e-6)


def test_infinite_df_matches_scipy() -> None:
    """df = inf (range of normals) against scipy.stats.studentized_range.sf(q, k, inf)."""
    q = np.array([1.0, 2.5, 4.0, 5.5])
    np.testing.assert_allclose(srange_sf(q, 6, np.inf), stats.studentized_range.sf(q, 6, np.inf), rtol=1e-7)


def test_published_upper_points() -> None:
    """q(0.95; 3, 12) = 3.773 and q(0.95; 4, 16) = 4.046 (studentized range table, 4 printed digits)."""
    assert srange_ppf(0.95, 3, 12)[0] == pytest.approx(3.773, abs=5e-4)
    assert srange_ppf(0.95, 4, 16)[0] == pytest.approx(4.046, abs=5e-4)


@pytest.mark.parametrize(("p", "k", "df"), [(0.95, 8, 9992), (0.99, 5, 2), (0.9, 30, 3)])
def test_quantiles_match_scipy(p: float, k: int, df: float) -> None:
    """srange_ppf against scipy.stats.studentized_range.ppf, and it inverts srange_cdf."""
    q = srange_ppf(p, k, df)[0]
    assert q == pytest.approx(stats.studentized_range.ppf(p, k, df), rel=1e-8)
    assert srange_cdf(q, k, df) == pytest.approx(p, abs=1e-10)


def test_vectorised_df_and_bad_input() -> None:
    """Many df at once equal one at a time; k < 2 and p outside [0.5, 1) are refused."""
    dfs = np.array([3.0, 17.5, 250.0])
    together = srange_ppf(0.95, 4, dfs)
    apart = [srange_ppf(0.95, 4, d)[0] for d in dfs]
    np.testing.assert_allclose(together, apart, rtol=1e-12)
    with pytest.raises(ValueError, match="at least 2"):
        srange_sf(1.0, 1, 10)
    with pytest.raises(ValueError, match="probability"):
        srange_ppf(0.2, 3, 10)
