"""Edits and scans at unit level: a whole subject, operator or part left out.

Outside references: the scan's refits are checked against fresh studies built on the
table without that unit (the engine's own tables, themselves checked against
pingouin / statsmodels in the design tests), and one repeated-measures refit against
pingouin ``rm_anova`` on the reduced table.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.errors import EditError, ExplorerError

pg = pytest.importorskip("pingouin")


def gauge(seed=0, parts=6, operators=3, reps=2) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    p_eff, o_eff = rng.normal(scale=2, size=parts), rng.normal(scale=0.5, size=operators)
    rows = [(f"P{p}", f"O{o}", 10 + p_eff[p] + o_eff[o] + rng.normal(scale=0.4))
            for p in range(parts) for o in range(operators) for _ in range(reps)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def test_drop_unit_equals_dropping_its_rows_and_replays(tmp_path):
    frame = gauge()
    a = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    a.drop_unit("operator", "O1", reason="invented: operator untrained")
    b = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    b.drop(frame.index[frame.operator == "O1"].tolist(), reason="same rows")
    assert a.results.partition.to_frame().equals(b.results.partition.to_frame())
    assert a.edits[0].describe() == "leave out every row of operator = O1"
    again = ex.Study.load(a.save(tmp_path / "s.json"), frame)
    assert again.results.partition.to_frame().equals(a.results.partition.to_frame())
    code = a.to_code()
    assert "study.drop_unit('operator', 'O1', reason='invented: operator untrained')" in code
    a.restore_unit("operator", "O1")
    assert a.results.n_used == len(frame)
    with pytest.raises(EditError, match="already left out|nothing to restore"):
        a.restore_unit("operator", "O1")
    with pytest.raises(EditError, match="no level"):
        a.drop_unit("operator", "O9")


def test_unit_deletion_scan_equals_fresh_fits():
    frame = gauge(seed=2)
    study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    before = study.disclosure.specifications
    scan = study.unit_deletion("part")
    assert study.disclosure.specifications == before + 6 and len(study.edits) == 0
    frame_out = scan.to_frame()
    for part in ("P0", "P3"):
        fresh = ex.Study(frame[frame.part != part], "y", ["part", "operator"], random=["part", "operator"]).results
        line = frame_out[frame_out.part == part].iloc[0]
        assert line["p: operator"] == pytest.approx(fresh.partition.row("operator").pvalue, rel=1e-12)
        assert line["variance: part"] == pytest.approx(fresh.variance_components.component("part").estimate,
                                                       rel=1e-12)
        assert line["rows left out"] == 6


def test_subject_deletion_in_repeated_measures_against_pingouin():
    rng = np.random.default_rng(3)
    rows = [(f"s{s}", f"t{t}", 5 + 0.4 * t + rng.normal()) for s in range(8) for t in range(3)]
    frame = pd.DataFrame(rows, columns=["subject", "time", "y"])
    study = ex.Study(frame, "y", ["time"], subject="subject", within=["time"])
    scan = study.unit_deletion("subject")
    assert scan.term == "time"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = pg.rm_anova(data=frame[frame.subject != "s4"], dv="y", within="time", subject="subject")
    line = scan.to_frame().set_index("subject").loc["s4"]
    assert line["p: time"] == pytest.approx(float(ref["p_unc"].iloc[0]), rel=1e-9)


def test_row_deletion_and_refused_units():
    frame = gauge(seed=1, parts=3, operators=2)
    study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    scan = study.unit_deletion("operator")  # leaving one of two operators leaves one level: refused
    assert all(s.startswith("cannot be analysed") for s in scan.status)
    rows = study.row_deletion()
    assert len(rows.units) == len(frame) and all(s == "ok" for s in rows.status)
    with pytest.raises(ExplorerError, match="max_rows"):
        study.row_deletion(max_rows=5)
    with pytest.raises(ExplorerError, match="not a column"):
        study.unit_deletion("shift")


def test_row_scans_refuse_mixed_models_and_name_the_alternative():
    study = ex.Study(gauge(), "y", ["part", "operator"], random=["part", "operator"])
    with pytest.raises(ExplorerError, match="unit_deletion"):
        study.case_deletion()
