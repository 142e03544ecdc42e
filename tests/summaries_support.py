"""Shared helpers for the summary-backed study tests (DuckDB and Spark)."""

from __future__ import annotations

import numpy as np
import pandas as pd

TOL = 1e-10


def unbalanced_frame(seed: int = 7, n: int = 400) -> pd.DataFrame:
    """Generated plant readings: 3 lines (unequal shares) x 2 shifts, a temperature, a lot number.

    The response sits near 1e4 so that the offset matters; lines and shifts have real effects.
    """
    rng = np.random.default_rng(seed)
    line = rng.choice(["L1", "L2", "L3"], n, p=[0.5, 0.3, 0.2])
    shift = rng.choice(["day", "night"], n, p=[0.6, 0.4])
    y = 1.0e4 + rng.normal(0.0, 1.0, n) + 0.4 * (line == "L2") + 0.3 * (shift == "night") + 0.5 * (
        (line == "L3") & (shift == "night"))
    return pd.DataFrame({
        "line": line, "shift": shift, "thickness": np.round(y, 4),
        "temperature": np.round(rng.normal(70.0, 8.0, n), 1), "lot": rng.integers(1, 6, n),
    })


def close(a: object, b: object, tol: float = TOL) -> bool:
    """Relative (or, near zero, absolute) agreement of two numbers or arrays; None matches None."""
    if a is None or b is None:
        return a is None and b is None
    x, y = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if x.shape != y.shape:
        return False
    both_nan = np.isnan(x) & np.isnan(y)
    scale = np.maximum(np.maximum(np.abs(x), np.abs(y)), 1.0)
    return bool(np.all(both_nan | (np.abs(x - y) <= tol * scale)))


def assert_same_results(summary, rows, tol: float = TOL) -> None:
    """Every summary-level number of two Results agrees: partitions (all SS types), levels, means, effects."""
    tables = dict(summary.partitions) or {"": summary.partition}
    other = dict(rows.partitions) or {"": rows.partition}
    assert tables.keys() == other.keys()
    for key in tables:
        a, b = tables[key].rows, other[key].rows
        assert [r.source for r in a] == [r.source for r in b]
        for ra, rb in zip(a, b):
            assert ra.df == rb.df, (key, ra.source)
            for field in ("sum_sq", "mean_sq", "statistic", "pvalue"):
                assert close(getattr(ra, field), getattr(rb, field), tol), (key, ra.source, field)
    assert summary.n_used == rows.n_used and summary.df_resid == rows.df_resid
    assert close(summary.r_squared, rows.r_squared, tol) and close(summary.ms_resid, rows.ms_resid, tol)
    for f, lt in rows.levels.items():
        ls = summary.levels[f]
        assert ls.labels == lt.labels
        for field in ("n", "mean", "sd", "pooled_low", "own_high"):
            assert close(getattr(ls, field), getattr(lt, field), tol), (f, field)
    for f, mm in rows.marginal_means.items():
        ms = summary.marginal_means[f]
        assert close(ms.estimate, mm.estimate, tol) and close(ms.se, mm.se, tol)
    assert close(summary.groups.original_means, rows.groups.original_means, tol)
    assert close(summary.groups.m2, rows.groups.m2, tol)
