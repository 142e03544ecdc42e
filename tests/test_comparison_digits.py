"""Pairwise differences keep their digits when the response has a large common offset.

Outside references: NIST StRD SmLs07, SmLs08 and SmLs09 (13 constant leading digits;
read from the installed scipy wheel, ``scipy/stats/tests/data/nist_anova``), loaded from
their own decimal text; the exact level-mean differences are computed with
``fractions.Fraction`` on that decimal text. Least-squares means: exact rationals of the
cell means (saturated model: the unweighted average of a level's cell means), and
statsmodels OLS ``t_test`` on the exactly shifted data for an additive model (a difference
of least-squares means does not depend on the offset).
"""

from __future__ import annotations

from decimal import Decimal
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from nist_strd import available, read_set

import explorer as ex
from explorer.inference.comparisons import dunnett, games_howell, pairwise_t, tukey


def _exact_level_means(texts: list[str], levels: list[str]) -> dict[str, Fraction]:
    sums: dict[str, Fraction] = {}
    counts: dict[str, int] = {}
    for t, g in zip(texts, levels):
        sums[g] = sums.get(g, Fraction(0)) + Fraction(Decimal(t))
        counts[g] = counts.get(g, 0) + 1
    return {g: sums[g] / counts[g] for g in sums}


def _digits(got: np.ndarray, exact: list[Fraction]) -> float:
    """Smallest number of correct digits over the differences (relative to the largest
    exact difference, so a zero difference is scored by its absolute error)."""
    scale = max(abs(float(e)) for e in exact)
    err = max(abs(Fraction(float(g)) - e) for g, e in zip(got, exact))
    return float("inf") if err == 0 else -np.log10(float(err) / scale)


@pytest.mark.skipif(not available(), reason="NIST StRD files not found in the installed scipy")
@pytest.mark.parametrize("name", ["SmLs07", "SmLs08", "SmLs09"])
def test_nist_pairwise_differences_to_twelve_digits(name: str, tmp_path) -> None:
    """NIST SmLs07-09 read as decimal text (values like 1000000000000.4): every pairwise
    difference of Tukey, Games-Howell, pairwise t and Dunnett (differences of 0.1 and 0)
    agrees with the exact rational difference of the level means to at least 12 digits,
    and the intervals are centred on it."""
    s = read_set(name)
    path = tmp_path / f"{name}.csv"
    path.write_text("level,y\n" + "\n".join(f"{g},{t}" for g, t in zip(s.levels, s.texts)) + "\n")
    res = ex.Study(path, "y", "level").results
    exact = _exact_level_means(s.texts, s.levels)
    for table in (tukey(res), games_howell(res), pairwise_t(res), dunnett(res, res.groups.labels[0])):
        want = [exact[a] - exact[b] for a, b in zip(table.first, table.second)]
        assert _digits(table.difference, want) >= 12, (name, table.method, table.difference[:3])
        assert table.ci_low is not None and table.ci_high is not None
        mid = np.where(np.isfinite(table.ci_high), 0.5 * (table.ci_low + table.ci_high), table.difference)
        assert _digits(mid, want) >= 12, (name, table.method)
        assert np.all(np.isfinite(table.statistic))


def _offset_frame(seed: int, offset: str = "1000000000") -> tuple[pd.DataFrame, list[str]]:
    """A 3 x 2 unbalanced layout, responses written as decimal text ``offset + x.xxx``."""
    rng = np.random.default_rng(seed)
    rows = [(a, b) for a in "xyz" for b in "pq" for _ in range(int(rng.integers(3, 7)))]
    small = np.round(rng.normal(0, 1, len(rows)) + np.array([{"x": 0.0, "y": 0.3, "z": -0.2}[a] for a, _ in rows]), 3)
    texts = [str(Decimal(offset) + Decimal(f"{v:.3f}")) for v in small]
    return pd.DataFrame(rows, columns=["a", "b"]), texts


def test_least_squares_mean_differences_at_an_offset_of_1e9(tmp_path) -> None:
    """Two factors, unbalanced, values near 1e9 given as decimal text. Saturated model:
    least-squares-mean differences equal the exact rational differences of the unweighted
    averages of cell means to 12+ digits. Additive model: they equal statsmodels OLS
    ``t_test`` contrasts fitted on the exactly shifted values (``y - 1e9``, decimal) to 1e-9."""
    from statsmodels.formula.api import ols

    frame, texts = _offset_frame(3)
    path = tmp_path / "offset.csv"
    path.write_text("a,b,y\n" + "\n".join(f"{a},{b},{t}" for (a, b), t in zip(frame.itertuples(index=False), texts)))
    cells: dict[tuple[str, str], list[Fraction]] = {}
    for (a, b), t in zip(frame.itertuples(index=False), texts):
        cells.setdefault((a, b), []).append(Fraction(Decimal(t)))
    ls = {a: sum(sum(v) / len(v) for (aa, _), v in cells.items() if aa == a) / 2 for a in "xyz"}
    full = ex.Study(path, "y", ["a", "b"]).results.compare_means("a")
    want = [ls[x] - ls[y] for x, y in zip(full.first, full.second)]
    assert _digits(full.difference, want) >= 12

    additive = ex.Study(path, "y", ["a", "b"], interactions=False).results.compare_means("a")
    shifted = frame.assign(y=[float(Decimal(t) - Decimal("1000000000")) for t in texts])
    fit = ols("y ~ C(a, Sum) + C(b, Sum)", data=shifted).fit()
    # Sum coding: LS mean of level i of a = b0 + a_i (a_3 = -a_1 - a_2); contrasts as vectors on the params.
    coef = {"x": np.array([0, 1, 0, 0.0]), "y": np.array([0, 0, 1, 0.0]), "z": np.array([0, -1, -1, 0.0])}
    for i, (x, y) in enumerate(zip(additive.first, additive.second)):
        ref = fit.t_test(coef[x] - coef[y])
        assert additive.difference[i] == pytest.approx(float(ref.effect[0]), rel=1e-9, abs=1e-12)
        assert additive.se[i] == pytest.approx(float(ref.sd[0, 0]), rel=1e-9)
