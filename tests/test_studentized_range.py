"""The studentized range distribution (quadrature in explorer.engine.studentized_range).

Outside references: the exact identity Q = sqrt(2)|T| for two means (t distribution
from scipy.stats.t); scipy.stats.studentized_range (scipy 1.17) for k >= 3; the
published 5% points q(0.95; 3, 12) = 3.773 and q(0.95; 4, 16) = 4.046 (any studentized
range table, e.g. NIST/SEMATECH e-Handbook; listed with the project's references).

Stated tolerances: tail probabilities above 1e-8 within a relative 1e-7 of scipy for k
from 2 to 2,000 and df from 1 to infinity (scipy's adaptive integration is itself
accurate to about 1e-10 there; below 1e-8 it drifts, e.g. 3e-5 at k = 2, df = 10,
q = 40 against the exact t tail, so the far tails are checked against the t identity);
quantiles within a relative 1e-8 of scipy; quantiles interpolated over many df within
a relative 3e-9 of the one-by-one solves.
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


@pytest.mark.parametrize("k", [50, 500, 2000])
@pytest.mark.parametrize("df", [1, 2, 4, 10, 40])
def test_many_means_and_few_df_match_scipy(k: int, df: float) -> None:
    """Large k with small df (the range is concentrated, so P_R(q s) is steep in log s): against
    scipy.stats.studentized_range.sf at q from the centre to the upper tail, p above 1e-8, rtol 1e-7."""
    q = np.array([5.0, 7.0, 9.0, 12.0, 20.0])
    want = np.array([stats.studentized_range.sf(x, k, df) for x in q])
    keep = want > 1e-8
    np.testing.assert_allclose(srange_sf(q, k, df)[keep], want[keep], rtol=1e-7)


def test_a_batch_gives_each_point_its_own_answer() -> None:
    """Each point's nodes follow its own df: a mixed batch equals the points taken one at a time."""
    q = np.array([3.0, 4.5, 6.0, 9.0])
    df = np.array([1.5, 4.0, 30.0, np.inf])
    together = srange_sf(q, 200, df)
    apart = np.array([srange_sf(a, 200, b) for a, b in zip(q, df)]).ravel()
    np.testing.assert_allclose(together, apart, rtol=1e-14)


def test_quantiles_at_many_df_are_interpolated_accurately() -> None:
    """5,000 distinct df (Welch df of a large Games-Howell table): interpolated quantiles within 3e-9
    of one-by-one solves, within 1e-8 of scipy.stats.studentized_range.ppf, and inverting srange_cdf."""
    rng = np.random.default_rng(4)
    df = np.exp(rng.uniform(np.log(1.5), np.log(400.0), 5000))
    got = srange_ppf(0.95, 30, df)
    pick = rng.choice(df.size, 12, replace=False)
    one_by_one = np.array([srange_ppf(0.95, 30, d)[0] for d in df[pick]])
    np.testing.assert_allclose(got[pick], one_by_one, rtol=3e-9)
    for i in pick[:3]:
        assert got[i] == pytest.approx(stats.studentized_range.ppf(0.95, 30, df[i]), rel=1e-8)
    np.testing.assert_allclose(srange_cdf(got[pick], 30, df[pick]), 0.95, atol=1e-9)
    assert srange_ppf(0.95, 30, np.append(df, np.inf))[-1] == pytest.approx(srange_ppf(0.95, 30, np.inf)[0])


@pytest.mark.parametrize("df", [5, 18, np.inf])
def test_tails_that_round_to_one_are_one(df: float) -> None:
    """Where P(Q <= q) is below half a unit in the last place of 1 (scipy.stats.studentized_range.cdf), the
    tail is 1.0 (exactly, when the bound on P(Q <= q) shows it without integrating); just above, it is
    integrated and matches scipy's sf."""
    q = np.array([0.5, 1.0, 1.5, 2.0])
    lower = np.array([stats.studentized_range.cdf(x, 2000, df) for x in q])
    keep = lower < 5.5e-17
    assert keep.sum() >= 2 and srange_sf(0.5, 2000, df) == 1.0
    np.testing.assert_allclose(srange_sf(q[keep], 2000, df), 1.0, rtol=0, atol=2.3e-16)
    near = np.array([3.5, 4.0, 5.0])
    np.testing.assert_allclose(srange_sf(near, 2000, df), [stats.studentized_range.sf(x, 2000, df) for x in near],
                               rtol=1e-9, atol=1e-15)
