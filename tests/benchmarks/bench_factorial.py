"""Benchmark: edit-and-recompute of a 3 x 4 factorial with interaction, against statsmodels.

n = 1e5 rows (default) in a 3 x 4 design with interaction; times (median of repeats,
same run, same data):
  ours        : one edit (study.drop of a row, or its restore) + study.results
                (Types I, II and III, marginal means, effect sizes, per-row fit)
  statsmodels : ols("y ~ C(a) * C(b)").fit() + anova_lm(typ=2) on the edited DataFrame
  OLS fit only: statsmodels OLS on a prebuilt cell-indicator matrix (a lower bound
                for any row-based refit; no formula, no partition)
and prints the ratios (target: statsmodels/ours >= 20).
Run: python tests/benchmarks/bench_factorial.py [--n 1e5]
"""

from __future__ import annotations

import argparse

import numpy as np
import pandas as pd
import statsmodels.api as sm
from bench_support import edit_and_recompute, median_time
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex


def run(n: int = 100_000, repeats: int = 15) -> dict:
    rng = np.random.default_rng(0)
    df = pd.DataFrame({"a": rng.choice(["A1", "A2", "A3"], n), "b": rng.choice(["B1", "B2", "B3", "B4"], n)})
    df["y"] = 50 + (df.a == "A2") * 0.3 + (df.b == "B4") * 0.2 + rng.normal(0, 3, n)
    study = ex.Study(df, "y", ["a", "b"], ss_type="II")
    ours = edit_and_recompute(study)

    edited = df.drop(index=[0])

    def with_statsmodels():
        return anova_lm(ols("y ~ C(a) * C(b)", data=edited).fit(), typ=2)

    # A lower bound for any row-based refit: statsmodels OLS on a prebuilt cell-indicator
    # matrix (no formula parsing, no partition; one fit instead of the several a table needs).
    cell = pd.factorize(edited["a"] + "|" + edited["b"])[0]
    x_cells = np.eye(cell.max() + 1)[cell]
    y_edited = edited["y"].to_numpy()

    def fit_only():
        return sm.OLS(y_edited, x_cells).fit()

    ours()  # warm: builds the row-id lookup once
    t_ours = median_time(ours, repeats)
    t_sm = median_time(with_statsmodels, max(3, repeats // 3))
    t_fit = median_time(fit_only, max(3, repeats // 3))
    return {"n": n, "ours_ms": t_ours * 1e3, "statsmodels_ms": t_sm * 1e3, "statsmodels/ours": t_sm / t_ours,
            "OLS_fit_only_ms": t_fit * 1e3, "OLS_fit_only/ours": t_fit / t_ours}


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=float, default=1e5)
    ap.add_argument("--repeats", type=int, default=15)
    args = ap.parse_args()
    out = pd.DataFrame([run(int(args.n), args.repeats)])
    print("one edit + recompute of a 3 x 4 factorial with interaction (median wall time; ratio > 1: we are faster)")
    print(out.to_string(index=False, float_format=lambda x: f"{x:,.2f}"))
