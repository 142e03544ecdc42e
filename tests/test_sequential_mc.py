"""Sequential Monte Carlo decisions of the permutation F (explorer.inference.sequential_mc).

Oracles: scipy.stats.permutation_test (exact enumeration of every grouping on small data:
the exact permutation p-value the Monte Carlo one estimates), scipy.stats.binomtest's
Clopper-Pearson interval ('exact'), scipy.stats.f_oneway for the statistic, and a
simulation of the stopping rule on Bernoulli draws for its resampling risk (Fay and
Follmann 2002; Gandy 2009).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.inference.omnibus import PERMUTATION_SEED, PERMUTATIONS, overall_test, permutation_f
from explorer.inference.sequential_mc import RESAMPLING_RISK, looks, ordering_chunks, settled
from explorer.sensitivity.alternatives import oneway_input
from explorer.sensitivity.chosen_test import ChosenTest


def _small(seed: int, shift: float) -> pd.DataFrame:
    """Three levels of 3, 3 and 4 rows (4,200 groupings: scipy enumerates them all)."""
    rng = np.random.default_rng(seed)
    g = np.repeat(["a", "b", "c"], [3, 3, 4])
    y = np.round(rng.normal(size=10) + shift * (g == "c"), 2)
    return pd.DataFrame({"g": g, "y": y})


def _exact_p(df: pd.DataFrame) -> float:
    groups = [v.to_numpy() for _, v in df.groupby("g")["y"]]
    res = stats.permutation_test(groups, lambda *s, axis: stats.f_oneway(*s, axis=axis).statistic,
                                 permutation_type="independent", vectorized=True, n_resamples=np.inf,
                                 alternative="greater")
    return float(res.pvalue)


def test_looks_and_chunks():
    assert looks(9999) == (99, 199, 399, 799, 1599, 3199, 6399, 9999)
    assert looks(50) == (50,)
    a = np.vstack(list(ordering_chunks(30, 250, 4, looks(250))))
    rng = np.random.default_rng(4)
    b = rng.permuted(np.broadcast_to(np.arange(30), (250, 30)), axis=1)  # the same stream, another chunking
    assert np.array_equal(a, b)


@pytest.mark.parametrize(("hits", "used"), [(0, 99), (3, 199), (50, 99), (20, 399), (399, 399)])
def test_settled_uses_clopper_pearson(hits, used):
    """The interval is scipy binomtest's exact (Clopper-Pearson) interval at level 1 - risk / looks."""
    n_looks = 8
    ci = stats.binomtest(hits, used).proportion_ci(confidence_level=1 - RESAMPLING_RISK / n_looks, method="exact")
    p_hat = (hits + 1) / (used + 1)
    for alpha in (0.01, 0.05, 0.2):
        want = (ci.high < alpha and p_hat < alpha) or (ci.low > alpha and p_hat >= alpha)
        assert bool(settled(np.array([hits]), np.array([used]), alpha, n_looks)[0]) == want


def test_resampling_risk_by_simulation():
    """True p on either side of alpha = 0.05 (0.035 and 0.065): 4,000 simulated runs of the rule each; the share
    of runs stopped early on the wrong side stays within the bound (expected at most 1e-3; allowed 3 runs)."""
    rng = np.random.default_rng(7)
    marks = looks(PERMUTATIONS)
    for p_true in (0.035, 0.065):
        runs = 4000
        hits = np.zeros(runs)
        done = 0
        wrong = 0
        active = np.ones(runs, dtype=bool)
        for mark in marks[:-1]:
            hits += rng.binomial(mark - done, p_true, runs)
            done = mark
            stop = active & settled(hits, np.full(runs, done), 0.05, len(marks))
            p_hat = (hits + 1) / (done + 1)
            wrong += int(np.sum(stop & ((p_hat < 0.05) != (p_true < 0.05))))
            active &= ~stop
        assert wrong <= 3


@pytest.mark.parametrize(("seed", "shift"), [(1, 0.0), (2, 2.5), (3, 1.2), (4, 4.0)])
def test_decision_against_exact_enumeration(seed, shift):
    """The decision's p is within 4 Monte Carlo SE of scipy's exact permutation p, the same decision when the
    exact p is more than 4 SE from alpha, and equal to the fixed-count test on the orderings it drew."""
    df = _small(seed, shift)
    study = ex.Study(df, "y", "g", test="permutation")
    d = study.decision
    out = overall_test(study.results, "permutation")
    exact = _exact_p(df)
    se = np.sqrt(max(exact * (1 - exact), 1e-4) / out.permutations)
    assert abs(d.pvalue - exact) <= 4 * se + 1 / (out.permutations + 1)
    if abs(exact - 0.05) > 4 * se:
        assert d.significant == (exact < 0.05)
    fixed = permutation_f(study.results, out.permutations, seed=PERMUTATION_SEED)
    assert d.pvalue == fixed.pvalue and out.monte_carlo_se == pytest.approx(fixed.monte_carlo_se)
    assert f"of up to {PERMUTATIONS} orderings" in d.method
    assert any("orderings" in n for n in d.notes)


def test_far_from_alpha_stops_early_and_near_alpha_draws_all():
    big = _small(4, 4.0)
    far = overall_test(ex.Study(big, "y", "g").results, "permutation")
    assert far.permutations < PERMUTATIONS and any("Stopped after" in n for n in far.notes)
    # exact p = 208 / 4200 = 0.0495 (scipy's enumeration): the rule cannot settle it and draws the whole budget
    near = _small(0, 1.8)
    assert _exact_p(near) == pytest.approx(208 / 4200)
    out = overall_test(ex.Study(near, "y", "g").results, "permutation")
    assert out.permutations == PERMUTATIONS and any("All 9999 orderings drawn" in n for n in out.notes)


def test_scan_shares_the_decision_orderings():
    """The unchanged grouping read from the scans' shared orderings gives the decision's p exactly."""
    df = _small(3, 1.2)
    study = ex.Study(df, "y", "g", test="permutation")
    data = oneway_input(study)
    perms = ChosenTest(data, study.spec).permutations
    sums = np.bincount(data.codes, weights=data.y - data.y.mean())
    p = perms.layout_pvalues(data.stats.n[None, :], np.array([0]), perms.observed(data.stats.n, sums), 0.05)
    assert p[0] == study.decision.pvalue


def test_case_deletion_against_exact_enumeration():
    """Every row of a 12-row study left out: the scan's p within 4 Monte Carlo SE (its orderings used) of
    scipy's exact permutation p of the refit data."""
    rng = np.random.default_rng(5)
    g = np.repeat(["a", "b", "c"], [4, 4, 4])
    df = pd.DataFrame({"g": g, "y": np.round(rng.normal(size=12) + 0.9 * (g == "c"), 2)})
    scan = ex.Study(df, "y", "g", test="permutation").case_deletion(record=False)
    for j, row in enumerate(scan.row_ids.tolist()):
        exact = _exact_p(df.drop(index=row))
        used = scan.permutations_used[j]
        se = np.sqrt(max(exact * (1 - exact), 1e-4) / used)
        assert abs(scan.pvalue[j] - exact) <= 4 * se + 1 / (used + 1), row


def test_null_rejection_rate_and_agreement_with_the_fixed_count_test():
    """200 seeded null data sets (skewed, 4 + 5 + 6 rows): the sequential decision rejects at a rate within three
    binomial SE of alpha = 0.05, and agrees with the fixed-count test's decision (all 9999 orderings, same seed)
    on all but at most one data set (the resampling risk is at most 0.001 against the exact p)."""
    rng = np.random.default_rng(12)
    g = np.repeat(["a", "b", "c"], [4, 5, 6])
    runs, rejected, differ = 200, 0, 0
    for _ in range(runs):
        results = ex.Study(pd.DataFrame({"g": g, "y": rng.exponential(size=15)}), "y", "g").results
        seq = overall_test(results, "permutation").pvalue < 0.05
        fixed = permutation_f(results, PERMUTATIONS, seed=PERMUTATION_SEED).pvalue < 0.05
        rejected += seq
        differ += seq != fixed
    assert abs(rejected / runs - 0.05) <= 3 * np.sqrt(0.05 * 0.95 / runs)
    assert differ <= 1


def test_a_bad_alpha_is_refused():
    from explorer.engine.errors import ExplorerError

    results = ex.Study(_small(1, 0.0), "y", "g").results
    for bad in (0.0, 1.5, "0.05", True):
        with pytest.raises(ExplorerError, match="alpha"):
            permutation_f(results, 99, alpha=bad)
