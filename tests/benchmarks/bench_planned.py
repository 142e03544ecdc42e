"""Benchmark: each planned analysis after one edit at n = 1e4, against reference calls in the same run.

Every case times one edit (drop or restore a row, alternating) + the analysis on the
edited view. Ours: the study's own method (``record=False``). Reference: the library
calls a user would make for the same numbers on the edited table:

  contrast      8 levels: ``study.contrast`` of 3 contrasts / statsmodels ols cell means + t_test
  trend         8 numeric levels, unequal spacing: ``study.trend`` / ols + t_test of the polynomial matrix
  equivalence   8 levels vs a control: ``study.equivalence`` / ols + t_test of 7 differences, two one-sided
                p-values from scipy.stats.t
  ancova        8 levels + a covariate: ``study.results`` (partition, slope check, adjusted means) and the
                Tukey-Kramer table / ols + anova_lm(typ=2) + the separate-slopes ols + compare_f_test + t_test
                of the adjusted means
  ancova-scan   the case-deletion scan with the covariate (1e4 rows left out in turn, closed-form downdates)
                / statsmodels OLSInfluence(...).cooks_distance on the same fit (a one-fit O(n p^2) reference:
                a refit loop would take hours)
  box-cox       8 levels: ``study.box_cox`` / scipy minimize_scalar (Brent) + brentq over statsmodels OLS of
                scipy.stats.boxcox(y, lambda) on the level indicators
  transform     ``set_transform('log')`` study, edit + results / ols + anova_lm of np.log(y)
  two-levels    2 levels: ``welch_t`` + ``mann_whitney`` / scipy ttest_ind(equal_var=False) + mannwhitneyu
  dunn          8 levels: ``study.dunn`` / scikit_posthocs.posthoc_dunn(p_adjust='holm')
  friedman      8 treatments x 1250 blocks: ``study.friedman`` / scipy.stats.friedmanchisquare
  trimmed       8 levels: ``study.trimmed_means`` / scipy trim_mean + mstats.winsorize per level + Wilcox's
                formulas
  hc3           3 x 4 with interaction: ``study.hc3_tests`` / statsmodels anova_lm(typ=2, robust='hc3')
  battery       (the budget) edit + ``study.battery()`` at n = 1e4, 8 levels: ours only

Each figure comes from its own process; rounds interleave ours, the reference pinned to
one BLAS thread (OPENBLAS/OMP/MKL_NUM_THREADS=1) and the reference with default threads.
The script prints medians over rounds, peak resident memory of each process (imports
included) and the load average before and after. "within budget" compares ours with
the battery's median in the same run.

Run: python tests/benchmarks/bench_planned.py [--rounds 3] [--repeats 7] [--cases contrast,ancova]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from bench_support import median_time

HERE = Path(__file__).resolve().parent
THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
N = 10_000
DOSES = [0.5, 1, 2, 4, 8, 12, 16, 24]
CASES = ["contrast", "trend", "equivalence", "ancova", "ancova-scan", "box-cox", "transform", "two-levels", "dunn",
         "friedman", "trimmed", "hc3", "battery"]


def table(case: str, seed: int = 0) -> pd.DataFrame:
    """Invented data for each case (n = 1e4)."""
    rng = np.random.default_rng(seed)
    if case == "friedman":
        k, b = 8, N // 8
        y = rng.normal(size=(b, k)) + np.arange(k) * 0.05 + rng.normal(size=(b, 1))
        return pd.DataFrame({"y": np.round(y.ravel(), 3), "t": np.tile([f"T{j}" for j in range(k)], b),
                             "block": np.repeat([f"B{i}" for i in range(b)], k)})
    if case == "hc3":
        a = rng.choice(["a1", "a2", "a3"], N)
        bb = rng.choice(["b1", "b2", "b3", "b4"], N)
        y = 10 + (a == "a2") * 0.2 + rng.normal(0, 1 + (bb == "b4"), N)
        return pd.DataFrame({"y": y, "A": a, "B": bb})
    k = 2 if case == "two-levels" else 8
    g = rng.integers(0, k, N)
    x = rng.normal(50, 5, N)
    dose = np.asarray(DOSES[:k])[g]
    y = np.exp(2 + 0.02 * np.log(dose) + 0.01 * (x - 50) + rng.normal(0, 0.3, N))
    return pd.DataFrame({"y": np.round(y, 4), "dose": dose, "pre": np.round(x, 2)})


def _study(case: str):  # type: ignore[no-untyped-def]
    import explorer as ex

    df = table(case)
    if case == "friedman":
        return ex.Study(df, "y", "t", blocks="block")
    if case == "hc3":
        return ex.Study(df, "y", ["A", "B"])
    if case in ("ancova", "ancova-scan"):
        return ex.Study(df, "y", "dose", covariates=["pre"])
    if case == "transform":
        return ex.Study(df, "y", "dose", transform="log")
    return ex.Study(df, "y", "dose")


def _ours(case: str):  # type: ignore[no-untyped-def]
    study = _study(case)
    calls = {
        "contrast": lambda: study.contrast("dose", [{"0.5": -1, "24": 1}, {"1": -1, "2": 1}, {"4": 1, "8": -1}],
                                           record=False),
        "trend": lambda: study.trend("dose", record=False),
        "equivalence": lambda: study.equivalence("dose", margin=0.5, control="0.5", record=False),
        "ancova": lambda: study.results.compare_means("dose"),
        "ancova-scan": lambda: study.case_deletion(record=False),
        "box-cox": lambda: study.box_cox(record=False),
        "transform": lambda: study.results.partition,
        "two-levels": lambda: (study.welch_t(record=False), study.mann_whitney(record=False)),
        "dunn": lambda: study.dunn(record=False),
        "friedman": lambda: study.friedman(record=False),
        "trimmed": lambda: study.trimmed_means(record=False),
        "hc3": lambda: study.hc3_tests(record=False),
        "battery": lambda: study.battery(),
    }
    analysis = calls[case]
    state = {"i": 0}
    rows = study.dataset.row_ids[:40].tolist()
    if case == "friedman":  # keep blocks complete: leave out a whole block and bring it back
        blocks = [f"B{i}" for i in range(20)]

    def step():  # type: ignore[no-untyped-def]
        i = state["i"]
        if case == "friedman":
            (study.drop_unit if i % 2 == 0 else study.restore_unit)("block", blocks[(i // 2) % 20], reason="bench")
        else:
            (study.drop if i % 2 == 0 else study.restore)([rows[(i // 2) % 40]], reason="bench")
        state["i"] += 1
        _ = study.results
        return analysis()

    return step


def _reference(case: str):  # type: ignore[no-untyped-def]
    import statsmodels.api as sm
    import statsmodels.formula.api as smf
    from scipy import optimize, stats
    from scipy.stats import mstats
    from statsmodels.stats.anova import anova_lm

    warnings.simplefilter("ignore")
    df = table(case).drop(index=[3])
    if case == "friedman":
        df = table(case)
        df = df[df.block != "B3"]
    levels = sorted(df["dose"].unique()) if "dose" in df else None

    if case in ("contrast", "trend", "equivalence"):
        def step():  # type: ignore[no-untyped-def]
            fit = smf.ols("y ~ C(dose) - 1", df).fit()
            if case == "contrast":
                c = np.zeros((3, 8))
                c[0, [0, 7]] = [-1, 1]
                c[1, [1, 2]] = [-1, 1]
                c[2, [3, 4]] = [1, -1]
                return fit.t_test(c)
            if case == "trend":
                x = np.asarray(levels, dtype=float)
                q, _ = np.linalg.qr(np.vander((x - x.mean()) / np.ptp(x), 4, increasing=True))
                return fit.t_test(q[:, 1:].T)
            c = np.zeros((7, 8))
            c[np.arange(7), np.arange(1, 8)] = 1
            c[:, 0] = -1
            tt = fit.t_test(c)
            se = np.ravel(tt.sd)
            d = np.ravel(tt.effect)
            return np.maximum(stats.t.sf((d + 0.5) / se, fit.df_resid), stats.t.cdf((d - 0.5) / se, fit.df_resid))
        return step
    if case == "ancova":
        def step():  # type: ignore[no-untyped-def]
            fit = smf.ols("y ~ pre + C(dose, Sum)", df).fit()
            anova_lm(fit, typ=2)
            wide = smf.ols("y ~ C(dose) * pre", df).fit()
            wide.compare_f_test(smf.ols("y ~ C(dose) + pre", df).fit())
            p = len(fit.params)
            L = np.zeros((8, p))
            L[:, 0] = 1
            L[:, 1] = df.pre.mean()
            L[:7, 2:] = np.eye(7)
            L[7, 2:] = -1
            return fit.t_test(L)
        return step
    if case == "ancova-scan":
        def step():  # type: ignore[no-untyped-def]
            fit = smf.ols("y ~ pre + C(dose, Sum)", df).fit()
            return fit.get_influence().cooks_distance[0]
        return step
    if case == "box-cox":
        def step():  # type: ignore[no-untyped-def]
            x = pd.get_dummies(df.dose).to_numpy(dtype=float)
            y = df.y.to_numpy()
            n, slog = len(y), float(np.log(y).sum())

            def ll(lam):  # type: ignore[no-untyped-def]
                ssr = sm.OLS(stats.boxcox(y, lam), x).fit().ssr
                return (lam - 1) * slog - n / 2 * np.log(ssr / n)

            best = optimize.minimize_scalar(lambda v: -ll(v), bracket=(-2, 2), method="brent").x
            target = ll(best) - stats.chi2.ppf(0.95, 1) / 2
            lo = optimize.brentq(lambda v: ll(v) - target, best - 3, best)
            hi = optimize.brentq(lambda v: ll(v) - target, best, best + 3)
            return best, lo, hi
        return step
    if case == "transform":
        return lambda: anova_lm(smf.ols("np.log(y) ~ C(dose)", df).fit(), typ=2)
    if case == "two-levels":
        a, b = (df.y[df.dose == d].to_numpy() for d in levels)  # type: ignore[union-attr]
        return lambda: (stats.ttest_ind(a, b, equal_var=False), stats.mannwhitneyu(a, b))
    if case == "dunn":
        import scikit_posthocs as sp

        return lambda: sp.posthoc_dunn(df, val_col="y", group_col="dose", p_adjust="holm")
    if case == "friedman":
        wide = df.pivot(index="block", columns="t", values="y")
        return lambda: stats.friedmanchisquare(*[wide[c].to_numpy() for c in wide.columns])
    if case == "trimmed":
        def step():  # type: ignore[no-untyped-def]
            groups = [g.y.to_numpy() for _, g in df.groupby("dose")]
            tm = np.array([stats.trim_mean(g, 0.2) for g in groups])
            n = np.array([len(g) for g in groups])
            h = n - 2 * np.floor(0.2 * n)
            wv = np.array([np.var(np.asarray(mstats.winsorize(g, limits=(0.2, 0.2))), ddof=1) for g in groups])
            d = (n - 1) * wv / (h * (h - 1))
            w = 1 / d
            u = w.sum()
            k = len(groups)
            xt = (w * tm).sum() / u
            s = ((1 - w / u) ** 2 / (h - 1)).sum()
            f = ((w * (tm - xt) ** 2).sum() / (k - 1)) / (1 + 2 * (k - 2) / (k * k - 1) * s)
            return stats.f.sf(f, k - 1, 1 / (3 * s / (k * k - 1)))
        return step
    if case == "hc3":
        return lambda: anova_lm(smf.ols("y ~ C(A, Sum) * C(B, Sum)", df).fit(), typ=2, robust="hc3")
    return lambda: None  # battery: ours only (the budget)


def worker(case: str, side: str, repeats: int) -> None:
    fn = _ours(case) if side == "ours" else _reference(case)
    fn()  # warm
    t = median_time(fn, repeats)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # MiB on Linux
    print(json.dumps({"seconds": t, "peak_mib": peak}))


def _run(case: str, side: str, threads: str, repeats: int) -> dict:  # type: ignore[type-arg]
    env = dict(os.environ)
    if threads == "1":
        env.update({v: "1" for v in THREAD_VARS})
    else:
        for v in THREAD_VARS:
            env.pop(v, None)
    out = subprocess.run([sys.executable, __file__, "--worker", case, side, str(repeats)], env=env,
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])  # type: ignore[no-any-return]


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--cases", default=",".join(CASES))
    ap.add_argument("--worker", nargs=3, metavar=("CASE", "SIDE", "REPEATS"))
    args = ap.parse_args()
    if args.worker:
        worker(args.worker[0], args.worker[1], int(args.worker[2]))
        return
    print(f"load average before: {os.getloadavg()}")
    cases = args.cases.split(",")
    if "battery" not in cases:
        cases.append("battery")
    rows = []
    budget = None
    for case in cases:
        runs: dict[str, list[dict]] = {"ours": [], "ref1": [], "refdef": []}  # type: ignore[type-arg]
        for _ in range(args.rounds):
            runs["ours"].append(_run(case, "ours", "1", args.repeats))
            if case != "battery":
                ref_repeats = max(3, args.repeats // 2)
                runs["ref1"].append(_run(case, "reference", "1", ref_repeats))
                runs["refdef"].append(_run(case, "reference", "default", ref_repeats))
        med = {k: statistics.median(r["seconds"] for r in v) if v else float("nan") for k, v in runs.items()}
        mem = {k: max(r["peak_mib"] for r in v) if v else float("nan") for k, v in runs.items()}
        if case == "battery":
            budget = med["ours"]
        rows.append({
            "case": case, "ours ms": med["ours"] * 1e3, "reference ms (1 thread)": med["ref1"] * 1e3,
            "reference ms (default threads)": med["refdef"] * 1e3, "ratio (1 thread)": med["ref1"] / med["ours"],
            "ratio (default)": med["refdef"] / med["ours"], "ours peak MiB": mem["ours"],
            "reference peak MiB": mem["ref1"],
        })
    frame = pd.DataFrame(rows)
    frame["within budget"] = ["" if r == "battery" else ("yes" if ms <= budget * 1e3 else "no")  # type: ignore[operator]
                              for r, ms in zip(frame["case"], frame["ours ms"])]
    pd.set_option("display.width", 220)
    print(frame.to_string(index=False, float_format=lambda x: f"{x:,.2f}"))
    print(f"budget: edit + study.battery() at n = 1e4, 8 levels = {budget * 1e3:.1f} ms in this run")  # type: ignore[operator]
    print(f"load average after: {os.getloadavg()}")
    print("medians over interleaved rounds; each figure from a fresh process (peak memory includes imports); "
          "ratio > 1: ours is faster")


if __name__ == "__main__":
    main()
