"""Design checks before a multi-factor fit: each message triggered, data never changed.

Outside references: Searle (1987), Linear Models for Unbalanced Data, ch. 4-5 (empty
cells and estimability: with an empty cell of an A x B table the interaction has
(a-1)(b-1) - 1 estimable df and the crossed model is not of full rank); Montgomery,
Design and Analysis of Experiments, ch. 5 (one observation per cell: no error df for
the interaction model) and ch. 14 (nested factors), both from memory; statsmodels
``anova_lm`` for the additive fits that remain possible.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine.errors import DesignError, EditError


def grid(a: int, b: int, reps: int, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = [(f"a{i}", f"b{j}") for i in range(a) for j in range(b) for _ in range(reps)]
    frame = pd.DataFrame(rows, columns=["fa", "fb"])
    frame["y"] = rng.normal(size=len(frame)) + 10
    return frame


def test_empty_cell_with_interaction_names_cell_terms_and_remedies():
    """Searle (1987) ch. 4: an empty cell leaves the A x B interaction not fully estimable."""
    frame = grid(3, 3, 2)
    frame = frame[~((frame.fa == "a1") & (frame.fb == "b2"))]
    before = frame.copy(deep=True)
    with pytest.raises(DesignError) as err:
        ex.Study(frame, "y", ["fa", "fb"])
    msg = str(err.value)
    assert "empty cells" in msg and "fa=a1, fb=b2" in msg
    assert "fa × fb" in msg and "interactions=False" in msg and "merge" in msg
    pd.testing.assert_frame_equal(frame, before)


def test_empty_cell_additive_model_fits_with_note():
    """statsmodels anova_lm(typ=2) on the additive model with an empty cell (connected design), rtol 1e-9."""
    frame = grid(3, 3, 2, seed=1)
    frame = frame[~((frame.fa == "a1") & (frame.fb == "b2"))].reset_index(drop=True)
    r = ex.Study(frame, "y", ["fa", "fb"], interactions=False).results
    assert any("Empty cells" in n and "fa=a1, fb=b2" in n for n in r.notes)
    ref = anova_lm(ols("y ~ C(fa) + C(fb)", frame).fit(), typ=2)
    np.testing.assert_allclose(r.partition.row("fa").sum_sq, ref.loc["C(fa)", "sum_sq"], rtol=1e-9)
    np.testing.assert_allclose(r.partition.row("fb").sum_sq, ref.loc["C(fb)", "sum_sq"], rtol=1e-9)


def test_one_observation_per_cell_offers_additive_model():
    """Montgomery ch. 5 (from memory): one observation per cell leaves no error df for the interaction model."""
    frame = grid(3, 4, 1)
    with pytest.raises(DesignError) as err:
        ex.Study(frame, "y", ["fa", "fb"])
    msg = str(err.value)
    assert "one observation" in msg and "interactions=False" in msg and "interaction cannot be tested" in msg
    r = ex.Study(frame, "y", ["fa", "fb"], interactions=False).results
    assert r.df_resid == 6
    assert any("interaction cannot be tested" in n for n in r.notes)


def test_numeric_factor_column_is_surfaced():
    """The dataset's note on a numeric factor column reaches the results' notes."""
    frame = grid(2, 3, 2)
    frame["fb"] = frame["fb"].str[1].astype(int) * 10
    r = ex.Study(frame, "y", ["fa", "fb"]).results
    assert any("'fb' is numeric" in n and "level" in n for n in r.notes)


def test_nested_factor_is_detected():
    """Montgomery ch. 14 (from memory): lots nested in suppliers cannot be crossed with them."""
    rng = np.random.default_rng(4)
    rows = [(s, f"{s}-lot{k}") for s in ("S1", "S2") for k in range(3) for _ in range(2)]
    frame = pd.DataFrame(rows, columns=["supplier", "lot"])
    frame["y"] = rng.normal(size=len(frame))
    for interactions in (True, False):
        with pytest.raises(DesignError) as err:
            ex.Study(frame, "y", ["supplier", "lot"], interactions=interactions)
        msg = str(err.value)
        assert "'lot' is nested in 'supplier'" in msg and "factors=['supplier']" in msg


def test_confounded_factors_are_detected():
    """Two columns that group the rows identically cannot be separated (Searle 1987, ch. 5, connectedness)."""
    frame = grid(3, 1, 4)
    frame["fb"] = frame["fa"].str.replace("a", "line")
    with pytest.raises(DesignError, match="group the rows the same way"):
        ex.Study(frame, "y", ["fa", "fb"], interactions=False)


def test_single_level_factor_is_refused():
    """A factor observed at one level has no effect to estimate."""
    frame = grid(3, 1, 3)
    with pytest.raises(DesignError, match="'fb' has observations at one level only"):
        ex.Study(frame, "y", ["fa", "fb"])


def test_rcbd_one_observation_per_cell_note_and_block_row():
    """Montgomery ch. 4: an RCBD has one observation per treatment-block cell; its residual is the
    block-by-treatment variation (statsmodels anova_lm(typ=2), rtol 1e-9)."""
    frame = grid(4, 5, 1, seed=2).rename(columns={"fb": "block"})
    r = ex.Study(frame, "y", "fa", blocks="block").results
    assert any("randomized complete block" in n for n in r.notes)
    ref = anova_lm(ols("y ~ C(fa) + C(block)", frame).fit(), typ=2)
    np.testing.assert_allclose(r.partition.row("block").sum_sq, ref.loc["C(block)", "sum_sq"], rtol=1e-9)
    assert r.blocking is not None and r.blocking.relative_efficiency is not None


def test_edit_that_empties_a_cell_is_refused_and_state_kept():
    """Dropping the last rows of a cell under the interaction model is refused (Searle 1987 ch. 4); state unchanged."""
    frame = grid(2, 2, 2)
    study = ex.Study(frame, "y", ["fa", "fb"])
    before = study.results
    cell = frame.index[(frame.fa == "a0") & (frame.fb == "b1")].tolist()
    with pytest.raises(EditError) as err:
        study.drop(cell, reason="test")
    assert "empty cells" in str(err.value) and "interactions=False" in str(err.value)
    assert study.results is before and not study.edits


def test_types_disagree_note():
    """Unbalanced data where Types I, II and III disagree at alpha (values from statsmodels anova_lm)."""
    rng = np.random.default_rng(0)
    rows = [("a0", "b0")] * 20 + [("a0", "b1")] * 2 + [("a1", "b0")] * 2 + [("a1", "b1")] * 20
    frame = pd.DataFrame(rows, columns=["fa", "fb"])
    frame["y"] = (frame.fb == "b1") * 1.2 + rng.normal(scale=1.0, size=len(frame))
    r = ex.Study(frame, "y", ["fa", "fb"]).results
    ps = {k: r.partitions[k].row("fa").pvalue for k in ("I", "II", "III")}
    assert len({p < 0.05 for p in ps.values()}) == 2
    assert any("types disagree about 'fa'" in n for n in r.notes)
    assert any("Unbalanced design" in n for n in r.notes)


def test_level_emptied_by_edit_is_left_out_with_note():
    """Moving every row of a level elsewhere leaves the level out and says so (like the one-way engine)."""
    frame = grid(3, 2, 2)
    study = ex.Study(frame, "y", ["fa", "fb"], interactions=False)
    for row in frame.index[frame.fa == "a2"]:
        study.reassign(int(row), "fa", "a1", reason="test")
    r = study.results
    assert r.marginal_means["fa"].labels == ("a0", "a1")
    assert any("'a2'" in n and "no observations" in n for n in r.notes)
