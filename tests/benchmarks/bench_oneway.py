"""Benchmark: one edit-and-recompute of the one-way results, against reference libraries.

For n = 1e3 .. 1e6 rows in 8 levels, times (medians of interleaved rounds, same data):
  ours        : one edit (study.drop of a row, or its restore) + study.results
  statsmodels : ols("y ~ C(g)").fit() + anova_lm on the edited DataFrame
  scipy split : split the edited DataFrame by level + scipy.stats.f_oneway (computes far less)
  scipy       : scipy.stats.f_oneway on groups already split (less still)
The references run pinned to one BLAS thread and again with the default threads; the
script prints the ratios (reference / ours: above 1 means we are faster), the load
average and the peak resident memory.
Run: python tests/benchmarks/bench_oneway.py [--max-n 1e6] [--rounds 9]
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
from bench_support import blas_threads, edit_and_recompute, interleaved, load_average, peak_mib  # noqa: E402


def run(max_n: float = 1e6, rounds: int = 9) -> list[dict]:
    rows = []
    for n in [int(x) for x in (1e3, 1e4, 1e5, 1e6) if x <= max_n]:
        rng = np.random.default_rng(0)
        df = pd.DataFrame({"g": rng.choice([f"L{i}" for i in range(8)], n), "y": rng.normal(50, 3, n)})
        study = ex.Study(df, "y", "g")
        ours = edit_and_recompute(study)
        edited = df.drop(index=[0])
        split = [grp.to_numpy() for _, grp in edited.groupby("g")["y"]]
        fns = {
            "ours": ours,
            "statsmodels": lambda: sm.stats.anova_lm(ols("y ~ C(g)", data=edited).fit()),
            "scipy split": lambda: stats.f_oneway(*[grp.to_numpy() for _, grp in edited.groupby("g")["y"]]),
            "scipy": lambda: stats.f_oneway(*split),
        }
        ours()
        ours()  # warm
        reps = rounds * (10 if n <= 1e4 else 3 if n <= 1e5 else 1)
        load = load_average()
        with blas_threads(1):
            one = interleaved(fns, reps)
        default = interleaved(fns, reps)
        row = {"n": n, "ours_ms": one["ours"] * 1e3, "load": load}
        for ref in ("statsmodels", "scipy split", "scipy"):
            row[f"{ref}/ours"] = one[ref] / one["ours"]
            row[f"{ref}/ours (default threads)"] = default[ref] / default["ours"]
        rows.append(row)
    return rows


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--max-n", type=float, default=1e6)
    ap.add_argument("--rounds", type=int, default=9)
    args = ap.parse_args()
    out = pd.DataFrame(run(args.max_n, args.rounds))
    print("one edit + recompute of the one-way results: medians of interleaved rounds; ratios reference / ours "
          "(> 1: we are faster), references pinned to one BLAS thread and with the default threads")
    print(out.to_string(index=False, float_format=lambda x: f"{x:,.2f}"))
    print(f"peak resident memory {peak_mib():.0f} MiB; load average at the end {load_average()}")
