"""Benchmark: one edit, then the whole one-way battery, against reference libraries.

n = 1e4 rows (also 1e3 and 1e5 with --all) in 8 levels with unequal spreads. Times
(medians of interleaved rounds, same data; the reference pinned to one BLAS thread, and
with the default threads beside):
  ours      : one edit (study.drop of a row, or its restore) + study.results + study.battery()
              (classic F, Welch, Brown-Forsythe, Kruskal-Wallis, Levene, Bartlett, Shapiro-Wilk,
              suggestion, Tukey-Kramer, Games-Howell, pairwise t/Holm, letters, effect sizes with
              noncentral-F intervals, power, studentized/Grubbs/MAD screens)
  bundle    : study.battery() alone on fixed results
  reference : on the edited DataFrame, the equivalent calls of scipy + statsmodels + pingouin:
              f_oneway, anova_oneway (Welch, Brown-Forsythe), kruskal, levene, tukey_hsd with
              intervals, pingouin pairwise_gameshowell, ols + anova_lm + confint_effectsize_oneway
              (effect sizes with intervals), OLSInfluence studentized residuals turned external
              by formula + Bonferroni p (statsmodels' own external residuals refit n leave-one-out
              models, far too slow at this size), Grubbs by formula, median_abs_deviation.
Prints the times, the ratio reference / ours (> 1 means we are faster), the load average
and the peak resident memory.
Run: python tests/benchmarks/bench_battery.py [--all]
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pingouin as pg
import statsmodels.api as sm
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.oneway import anova_oneway, confint_effectsize_oneway

import explorer as ex

sys.path.insert(0, str(Path(__file__).parent))
from bench_support import (  # noqa: E402
    blas_threads,
    edit_and_recompute,
    interleaved,
    load_average,
    median_time,
    peak_mib,
)


def make_frame(n: int, k: int = 8, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    codes = rng.integers(0, k, n)
    y = np.round(50 + 0.3 * codes + rng.normal(0, 1, n) * (1 + 0.1 * codes), 3)
    return pd.DataFrame({"g": [f"M{c}" for c in codes], "y": y})


def reference_bundle(frame: pd.DataFrame) -> dict:
    groups = [grp.to_numpy() for _, grp in frame.groupby("g")["y"]]
    out: dict = {}
    out["classic"] = stats.f_oneway(*groups)
    out["welch"] = anova_oneway(groups, use_var="unequal")
    out["brown_forsythe"] = anova_oneway(groups, use_var="bf")
    out["kruskal"] = stats.kruskal(*groups)
    out["levene"] = stats.levene(*groups, center="median")
    tk = stats.tukey_hsd(*groups)
    out["tukey"] = (tk.pvalue, tk.confidence_interval(0.95))
    out["games_howell"] = pg.pairwise_gameshowell(data=frame, dv="y", between="g")
    fit = ols("y ~ C(g)", data=frame).fit()
    table = sm.stats.anova_lm(fit)
    ssb, ssw = table["sum_sq"].iloc[0], table["sum_sq"].iloc[1]
    df1, df2 = table["df"].iloc[0], table["df"].iloc[1]
    msw = ssw / df2
    out["effect"] = (ssb / (ssb + ssw), (ssb - df1 * msw) / (ssb + ssw + msw),
                     confint_effectsize_oneway(table["F"].iloc[0], (df1, df2), nobs=len(frame), alpha=0.05))
    # OLSInfluence.resid_studentized_external refits n leave-one-out models (hours at n = 1e4);
    # the fair equivalent is its internal residuals (hat diagonal) and the closed-form conversion.
    r = fit.get_influence().resid_studentized
    e = np.asarray(fit.resid)
    n = len(e)
    dfr = fit.df_resid
    ext = r * np.sqrt((dfr - 1) / (dfr - r * r))
    out["studentized"] = (ext, np.minimum(1, 2 * n * stats.t.sf(np.abs(ext), dfr - 1)))
    t = stats.t.isf(0.05 / (2 * n), n - 2)
    out["grubbs"] = (np.max(np.abs(e - e.mean())) / e.std(ddof=1), (n - 1) / np.sqrt(n) * np.sqrt(t * t / (n - 2 + t * t)))
    out["mad"] = 0.6745 * (e - np.median(e)) / stats.median_abs_deviation(e)
    return out


def measure(n: int) -> dict:
    frame = make_frame(n)
    study = ex.Study(frame, "y", "g")
    step = edit_and_recompute(study)

    def ours():
        step()
        return study.battery()

    edited = frame.drop(index=[0])
    ours()  # warm: row-id lookup, the cached range table for 8 means
    reps = 40 if n <= 1e4 else 10
    res = study.results
    t_bundle = median_time(lambda: ex.stats.run_battery(res), reps)

    def reference():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return reference_bundle(edited)

    load = load_average()
    rounds = 3 if n >= 1e5 else 5
    with blas_threads(1):
        one = interleaved({"ours": ours, "reference": reference}, rounds)
    default = interleaved({"ours": ours, "reference": reference}, rounds)
    return {"n": n, "load": load, "ours: edit + battery (ms)": one["ours"] * 1e3,
            "battery alone (ms)": t_bundle * 1e3, "reference (ms)": one["reference"] * 1e3,
            "reference / ours": one["reference"] / one["ours"],
            "reference / ours (default threads)": default["reference"] / default["ours"]}

def run(sizes: list[int]) -> list[dict]:
    return [measure(n) for n in sizes]


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--all", action="store_true", help="also n = 1e3 and 1e5")
    args = ap.parse_args()
    sizes = [1000, 10000, 100000] if args.all else [10000]
    out = pd.DataFrame(run(sizes))
    print("one edit + the whole one-way battery, 8 levels (medians of interleaved rounds; ratio > 1 means we are "
          "faster)")
    print("target at n = 1e4: at least 20x faster than the reference bundle and under 30 ms")
    print(out.T.to_string(header=False, float_format=lambda x: f"{x:,.2f}"))
    print(f"peak resident memory {peak_mib():.0f} MiB; load average at the end {load_average()}")
