"""Compact letter display (explorer.inference.letters, Piepho 2004).

Outside references: the Tukey intervals of NIST/SEMATECH e-Handbook 7.4.7.1 (levels 2
and 3 differ from 1 and 4, and not from each other); a generated overlapping case
(means 0, 1, 2 with a Tukey HSD of about 1.1: the middle level shares both letters);
a case with no differences; and the defining property of a letter display on random
tables (two levels share a letter exactly when the table does not separate them).
"""

from __future__ import annotations

import numpy as np
import pytest
from groups_support import NIST_TUKEY_GROUPS, random_groups, study_from_groups

from explorer.engine.errors import ExplorerError
from explorer.inference.comparisons import tukey
from explorer.inference.letters import compact_letters

# Ten fixed deviations with mean 0 and SD 1 (so MSE = 1 and the Tukey HSD is q * sqrt(1/10)).
_DEV = np.array([-1.5, -1.0, -0.5, 0.0, 0.5, -0.25, 0.25, 0.75, 0.25, 1.5])
_DEV = (_DEV - _DEV.mean()) / _DEV.std(ddof=1)


def test_nist_example_letters() -> None:
    """Tukey on the e-Handbook data: {level 2, level 3} share 'a', {level 1, level 4} share 'b'."""
    cld = compact_letters(tukey(study_from_groups(NIST_TUKEY_GROUPS).results))
    assert dict(zip(cld.labels, cld.letters)) == {"L3": "a", "L2": "a", "L4": "b", "L1": "b"}
    assert "Tukey" in cld.method


def test_overlapping_letters() -> None:
    """Means 0, 1, 2 (n = 10, SD 1): HSD ~ 1.11, so 0 vs 2 differ but 1 is close to both -> a, ab, b."""
    study = study_from_groups([_DEV + 0.0, _DEV + 1.0, _DEV + 2.0], ["low", "mid", "high"])
    table = tukey(study.results)
    cld = compact_letters(table)
    assert cld.labels == ("high", "mid", "low")
    assert cld.letters == ("a", "ab", "b")
    assert cld.letter_of("mid") == "ab"


def test_no_differences_share_one_letter() -> None:
    """Identical level means: no pair differs, every level gets 'a'."""
    study = study_from_groups([_DEV + 5.0, _DEV[::-1] + 5.0, np.roll(_DEV, 3) + 5.0, _DEV + 5.0])
    cld = compact_letters(tukey(study.results))
    assert set(cld.letters) == {"a"}


@pytest.mark.parametrize("seed", range(6))
def test_letters_encode_the_table(seed: int) -> None:
    """Random designs: two levels share a letter if and only if the table does not separate them."""
    groups = random_groups([8] * 7, seed=seed, shift=0.6, spread_step=0.0)
    table = tukey(study_from_groups(groups).results)
    cld = compact_letters(table, alpha=0.05)
    letters = dict(zip(cld.labels, cld.letters))
    for a, b, sig in zip(table.first, table.second, table.significant(0.05)):
        share = bool(set(letters[a]) & set(letters[b]))
        assert share == (not sig), (a, b, letters)
    with pytest.raises(ExplorerError, match="alpha"):
        compact_letters(table, alpha=5)


def _table_from_pattern(sig: np.ndarray, estimates: np.ndarray):
    """A PairwiseTable whose pairs are significant where ``sig`` is True (p 0.001, else 0.5)."""
    from explorer.inference.comparisons import PairwiseTable

    k = len(estimates)
    i, j = np.triu_indices(k, 1)
    labels = tuple(f"T{x}" for x in range(k))
    p = np.where(sig[i, j], 0.001, 0.5)
    nan = np.full(i.size, np.nan)
    return PairwiseTable(
        method="pattern", adjustment="none", family_size=i.size, labels=labels, estimates=estimates,
        first=tuple(labels[x] for x in i), second=tuple(labels[x] for x in j), difference=nan, se=nan, df=nan,
        statistic=nan, pvalue=p, ci_low=None, ci_high=None,
    )


def _removable_letters(letters: dict[str, str], sig: dict[frozenset, bool]) -> list[tuple[str, str]]:
    """Brute force: every (level, letter) whose removal leaves the level a letter and each pair
    that is not separated sharing a letter (Piepho 2004: such a letter is redundant)."""
    out = []
    for level, own in letters.items():
        for letter in own if len(own) > 1 else ():
            trial = {**letters, level: own.replace(letter, "")}
            ok = all(bool(set(trial[a]) & set(trial[b])) for a in letters for b in letters
                     if a < b and not sig[frozenset((a, b))])
            if ok:
                out.append((level, letter))
    return out


def test_letters_have_no_redundant_letter_on_random_patterns() -> None:
    """Piepho (2004) sweep: on 1,000 random significance patterns (3-8 levels, each pair
    separated with probability 0.3-0.7, seeded) the display is valid (levels share a letter
    exactly when not separated) and minimal: a brute-force check finds no letter that could
    be removed from a level without breaking it."""
    rng = np.random.default_rng(2004)
    with_redundant = 0
    for _ in range(1000):
        k = int(rng.integers(3, 9))
        upper = np.triu(rng.random((k, k)) < rng.uniform(0.3, 0.7), 1)
        sig = upper | upper.T
        table = _table_from_pattern(sig, rng.normal(size=k))
        cld = compact_letters(table, alpha=0.05)
        letters = dict(zip(cld.labels, cld.letters))
        pairs = {frozenset((a, b)): bool(s) for a, b, s in zip(table.first, table.second, table.significant(0.05))}
        for pair, s in pairs.items():
            a, b = tuple(pair)
            assert bool(set(letters[a]) & set(letters[b])) == (not s)
        assert all(letters.values())
        with_redundant += bool(_removable_letters(letters, pairs))
    assert with_redundant == 0
