"""Benchmark: edit-and-recompute of a 3 x 4 factorial with interaction, against statsmodels.

n = 1e5 rows (default) in a 3 x 4 design with interaction; times (medians of interleaved
rounds, same data; references pinned to one BLAS thread, and with the default threads beside):
  ours        : one edit (study.drop of a row, or its restore) + study.results
                (Types I, II and III, marginal means, effect sizes, per-row fit)
  statsmodels : ols("y ~ C(a) * C(b)").fit() + anova_lm(typ=2) on the edited DataFrame
  OLS fit only: statsmodels OLS on a prebuilt cell-indicator matrix (a lower bound
                for any row-based refit; no formula, no partition)
and prints the ratios (target: statsmodels/ours >= 20), the load average and the peak memory.
Run: python tests/benchmarks/bench_factorial.py [--n 1e5]
"""

from __future__ import annotations

import argparse

import numpy as np
import pandas as pd
import statsmodels.api as sm
from bench_support import blas_threads, edit_and_recompute, interleaved, load_average, peak_mib
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
    fns = {"ours": ours, "statsmodels": with_statsmodels, "fit_only": fit_only}
    rounds = max(3, repeats // 3)
    load = load_average()
    with blas_threads(1):
        one = interleaved(fns, rounds)
    default = interleaved(fns, rounds)
    return {"n": n, "load": load, "ours_ms": one["ours"] * 1e3, "statsmodels_ms": one["statsmodels"] * 1e3,
            "statsmodels/ours": one["statsmodels"] / one["ours"],
            "statsmodels/ours (default threads)": default["statsmodels"] / default["ours"],
            "OLS_fit_only_ms": one["fit_only"] * 1e3, "OLS_fit_only/ours": one["fit_only"] / one["ours"],
            "OLS_fit_only/ours (default threads)": default["fit_only"] / default["ours"]}

if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=float, default=1e5)
    ap.add_argument("--repeats", type=int, default=15)
    args = ap.parse_args()
    out = pd.DataFrame([run(int(args.n), args.repeats)])
    print("one edit + recompute of a 3 x 4 factorial with interaction (medians of interleaved rounds; ratio > 1: we "
          "are faster; references pinned to one BLAS thread, default threads beside)")
    print(out.T.to_string(header=False, float_format=lambda x: f"{x:,.2f}"))
    print(f"peak resident memory {peak_mib():.0f} MiB; load average at the end {load_average()}")
