"""Benchmark: edit-and-recompute of a 3 x 4 factorial with interaction, against statsmodels.

n = 1e5 rows (default) in a 3 x 4 design with interaction; times (median of repeats,
same run, same data):
  ours        : one edit (study.drop of a row, or its restore) + study.results
                (Types I, II and III, marginal means, effect sizes, per-row fit)
  statsmodels : ols("y ~ C(a) * C(b)").fit() + anova_lm(typ=2) on the edited DataFrame
and prints the ratio (target: statsmodels/ours >= 20).
Run: python tests/benchmarks/bench_factorial.py [--n 1e5]
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
import pandas as pd
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex


def _median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def run(n: int = 100_000, repeats: int = 15) -> dict:
    rng = np.random.default_rng(0)
    df = pd.DataFrame({"a": rng.choice(["A1", "A2", "A3"], n), "b": rng.choice(["B1", "B2", "B3", "B4"], n)})
    df["y"] = 50 + (df.a == "A2") * 0.3 + (df.b == "B4") * 0.2 + rng.normal(0, 3, n)
    study = ex.Study(df, "y", ["a", "b"], ss_type="II")
    state = {"i": 0}

    def ours():
        i = state["i"]
        if i % 2 == 0:
            study.drop([i % 50], reason="bench")
        else:
            study.restore([(i - 1) % 50], reason="bench")
        state["i"] += 1
        return study.results

    edited = df.drop(index=[0])

    def with_statsmodels():
        return anova_lm(ols("y ~ C(a) * C(b)", data=edited).fit(), typ=2)

    ours()  # warm: builds the row-id lookup once
    t_ours = _median_time(ours, repeats)
    t_sm = _median_time(with_statsmodels, max(3, repeats // 3))
    # Same numbers (sanity): the edited study state after an odd count is the 'dropped' state.
    return {"n": n, "ours_ms": t_ours * 1e3, "statsmodels_ms": t_sm * 1e3, "statsmodels/ours": t_sm / t_ours}


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=float, default=1e5)
    ap.add_argument("--repeats", type=int, default=15)
    args = ap.parse_args()
    out = pd.DataFrame([run(int(args.n), args.repeats)])
    print("one edit + recompute of a 3 x 4 factorial with interaction (median wall time; ratio > 1: we are faster)")
    print(out.to_string(index=False, float_format=lambda x: f"{x:,.2f}"))
