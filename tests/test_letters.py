"""Compact letter display (explorer.core.letters, Piepho 2004).

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

from explorer.core.comparisons import tukey
from explorer.core.errors import ExplorerError
from explorer.core.letters import compact_letters

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
