"""Parts of a result made on first read (explorer/engine/deferred.py) equal the parts made at once.

An edit's recompute makes the partition (the decision's F and p) and defers the level
tables, the two-level t and the per-row fit. These tests check that the deferred parts
are made once, on first read, and equal those of a fresh analysis of the same view read
in full (same bits); the statistics themselves are checked against scipy (outside
reference: ``scipy.stats.f_oneway``, ``scipy.stats.ttest_ind``, ``scipy.stats.t``) beside.
Copies and pickles carry made values, never the closures.
"""

from __future__ import annotations

import copy
import dataclasses
import pickle

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import explorer as ex
from explorer.engine.analysis import analyze
from explorer.engine.deferred import Deferred, deferrable, deferred, is_made, replace_deferred
from explorer.engine.results import DEFERRABLE

LAZY = ("levels", "two_groups", "fit")


def _frame(n: int, k: int, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    g = rng.choice([f"L{i}" for i in range(k)], n)
    return pd.DataFrame({"g": g, "y": np.round(rng.normal(50, 3, n) + (g == "L1") * 0.7, 2)})


def _edited(k: int) -> ex.Study:
    study = ex.Study(_frame(300, k), "y", "g", units="µm")
    study.drop([0, 5, 9], reason="check")
    study.reassign(12, "g", "L0", reason="check")
    study.restore([5], reason="check")
    return study


def _same_parts(lazy, eager) -> None:
    """Every part of ``lazy`` equals ``eager``'s, bit for bit."""
    pd.testing.assert_frame_equal(lazy.partition.to_frame(), eager.partition.to_frame(), check_exact=True)
    pd.testing.assert_frame_equal(lazy.uncorrected.to_frame(), eager.uncorrected.to_frame(), check_exact=True)
    assert list(lazy.levels) == list(eager.levels)
    for f in eager.levels:
        a, b = lazy.levels[f].to_frame(), eager.levels[f].to_frame()
        pd.testing.assert_frame_equal(a, b, check_exact=True)
        assert a.attrs == b.attrs and lazy.levels[f].display == eager.levels[f].display
        assert lazy.levels[f].notes == eager.levels[f].notes
    assert lazy.two_groups == eager.two_groups
    pd.testing.assert_frame_equal(lazy.fit.to_frame(), eager.fit.to_frame(), check_exact=True)
    assert np.array_equal(lazy.fit.group, eager.fit.group) and np.array_equal(lazy.fit.positions, eager.fit.positions)
    assert (lazy.notes, lazy.reading_decimals, lazy.n_used, lazy.dropped, lazy.r_squared, lazy.ms_resid) == (
        eager.notes, eager.reading_decimals, eager.n_used, eager.dropped, eager.r_squared, eager.ms_resid)
    object.__setattr__(eager, "disclosure_source", lazy.disclosure_source)  # the study's live count, if any
    assert lazy.to_text() == eager.to_text() and lazy._repr_html_() == eager._repr_html_()


@pytest.mark.parametrize("k", [2, 5])
def test_an_edit_makes_the_partition_and_defers_the_tables_until_read(k):
    study = _edited(k)
    res = study.results
    assert all(not is_made(res, name) for name in LAZY if res.__dict__[name] is not None)
    assert res.pvalue() is not None  # the decision's numbers are there at once
    table = res.levels["g"]
    assert is_made(res, "levels") and res.levels["g"] is table  # made once, then the same object
    assert not is_made(res, "fit")
    eager = analyze(study.dataset, study.view, study.spec)
    _same_parts(res, eager)


@pytest.mark.parametrize("k", [2, 5])
def test_deferred_parts_agree_with_scipy(k):
    study = _edited(k)
    res = study.results
    kept = study.dataset.table.iloc[np.flatnonzero(study.view.kept)]
    groups = {lab: kept.loc[study.view.codes["g"][study.view.kept] == i, "y"].to_numpy()
              for i, lab in enumerate(study.view.levels["g"])}
    F, p = stats.f_oneway(*groups.values())  # outside reference: scipy.stats.f_oneway
    assert res.statistic() == pytest.approx(F, rel=1e-12) and res.pvalue() == pytest.approx(p, rel=1e-9)
    table = res.levels["g"]
    for i, lab in enumerate(table.labels):
        y = groups[lab]
        lo, hi = stats.t.interval(0.95, y.size - 1, loc=y.mean(), scale=stats.sem(y))  # outside reference: scipy.stats.t
        assert table.own_low[i] == pytest.approx(lo, rel=1e-12) and table.own_high[i] == pytest.approx(hi, rel=1e-12)
    if k == 2:
        t = stats.ttest_ind(groups["L0"], groups["L1"])  # outside reference: pooled-variance t
        assert res.two_groups.statistic == pytest.approx(t.statistic, rel=1e-11)
        assert res.two_groups.pvalue == pytest.approx(t.pvalue, rel=1e-9)
    else:
        assert res.two_groups is None


def test_results_survive_copy_and_pickle_with_their_numbers():
    study = _edited(2)
    eager = analyze(study.dataset, study.view, study.spec)
    for make in (lambda r: pickle.loads(pickle.dumps(r)), copy.copy, copy.deepcopy):
        fresh = analyze(study.dataset, study.view, study.spec)  # nothing made yet
        assert not is_made(fresh, "levels")
        _same_parts(make(fresh), eager)
    replaced = dataclasses.replace(analyze(study.dataset, study.view, study.spec), method="x")
    assert is_made(replaced, "levels") and replaced.method == "x"
    _same_parts(replaced, eager)


def test_every_deferrable_field_is_a_results_field():
    names = {f.name for f in dataclasses.fields(ex.Results)}
    assert set(DEFERRABLE) <= names and set(LAZY) <= set(DEFERRABLE)


@deferrable("b", "c")
@dataclasses.dataclass(frozen=True)
class _Pair:
    a: int
    b: list
    c: int = 0


def test_a_deferred_field_is_made_once_on_first_read_and_behaves_as_a_value():
    calls = []

    def make():
        calls.append(1)
        return [1, 2]

    p = _Pair(a=1, b=deferred(make))
    assert calls == [] and not is_made(p, "b") and "not made" in repr(p.__dict__["b"])
    assert p.b == [1, 2] and p.b is p.b and calls == [1] and is_made(p, "b")
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.b = [3]  # type: ignore[misc]
    assert p == _Pair(a=1, b=[1, 2]) and repr(p) == repr(_Pair(a=1, b=[1, 2]))


def test_replace_deferred_shares_unmade_parts_and_replace_makes_them():
    calls = []
    p = _Pair(a=1, b=deferred(lambda: calls.append(1) or [7]))
    q = replace_deferred(p, a=2)
    assert calls == [] and q.a == 2 and p.a == 1
    assert q.b == [7] and p.b is q.b and calls == [1]  # made once for both
    r = dataclasses.replace(_Pair(a=1, b=deferred(lambda: [8])), c=3)
    assert r.b == [8] and r.c == 3 and is_made(r, "b")
    with pytest.raises(TypeError, match="no init fields"):
        replace_deferred(p, zzz=1)


def test_pickle_and_copies_store_made_values_not_closures():
    p = _Pair(a=1, b=deferred(lambda: [4, 5]))
    for twin in (pickle.loads(pickle.dumps(p)), copy.copy(p), copy.deepcopy(p)):
        assert type(twin.__dict__["b"]) is not Deferred and twin == _Pair(a=1, b=[4, 5])
    assert pickle.loads(pickle.dumps(Deferred(lambda: 3))) == 3  # a loose deferred value pickles as its value


def test_deferrable_refuses_misuse():
    with pytest.raises(TypeError, match="above @dataclass"):
        deferrable("x")(type("Plain", (), {}))
    with pytest.raises(TypeError, match="no fields"):
        deferrable("zzz")(_Pair)
