"""The one-way battery at 1,500-2,000 levels: bounded memory, no raw errors, correct where computed.

Invented data: 2,000 levels, two rows each plus 20,000 spread at random (24,000 rows),
no real differences, so the noncentral-F interval has to be found near zero (where the
root finder used to fail). References: scipy ``f_oneway`` (classic and Welch),
``kruskal``, ``levene``, ``bartlett``, ``ncf.cdf`` (the interval limits),
``stats.t`` (pooled pairwise t), statsmodels ``multipletests`` (Holm), and for a sample
of Games-Howell pairs ``ttest_ind(equal_var=False)`` and ``studentized_range`` on the
same data. Memory is measured with ``tracemalloc`` (Python and numpy allocations).
"""

from __future__ import annotations

import random
import tracemalloc

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.engine import studentized_range
from explorer.engine.errors import ExplorerError
from explorer.inference import letters as letters_module
from explorer.inference.battery import EAGER_PAIRS
from explorer.inference.comparisons import PairwiseTable, dunnett
from explorer.inference.effect_sizes import effect_sizes
from explorer.inference.letters import compact_letters


def _frame(k: int, n: int, seed: int = 0, effect: float = 0.0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    g = np.concatenate([np.arange(k), np.arange(k), rng.integers(0, k, n - 2 * k)])
    return pd.DataFrame({"lot": [f"L{i:04d}" for i in g], "y": rng.normal(size=n) + effect * (g % 7)})


@pytest.fixture(scope="module")
def big():
    frame = _frame(2000, 24_000)
    study = ex.Study(frame, "y", "lot")
    tracemalloc.start()
    battery = study.battery()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    groups = [v.to_numpy() for _, v in frame.groupby("lot").y]
    return frame, study, battery, peak, groups


def test_battery_at_2000_levels_is_bounded_and_says_what_it_deferred(big):
    _, _, b, peak, _ = big
    assert peak < 400 * 2**20, f"peak {peak / 2**20:.0f} MiB"
    assert set(b.deferred) == {"tukey", "games_howell", "pairwise_t"}
    assert any("computed when first read" in n for n in b.notes)
    assert any(n.startswith("No letters") for n in b.notes) and b.letters.letters[0] == ""
    page = b._repr_html_()
    assert "1,999,000 comparisons, computed when first read" in page and len(page) < 2_000_000
    assert set(b.deferred) == {"tukey", "games_howell", "pairwise_t"}  # drawing computed nothing


def test_uncapped_parts_at_2000_levels_match_scipy(big):
    """Classic F, Welch, Kruskal-Wallis, Levene (median), Bartlett against scipy on the same groups."""
    _, study, b, _, groups = big
    ref = stats.f_oneway(*groups)
    assert study.results.statistic() == pytest.approx(ref.statistic, rel=1e-10)
    assert b.welch.pvalue == pytest.approx(stats.f_oneway(*groups, equal_var=False).pvalue, rel=1e-6)
    assert b.kruskal_wallis.pvalue == pytest.approx(stats.kruskal(*groups).pvalue, rel=1e-8)
    assert b.levene.pvalue == pytest.approx(stats.levene(*groups, center="median").pvalue, rel=1e-8)
    assert b.bartlett.pvalue == pytest.approx(stats.bartlett(*groups).pvalue, rel=1e-8)


def test_effect_size_interval_near_zero_at_1500_levels():
    """Used to raise a raw ValueError from the root finder. Reference: scipy ncf.cdf at the limits."""
    frame = _frame(1500, 21_000, seed=0)
    r = ex.Study(frame, "y", "lot").results
    es = effect_sizes(r, confidence=0.9)
    lo, hi = es.ci_lambda
    f_obs, d1, d2 = r.statistic(), 1499, 21_000 - 1500
    assert hi > 0 and stats.ncf.cdf(f_obs, d1, d2, hi) == pytest.approx(0.05, rel=1e-6)
    assert lo == 0 or stats.ncf.cdf(f_obs, d1, d2, lo) == pytest.approx(0.95, rel=1e-6)


def test_battery_at_21000_rows_and_1500_levels_runs_in_bounded_memory():
    """The reported case that was killed for memory on a 24 GiB machine."""
    study = ex.Study(_frame(1500, 21_000, seed=4), "y", "lot")
    tracemalloc.start()
    b = study.battery(control="L0000")
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 400 * 2**20
    assert any(n.startswith("No Dunnett table") for n in b.notes) and b.dunnett is None


def test_deferred_pairwise_t_is_correct_when_read(big):
    """Pooled-variance t against scipy's t distribution; Holm against statsmodels multipletests (2e6 tests)."""
    multipletests = pytest.importorskip("statsmodels.stats.multitest").multipletests
    _, study, b, _, groups = big
    table = b.pairwise_t
    assert isinstance(table, PairwiseTable) and table.family_size == 1_999_000 and "pairwise_t" not in b.deferred
    r = study.results
    n = np.array([len(g) for g in groups], dtype=float)
    means = np.array([g.mean() for g in groups])
    i, j = np.triu_indices(2000, 1)
    t = (means[i] - means[j]) / np.sqrt(r.ms_resid * (1 / n[i] + 1 / n[j]))
    raw = 2 * stats.t.sf(np.abs(t), r.df_resid)
    assert np.allclose(table.statistic, t, rtol=1e-9)
    holm = multipletests(raw, method="holm")[1]
    assert np.allclose(table.pvalue, holm, rtol=1e-8, atol=1e-300)


def test_deferred_games_howell_is_correct_when_read(big):
    """Games-Howell at 2,000 levels (1,999,000 Welch df): read when asked; for a sample of pairs (the largest
    |t| among them) the Welch t and df equal scipy ttest_ind(equal_var=False), the p-value scipy's
    studentized_range.sf(sqrt(2)|t|, 2000, df) and the interval's half-width scipy's ppf / sqrt(2) times the SE."""
    _, _, b, _, groups = big
    table = b.games_howell
    assert isinstance(table, PairwiseTable) and table.family_size == 1_999_000 and "games_howell" not in b.deferred
    rng = np.random.default_rng(5)
    pick = np.r_[rng.choice(table.family_size, 10, replace=False), np.argsort(-np.abs(table.statistic))[:2]]
    i, j = np.triu_indices(2000, 1)
    for m in pick:
        ref = stats.ttest_ind(groups[i[m]], groups[j[m]], equal_var=False)
        assert table.statistic[m] == pytest.approx(ref.statistic, rel=1e-9)
        assert table.df[m] == pytest.approx(ref.df, rel=1e-9)
        want = stats.studentized_range.sf(np.sqrt(2) * abs(ref.statistic), 2000, ref.df)
        assert table.pvalue[m] == pytest.approx(want, rel=1e-7, abs=1e-15)
    for m in pick[:2]:
        half = stats.studentized_range.ppf(0.95, 2000, table.df[m]) / np.sqrt(2) * table.se[m]
        assert table.ci_high[m] - table.difference[m] == pytest.approx(half, rel=1e-8)


def test_studentized_range_in_blocks_equals_one_pass(monkeypatch):
    """The blocked evaluation is the same arithmetic: identical to evaluating everything at once."""
    rng = np.random.default_rng(1)
    q = rng.uniform(0.1, 8, 5000)
    df = rng.uniform(2, 60, 5000)
    whole = studentized_range.srange_sf(q, 40, df)
    quant = studentized_range.srange_ppf(0.95, 40, df[:300])
    monkeypatch.setattr(studentized_range, "_BLOCK_CELLS", 997)
    assert np.array_equal(studentized_range.srange_sf(q, 40, df), whole)
    assert np.allclose(studentized_range.srange_ppf(0.95, 40, df[:300]), quant, rtol=1e-12)


def test_studentized_range_memory_is_bounded_for_many_points():
    """200,000 tail probabilities at different df: the working memory stays near the block size."""
    rng = np.random.default_rng(2)
    q, df = rng.uniform(0.5, 6, 200_000), rng.uniform(3, 40, 200_000)
    tracemalloc.start()
    studentized_range.srange_sf(q, 500, df)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 150 * 2**20, f"peak {peak / 2**20:.0f} MiB"


def _naive_columns(labels, pairs):
    """Piepho's insert-absorb exactly as written in the paper (every column checked each step)."""
    columns = [frozenset(labels)]
    for a, b in pairs:
        split = []
        for col in columns:
            split.extend((col - {a}, col - {b}) if a in col and b in col else (col,))
        uniq = list(dict.fromkeys(split))
        columns = [c for c in uniq if not any(c < o for o in uniq)]
    return {c for c in columns if c}


def test_faster_absorb_gives_the_same_letters_as_the_paper():
    """On 300 random significance patterns (3-12 levels) the letters equal those of the paper's loop."""
    rng = random.Random(7)
    for _ in range(300):
        k = rng.randint(3, 12)
        labels = tuple(f"T{x}" for x in range(k))
        i, j = np.triu_indices(k, 1)
        sig = np.array([rng.random() < rng.uniform(0.2, 0.8) for _ in i])
        table = PairwiseTable(
            method="test", adjustment="none", family_size=len(i), labels=labels,
            estimates=np.arange(k, 0, -1.0), first=tuple(labels[a] for a in i), second=tuple(labels[b] for b in j),
            difference=np.ones(len(i)), se=np.ones(len(i)), df=np.ones(len(i)), statistic=np.ones(len(i)),
            pvalue=np.where(sig, 0.001, 0.5), ci_low=None, ci_high=None,
        )
        shown = compact_letters(table, alpha=0.05)
        share = {(a, b) for a in labels for b in labels if set(shown.letter_of(a)) & set(shown.letter_of(b))}
        naive = _naive_columns(labels, [(labels[a], labels[b]) for a, b, s in zip(i, j, sig) if s])
        expect = {(a, b) for a in labels for b in labels if any(a in c and b in c for c in naive)}
        assert share == expect


def test_letters_give_up_with_a_note_when_the_work_would_be_unbounded(monkeypatch):
    monkeypatch.setattr(letters_module, "MAX_WORK", 1000)
    study = ex.Study(_frame(60, 720, effect=0.4), "y", "lot")
    with pytest.raises(ExplorerError, match="letters not built"):
        compact_letters(study.battery().tukey)
    b = study.battery()
    assert any(n.startswith("No letters") for n in b.notes)


def test_dunnett_beyond_its_limit_is_refused_clearly():
    r = ex.Study(_frame(150, 1800), "y", "lot").results
    with pytest.raises(ExplorerError, match="at most 100 treatments"):
        dunnett(r, "L0000")


def test_eager_limit_is_about_200_levels():
    assert 199 * 200 // 2 <= EAGER_PAIRS < 201 * 202 // 2
