"""Benchmark: one edit-and-recompute of the one-way results, against reference libraries.

For n = 1e3 .. 1e6 rows in 8 levels, times (median of repeats, same run, same data):
  ours      : one edit (study.drop of a row, or its restore) + study.results
  statsmodels: ols("y ~ C(g)").fit() + anova_lm on the edited DataFrame
  scipy     : split the edited DataFrame by level + scipy.stats.f_oneway (computes far less)
and prints the ratios. Run: python tests/benchmarks/bench_oneway.py [--max-n 1e6]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import statsmodels.api as sm
from scipy import stats
from statsmodels.formula.api import ols

import explorer as ex

sys.path.insert(0, str(Path(__file__).parent))
from bench_support import edit_and_recompute, median_time  # noqa: E402


def run(max_n: float = 1e6) -> list[dict]:
    rows = []
    for n in [int(x) for x in (1e3, 1e4, 1e5, 1e6) if x <= max_n]:
        rng = np.random.default_rng(0)
        df = pd.DataFrame({"g": rng.choice([f"L{i}" for i in range(8)], n), "y": rng.normal(50, 3, n)})
        study = ex.Study(df, "y", "g")
        ours = edit_and_recompute(study)

        edited = df.drop(index=[0])

        def with_statsmodels():
            return sm.stats.anova_lm(ols("y ~ C(g)", data=edited).fit())

        def with_scipy():
            return stats.f_oneway(*[grp.to_numpy() for _, grp in edited.groupby("g")["y"]])

        reps = 30 if n <= 1e4 else (10 if n <= 1e5 else 4)
        ours()  # warm: builds the row-id lookup once
        t_ours = median_time(ours, reps)
        t_sm = median_time(with_statsmodels, max(3, reps // 3))
        t_sp = median_time(with_scipy, reps)
        rows.append({"n": n, "ours_ms": t_ours * 1e3, "statsmodels_ms": t_sm * 1e3, "scipy_ms": t_sp * 1e3,
                     "statsmodels/ours": t_sm / t_ours, "scipy/ours": t_sp / t_ours})
    return rows


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--max-n", type=float, default=1e6)
    out = pd.DataFrame(run(ap.parse_args().max_n))
    print("one edit + recompute of the one-way results (median wall time; ratios > 1 mean we are faster)")
    print(out.to_string(index=False, float_format=lambda x: f"{x:,.2f}"))
