"""The shared numerical rules (explorer.engine.numerics) and that no module keeps its own copy.

Outside reference: the rank tolerance is numpy's ``matrix_rank`` default
(S.max() * max(M, N) * eps; Golub & Van Loan, Matrix Computations, 4th ed., sec. 5.4.1),
checked against ``numpy.linalg.matrix_rank`` on the same matrices.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import linalg

import explorer as ex
from explorer.engine.numerics import EPS, is_zero_ss, qr_rank, read_only, read_only_copy, response_scale

PACKAGE = Path(__file__).resolve().parents[1] / "explorer"


def test_scale_is_the_largest_magnitude_with_a_floor():
    assert response_scale(-3.0, [1.0, -7.5, 2.0]) == 7.5
    assert response_scale(12.0, [1.0]) == 12.0
    assert response_scale(0.0, []) == 1e-300
    assert response_scale(0.0, np.zeros(3)) == 1e-300


def test_zero_rule_on_numbers_and_arrays():
    scale = 100.0
    limit = 5 * (8 * EPS * scale) ** 2
    assert is_zero_ss(limit, 5, scale) is True
    assert is_zero_ss(limit * 1.01, 5, scale) is False
    got = is_zero_ss(np.array([0.0, limit, 1.0]), np.array([5, 5, 5]), scale)
    assert got.tolist() == [True, True, False]


def test_zero_rule_does_not_depend_on_the_unit():
    """Scaling the response by a power of two scales both sides of the rule by its square."""
    ss, n, scale = 3e-27, 10, 2.0
    for e in (-300, -40, 0, 40, 300):
        assert is_zero_ss(np.ldexp(ss, 2 * e), n, np.ldexp(scale, e)) == is_zero_ss(ss, n, scale)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_qr_rank_matches_numpy_matrix_rank(seed):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(12, 6))
    a[:, 5] = a[:, 0] - 2 * a[:, 3]  # one exact dependency
    r = linalg.qr(a, mode="r", pivoting=True)[0]
    assert qr_rank(np.diag(r), a.shape) == np.linalg.matrix_rank(a) == 5
    assert qr_rank(np.zeros(0), (3, 0)) == 0


def test_read_only_helpers():
    a = np.arange(3.0)
    assert read_only(a) is a and not a.flags.writeable
    src = [1, 2, 3]
    b = read_only_copy(src)
    assert b.dtype == np.float64 and not b.flags.writeable
    with pytest.raises(ValueError):
        b[0] = 0.0


def test_exact_fit_has_no_f_in_one_way_and_factorial():
    """Every observation equal to its level (cell) mean: F undefined by the one rule, huge offset included."""
    one = pd.DataFrame({"g": list("aabbcc"), "y": [1e9 + 1, 1e9 + 1, 1e9 + 2, 1e9 + 2, 1e9 + 4, 1e9 + 4]})
    res = ex.Study(one, "y", "g").results
    assert res.partition.row("g").statistic is None
    two = pd.DataFrame({"a": list("xxyyxxyy"), "b": list("ppppqqqq"), "y": [1.0, 1.0, 2.0, 2.0, 3.0, 3.0, 5.0, 5.0]})
    res2 = ex.Study(two, "y", ["a", "b"]).results
    assert all(r.statistic is None for r in res2.partition.rows if r.source not in ("residual", "total (corrected)"))


def test_no_module_keeps_its_own_copy_of_the_rules():
    """The zero-SS rule, the rank tolerance and read-only marking live in engine/numerics.py only."""
    patterns = {
        "zero-SS rule": re.compile(r"8 \* np\.finfo"),
        "machine epsilon": re.compile(r"np\.finfo\(float\)\.eps"),
        "read-only flag": re.compile(r"setflags\(write=False\)"),
    }
    offenders = []
    for path in PACKAGE.rglob("*.py"):
        if path.name == "numerics.py":
            continue
        text = path.read_text(encoding="utf-8")
        offenders += [f"{path.relative_to(PACKAGE)}: {what}" for what, rx in patterns.items() if rx.search(text)]
    assert offenders == []
