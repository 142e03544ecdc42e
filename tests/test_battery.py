"""The one-way battery bundle (explorer.inference.battery) and ``Study.battery``.

Each part is checked against its outside reference in its own test file; here the
bundle is checked against the same references on the e-Handbook data (NIST/SEMATECH
7.4.3.3/7.4.7.1: F = 9.59 for three levels; scipy.stats.f_oneway for four), and for
the promise that the reported methods never switch silently when edits unbalance the
groups or make their spreads unequal.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from groups_support import NIST_TUKEY_GROUPS, frame_from_groups, study_from_groups
from scipy import stats

import explorer as ex
from explorer.engine.errors import DesignError, ExplorerError
from explorer.inference.battery import Battery, run_battery
from explorer.inference.comparisons import tukey


def _methods(b: Battery) -> tuple:
    return (
        tuple(t.method for t in b.omnibus), tuple(c.method for c in b.checks),
        tuple((t.adjustment, t.family_size) for t in b.comparisons), tuple(s.method for s in b.screens),
        b.letters.method.split(" (")[1],
    )


def test_bundle_on_handbook_data() -> None:
    """Classic F = 9.59 on the three-level e-Handbook data (7.4.3.3, printed 2 decimals) and
    f_oneway on four levels; every part present; permutation run only when asked."""
    three = study_from_groups(NIST_TUKEY_GROUPS[:3]).battery()
    assert three.classic.statistic == pytest.approx(9.59, abs=0.005)
    study = study_from_groups(NIST_TUKEY_GROUPS)
    b = study.battery(control="L1", permutations=499, seed=3)
    assert b.classic.pvalue == pytest.approx(stats.f_oneway(*NIST_TUKEY_GROUPS).pvalue, rel=1e-10)
    assert len(b.omnibus) == 5 and b.permutation.permutations == 499
    assert b.dunnett is not None and b.dunnett.family_size == 3
    assert b.letters.letter_of("L2") == "a" and b.tukey.method == "Tukey"
    assert dict(b.options)["control"] == "L1"
    assert isinstance(b.omnibus_frame(), pd.DataFrame) and len(b.checks_frame()) == 3
    default = study.battery()
    assert default.permutation is None and any("Permutation F not run" in n for n in default.notes)


def test_no_silent_switch_when_an_edit_unbalances_and_spreads_diverge() -> None:
    """Balanced with similar spreads, then an edit that unbalances the sizes, and data whose
    spreads differ: the same tests, checks, families and screens are reported; only the
    Tukey table's name (Tukey -> Tukey-Kramer) changes, with a note. The suggested test does not
    move with the checks (it is information, not a switch); what the checks show does."""
    rng = np.random.default_rng(2)
    groups = [np.round(rng.normal(10, 1, 12), 2) for _ in range(4)]
    study = study_from_groups(groups)
    before = study.battery()
    study.drop([0, 1, 2, 3, 4], reason="test: unbalance")
    after = study.battery()
    assert _methods(before) == _methods(after)
    assert before.tukey.method == "Tukey" and after.tukey.method == "Tukey-Kramer"
    assert any("unequal" in n for n in after.notes) and not any("unequal" in n for n in before.notes)
    wide = study_from_groups([g if i < 3 else (g - g.mean()) * 6 + g.mean() for i, g in enumerate(groups)])
    w = wide.battery()
    assert w.recommendation.test == before.recommendation.test == "Welch F"
    assert w.recommendation.spreads_differ and not before.recommendation.spreads_differ
    assert _methods(w) == _methods(before)


def test_battery_changes_nothing_and_repr_is_clean() -> None:
    """The battery never edits the study; its HTML shows no 'nan'; no warnings escape."""
    frame = frame_from_groups(NIST_TUKEY_GROUPS)
    study = ex.Study(frame, response="y", factors="level")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = run_battery(study.results, control="L4", dunnett_alternative="greater")
    assert study.edits == () and study.results.n_used == 20
    page = b._repr_html_()
    assert "nan" not in page.lower()
    for heading in ("Tests of equal level means", "Assumption checks",
                    "Suggested overall test (information, not a switch)", "Games-Howell",
                    "Dunnett", "Letters", "Effect sizes", "Power", "Grubbs"):
        assert heading in page
    assert b.flagged_rows() == {s.method: s.flagged for s in b.screens}


def test_battery_refuses_bad_options_and_factorial() -> None:
    study = study_from_groups(NIST_TUKEY_GROUPS)
    with pytest.raises(ExplorerError, match="letters_from"):
        study.battery(letters_from="scheffe")
    with pytest.raises(ExplorerError, match="control level"):
        study.battery(control="L9")
    frame = frame_from_groups(NIST_TUKEY_GROUPS)
    frame["block"] = np.tile(["b1", "b2", "b3", "b4", "b5"], 4)
    blocked = ex.Study(frame, response="y", factors="level", blocks="block")
    with pytest.raises(DesignError, match="one-way"):
        blocked.battery()
    with pytest.raises(DesignError, match="least-squares means"):
        tukey(blocked.results)


def test_row_order_and_drop_restore_change_nothing() -> None:
    """Invariants: shuffling the rows, or dropping then restoring one, leaves every battery number unchanged."""
    rng = np.random.default_rng(4)
    frame = frame_from_groups([rng.normal(10 + i, 1 + 0.3 * i, 9 + i) for i in range(4)])
    shuffled = frame.sample(frac=1.0, random_state=1)
    a = ex.Study(frame, response="y", factors="level").battery()
    b = ex.Study(shuffled, response="y", factors="level").battery()
    study = ex.Study(frame, response="y", factors="level")
    study.drop([3], reason="test")
    study.restore([3], reason="test")
    c = study.battery()
    for other in (b, c):
        for x, y in zip(a.omnibus + a.checks, other.omnibus + other.checks):
            assert x.statistic == pytest.approx(y.statistic, rel=1e-12)
        for x, y in zip(a.comparisons, other.comparisons):
            np.testing.assert_allclose(x.pvalue, y.pvalue, rtol=1e-10)
        assert a.letters.letters == other.letters.letters
