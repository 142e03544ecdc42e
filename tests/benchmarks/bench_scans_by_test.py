"""Benchmark: the case-deletion and regroup scans under each overall test, against naive refit loops.

For each test the study can read its decision from (classic F, Welch F, Brown-Forsythe F*,
Kruskal-Wallis H, permutation F), the scan of the kit is timed beside the naive loop that
refits every alternative with a reference library, measured in the same run:

* classic: scipy.stats.f_oneway per alternative;
* welch / brown-forsythe: statsmodels anova_oneway(use_var='unequal' / 'bf');
* kruskal: scipy.stats.kruskal;
* permutation: the kit's own permutation_f (9999 orderings) on each refit data set (no
  reference library runs a seeded permutation F); its p-values agree with the scan's
  within Monte-Carlo error, so the agreement column reports the largest |difference| / SE.

The naive loops are timed on a subset of the alternatives and scaled to all of them
(stated in the output). Reference and kit run under one BLAS/OpenMP thread
(threadpoolctl); the load average is printed with every figure; times are medians of
interleaved repeats (wall and this process's CPU time); memory is the peak of Python
allocations during one scan (tracemalloc, numpy arrays included). Each test also times
reading the decision of a new view (n = 1e4 and 1e5), the cost an edit pays for it.

Run: python tests/benchmarks/bench_scans_by_test.py [--quick] [--tests classic welch ...]
"""

from __future__ import annotations

import argparse
import os
import statistics
import time
import tracemalloc
import warnings

import numpy as np
import pandas as pd
from scipy import stats
from statsmodels.stats.oneway import anova_oneway
from threadpoolctl import threadpool_limits

import explorer as ex
from explorer.inference.omnibus import permutation_f

TESTS = ("classic", "welch", "brown-forsythe", "kruskal", "permutation")


def _data(n: int, k: int, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    g = rng.integers(0, k, n)
    shift = 0.6 / np.sqrt(n)  # a small effect: p-values of the alternatives in a readable range
    noise = rng.lognormal(0, 0.3, n) - np.exp(0.045)  # skewed, mean zero
    y = np.round(100 + shift * g + noise * (1 + 0.1 * g), 3)  # unequal spreads, ties
    return pd.DataFrame({"g": [f"L{i + 1}" for i in g], "y": y})


def _reference_p(test: str, groups: list[np.ndarray]) -> float:
    if test == "classic":
        return float(stats.f_oneway(*groups).pvalue)
    if test == "kruskal":
        return float(stats.kruskal(*groups).pvalue)
    if test == "permutation":
        frame = pd.DataFrame({"g": np.repeat(np.arange(len(groups)), [len(v) for v in groups]).astype(str),
                              "y": np.concatenate(groups)})
        return float(permutation_f(ex.Study(frame, "y", "g").results, 9999, seed=1).pvalue)
    return float(anova_oneway(groups, use_var="unequal" if test == "welch" else "bf").pvalue)


def _interleaved(ours, naive, repeats: int) -> tuple[float, float, float]:  # type: ignore[no-untyped-def]
    """Medians of interleaved runs: (ours wall, ours CPU, naive wall per alternative)."""
    wall, cpu, ref = [], [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        ours()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
        ref.append(naive())
    return statistics.median(wall), statistics.median(cpu), statistics.median(ref)


def _peak_mib(fn) -> float:  # type: ignore[no-untyped-def]
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / 2**20


def bench_deletion(test: str, n: int, subset: int, repeats: int) -> dict:
    df = _data(n, 5)
    study = ex.Study(df, "y", "g", test=test)
    _ = study.decision  # the decision (and the permutation test) is computed once per view, not by the scan
    scan = study.case_deletion(record=False)
    y, g = df["y"].to_numpy(), df["g"].to_numpy()
    rows = np.linspace(0, n - 1, subset).astype(int)
    ref_p = []

    def naive() -> float:
        ref_p.clear()
        t0 = time.perf_counter()
        for i in rows:
            keep = np.arange(n) != i
            ref_p.append(_reference_p(test, [y[keep & (g == lv)] for lv in sorted(set(g))]))
        return (time.perf_counter() - t0) / subset

    wall, cpu, per_alt = _interleaved(lambda: study.case_deletion(record=False), naive, repeats)
    pos = {r: j for j, r in enumerate(scan.row_ids.tolist())}
    ours_p = np.array([scan.pvalue[pos[int(i)]] for i in rows])
    ref = np.array(ref_p)
    if test == "permutation":
        used = np.array([scan.permutations_used[pos[int(i)]] for i in rows])
        se = np.sqrt(ref * (1 - ref) * (1 / used + 1 / 9999))
        agree, what = float(np.max(np.abs(ours_p - ref) / np.maximum(se, 1e-12))), "max |diff| / MC SE"
    else:
        agree, what = float(np.max(np.abs(ours_p / ref - 1))), "max rel diff in p"
    return {"n": n, "scan wall s": wall, "scan CPU s": cpu,
            "scan peak MiB": _peak_mib(lambda: study.case_deletion(record=False)),
            "naive loop s (scaled)": per_alt * n, "ratio naive/ours (wall)": per_alt * n / wall, what: agree,
            "naive timed on": f"{subset} rows"}


def bench_regroup(test: str, n: int, subset: int, repeats: int) -> dict:
    k = 8
    df = _data(n, k, 1)
    study = ex.Study(df, "y", "g", test=test)
    _ = study.decision
    scan = study.regroup_scan(record=False)
    y = df["y"].to_numpy()
    codes = df["g"].map({f"L{i + 1}": i for i in range(k)}).to_numpy()
    lab = {f"L{i + 1}": i for i in range(k)}
    n_alt = len(scan.merge_levels) + scan.move_rows.size
    picks = np.random.default_rng(2).choice(scan.move_rows.size, subset, replace=False)
    ref_p = []

    def naive() -> float:
        ref_p.clear()
        t0 = time.perf_counter()
        for j in picks:
            c = codes.copy()
            c[int(scan.move_rows[j])] = lab[scan.move_to[j]]
            ref_p.append(_reference_p(test, [y[c == h] for h in range(k) if np.any(c == h)]))
        return (time.perf_counter() - t0) / subset

    wall, cpu, per_alt = _interleaved(lambda: study.regroup_scan(record=False), naive, repeats)
    ours = scan.move_fits.pvalue[picks]
    ref = np.array(ref_p)
    if test == "permutation":
        se = np.sqrt(2 * ref * (1 - ref) / 9999)
        agree, what = float(np.max(np.abs(ours - ref) / np.maximum(se, 1e-12))), "max |diff| / MC SE"
    else:
        agree, what = float(np.max(np.abs(ours / ref - 1))), "max rel diff in p"
    return {"n": n, "alternatives": int(n_alt), "scan wall s": wall, "scan CPU s": cpu,
            "scan peak MiB": _peak_mib(lambda: study.regroup_scan(record=False)),
            "naive loop s (scaled)": per_alt * n_alt, "ratio naive/ours (wall)": per_alt * n_alt / wall, what: agree,
            "naive timed on": f"{subset} moves"}


def bench_decision(test: str, n: int) -> dict:
    """CPU and wall time of reading the decision of one new view (the permutation F runs 9999 orderings)."""
    df = _data(n, 5)
    study = ex.Study(df, "y", "g", test=test)
    t0, c0 = time.perf_counter(), time.process_time()
    decision = study.decision
    return {"n": n, "decision wall s": time.perf_counter() - t0, "decision CPU s": time.process_time() - c0,
            "p": decision.pvalue}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes and subsets")
    ap.add_argument("--tests", nargs="*", choices=TESTS, default=list(TESTS), help="tests to measure (default all)")
    args = ap.parse_args()
    quick = args.quick
    warnings.simplefilter("ignore")
    print(f"load average at start: {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f} {os.getloadavg()[2]:.2f}; "
          "kit and references under one BLAS/OpenMP thread")
    with threadpool_limits(limits=1):
        for test in args.tests:
            n_del = 10_000 if test == "permutation" else (20_000 if quick else 100_000)
            sub_del = 3 if test == "permutation" else (30 if quick else 100)
            sub_reg = 3 if test == "permutation" else (30 if quick else 200)
            sizes = (10_000,) if quick else (10_000, 100_000)
            for name, res in (
                *((f"decision of a new view, {test}", bench_decision(test, size)) for size in sizes),
                (f"case deletion, {test}", bench_deletion(test, n_del, sub_del, 3)),
                (f"regroup scan, {test}", bench_regroup(test, 10_000, sub_reg, 3)),
            ):
                print(f"{name} (load {os.getloadavg()[0]:.2f}):")
                for key, val in res.items():
                    print(f"  {key:26s} {val:.4g}" if isinstance(val, float) else f"  {key:26s} {val}")


if __name__ == "__main__":
    main()
