"""The scans' one dispatch point (explorer.sensitivity.scan_target): route by design, scored term, refusals.

Not a statistical check: the scans' numbers are checked against outside references in
their own test files (test_case_deletion, test_flip, test_regroup, test_sweep).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.sensitivity.scan_target import scan_target

SENSITIVITY = Path(__file__).resolve().parents[1] / "explorer" / "sensitivity"


def _frame(seed: int = 3) -> pd.DataFrame:
    """Invented: two machines x three shifts, three parts each."""
    rng = np.random.default_rng(seed)
    a = np.repeat(["m1", "m2"], 9)
    b = np.tile(np.repeat(["s1", "s2", "s3"], 3), 2)
    y = 10 + (a == "m2") * 1.5 + rng.normal(0, 1, a.size)
    return pd.DataFrame({"machine": a, "shift": b, "y": y})


def test_one_factor_goes_by_group_statistics():
    study = ex.Study(_frame(), "y", "machine")
    target = scan_target(study, "case-deletion scan")
    assert target.term == "machine" == study.decision.term
    assert target.oneway is not None and target.oneway.k == 2 and target.oneway.n == 18
    assert target.verdict.pvalue == study.decision.pvalue


def test_several_factors_go_by_cells_and_a_named_term_is_scored():
    study = ex.Study(_frame(), "y", ["machine", "shift"])
    target = scan_target(study, "flip finder", term="shift")
    assert target.oneway is None and target.term == "shift"
    with pytest.raises(ex.ExplorerError, match="not a treatment term.*Did you mean 'shift'"):
        scan_target(study, "flip finder", term="shfit")


def test_models_with_random_terms_are_refused_by_name():
    study = ex.Study(_frame(), "y", ["machine", "shift"], random=["shift"])
    with pytest.raises(ex.ExplorerError, match="the regroup scan tests every term against the residual"):
        scan_target(study, "regroup scan")


@pytest.mark.parametrize("module", ["case_deletion", "flip", "regroup", "sweep"])
def test_each_scan_routes_through_the_one_dispatch_point(module):
    text = (SENSITIVITY / f"{module}.py").read_text(encoding="utf-8")
    assert "scan_target(study, " in text
    assert not re.search(r"\bis_oneway\b|refuse_mixed\(|oneway_input\(", text)
