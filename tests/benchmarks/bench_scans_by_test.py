"""Benchmark: the case-deletion and regroup scans under each overall test, against naive refit loops.

For each test the study can read its decision from (classic F, Welch F, Brown-Forsythe F*,
Kruskal-Wallis H, permutation F), the scan of the kit is timed beside the naive loop that
refits every alternative with a reference library, measured in the same run:

* classic: scipy.stats.f_oneway per alternative;
* welch / brown-forsythe: statsmodels anova_oneway(use_var='unequal' / 'bf');
* kruskal: scipy.stats.kruskal;
* permutation: scipy.stats.permutation_test of the F statistic (vectorised, 999
  resamples, timed and scaled by 10,000 / 1,000 to the kit's budget of 9,999 orderings) on
  each refit data set; its p-values agree with the scan's within Monte-Carlo error, so the
  agreement column reports the largest |difference| / SE. The kit's permutation decisions
  and scans draw orderings sequentially and stop once the decision at alpha is settled
  (explorer.inference.sequential_mc); the budget (all 9,999 orderings, drawn when a
  p-value sits at alpha) is timed beside them as their bound.

The naive loops are timed on a subset of the alternatives and scaled to all of them
(stated in the output). Reference and kit run under one BLAS/OpenMP thread
(threadpoolctl); the load average is printed with every figure; times are medians of
interleaved repeats (wall and this process's CPU time); memory is the peak of Python
allocations during one scan (tracemalloc, numpy arrays included). Each test also times
reading the decision of a new view (n = 1e4 and 1e5), the cost an edit pays for it, and
the permutation decision's ratio is printed under one BLAS thread and the default beside.

Run: python tests/benchmarks/bench_scans_by_test.py [--quick] [--tests classic welch ...] [--flip-only]
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
from explorer.inference.omnibus import PERMUTATIONS, permutation_f
from explorer.sensitivity.alternatives import oneway_input
from explorer.sensitivity.chosen_test import ChosenTest

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
        return _scipy_permutation(groups, 999)
    return float(anova_oneway(groups, use_var="unequal" if test == "welch" else "bf").pvalue)


def _scipy_permutation(groups: list[np.ndarray], resamples: int) -> float:
    res = stats.permutation_test(groups, lambda *s, axis: stats.f_oneway(*s, axis=axis).statistic,
                                 permutation_type="independent", vectorized=True, n_resamples=resamples,
                                 alternative="greater", random_state=1)
    return float(res.pvalue)


#: The reference permutation test is timed with 999 resamples and scaled to the kit's budget.
_SCALE = (PERMUTATIONS + 1) / 1000


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
    if test == "permutation":
        per_alt *= _SCALE
    pos = {r: j for j, r in enumerate(scan.row_ids.tolist())}
    ours_p = np.array([scan.pvalue[pos[int(i)]] for i in rows])
    ref = np.array(ref_p)
    if test == "permutation":
        used = np.array([scan.permutations_used[pos[int(i)]] for i in rows])
        se = np.sqrt(np.maximum(ref * (1 - ref), 1e-3) * (1 / used + 1 / 999))
        agree, what = float(np.max(np.abs(ours_p - ref) / np.maximum(se, 1e-12))), "max |diff| / MC SE"
    else:
        agree, what = float(np.max(np.abs(ours_p / ref - 1))), "max rel diff in p"
    extra = {"orderings drawn": scan.how.rsplit("orderings drawn: ", 1)[1]} if test == "permutation" else {}
    return {"n": n, **extra, "scan wall s": wall, "scan CPU s": cpu,
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
    if test == "permutation":
        per_alt *= _SCALE
    ours = scan.move_fits.pvalue[picks]
    ref = np.array(ref_p)
    if test == "permutation":
        drawn = int(next(n for n in scan.notes if n.startswith("Test:")).rsplit(" for the moves", 1)[0].split()[-1])
        se = np.sqrt(np.maximum(ref * (1 - ref), 1e-3) * (1 / drawn + 1 / 999))
        agree, what = float(np.max(np.abs(ours - ref) / np.maximum(se, 1e-12))), "max |diff| / MC SE"
    else:
        agree, what = float(np.max(np.abs(ours / ref - 1))), "max rel diff in p"
    extra = ({"orderings drawn": next(n for n in scan.notes if n.startswith("Test:")).rsplit("orderings drawn: ", 1)[1]}
             if test == "permutation" else {})
    return {"n": n, "alternatives": int(n_alt), **extra, "scan wall s": wall, "scan CPU s": cpu,
            "scan peak MiB": _peak_mib(lambda: study.regroup_scan(record=False)),
            "naive loop s (scaled)": per_alt * n_alt, "ratio naive/ours (wall)": per_alt * n_alt / wall, what: agree,
            "naive timed on": f"{subset} moves"}


def bench_decision(test: str, n: int) -> dict:
    """CPU and wall time of reading the decision of one new view."""
    df = _data(n, 5)
    study = ex.Study(df, "y", "g", test=test)
    t0, c0 = time.perf_counter(), time.process_time()
    decision = study.decision
    return {"n": n, "decision wall s": time.perf_counter() - t0, "decision CPU s": time.process_time() - c0,
            "p": decision.pvalue, "method": decision.method}


def bench_permutation_decision(n: int, repeats: int) -> dict:
    """The permutation decision (sequential) and its budget (all 9,999 orderings) against scipy's
    permutation_test (999 resamples, scaled), interleaved; peak memory of each."""
    df = _data(n, 5)
    groups = [v.to_numpy() for _, v in df.groupby("g")["y"]]

    def ours() -> None:
        _ = ex.Study(df, "y", "g", test="permutation").decision  # a new view: nothing cached

    results = ex.Study(df, "y", "g").results
    seq, full, ref = [], [], []
    for _ in range(repeats):
        c0 = time.process_time()
        ours()
        seq.append(time.process_time() - c0)
        c0 = time.process_time()
        permutation_f(results, PERMUTATIONS, seed=0)
        full.append(time.process_time() - c0)
        c0 = time.process_time()
        _scipy_permutation(groups, 999)
        ref.append((time.process_time() - c0) * _SCALE)
    d = ex.Study(df, "y", "g", test="permutation").decision
    s, f, r = statistics.median(seq), statistics.median(full), statistics.median(ref)
    return {"n": n, "decision": d.method, "p": d.pvalue, "sequential CPU s": s, "budget (9999) CPU s": f,
            "scipy permutation_test CPU s (scaled)": r, "ratio scipy/sequential": r / s, "ratio scipy/budget": r / f,
            "sequential peak MiB": _peak_mib(ours),
            "budget peak MiB": _peak_mib(lambda: permutation_f(results, PERMUTATIONS, seed=0)),
            "scipy peak MiB (999)": _peak_mib(lambda: _scipy_permutation(groups, 999))}


def bench_flip(test: str, n: int) -> dict:
    """The flip finder (default search) under the test: CPU time, rows found, and the classic F's beside it."""
    out = {"n": n}
    for name in dict.fromkeys((test, "classic")):
        study = ex.Study(_data(n, 5), "y", "g", test=name)
        _ = study.decision
        c0 = time.process_time()
        res = study.flip_finder(record=False)
        out[f"{name}: CPU s"] = time.process_time() - c0
        out[f"{name}: search, rows"] = f"{res.method}, {len(res.rows)}"
    return out


def bench_permutation_budget(n: int) -> dict:
    """The permutation F with all 9,999 orderings (the decision's bound when p sits at alpha), once."""
    results = ex.Study(_data(n, 5), "y", "g").results
    c0 = time.process_time()
    permutation_f(results, PERMUTATIONS, seed=0)
    return {"n": n, "budget CPU s": time.process_time() - c0}


def bench_permutation_deletion_budget(n: int) -> dict:
    """Case deletion with every one of the 9,999 orderings drawn (a p-value at alpha): the scan's bound."""
    df = _data(n, 5)
    study = ex.Study(df, "y", "g", test="permutation")
    chosen = ChosenTest(oneway_input(study), study.spec)
    c0 = time.process_time()
    chosen.permutations.deletion_pvalues(None)
    cpu = time.process_time() - c0
    return {"n": n, "budget CPU s": cpu, "per ordering and 1,000 rows, s": cpu / PERMUTATIONS / (n / 1000),
            "peak MiB": _peak_mib(lambda: chosen.permutations.deletion_pvalues(None))}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes and subsets")
    ap.add_argument("--tests", nargs="*", choices=TESTS, default=list(TESTS), help="tests to measure (default all)")
    ap.add_argument("--flip-only", action="store_true", help="only the flip finder (n = 1e4) under each test")
    args = ap.parse_args()
    if args.flip_only:
        print(f"load average at start: {os.getloadavg()[0]:.2f}; one BLAS/OpenMP thread")
        with threadpool_limits(limits=1):
            for test in args.tests:
                _show(f"flip finder, {test}", bench_flip(test, 10_000))
        return
    quick = args.quick
    warnings.simplefilter("ignore")
    print(f"load average at start: {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f} {os.getloadavg()[2]:.2f}; "
          "kit and references under one BLAS/OpenMP thread")
    with threadpool_limits(limits=1):
        for test in args.tests:
            n_del = 10_000 if test == "permutation" and quick else (20_000 if quick else 100_000)
            sub_del = 2 if test == "permutation" else (30 if quick else 100)
            sub_reg = 2 if test == "permutation" else (30 if quick else 200)
            sizes = (10_000,) if quick else (10_000, 100_000)
            runs = [(f"decision of a new view, {test}", lambda size=size: bench_decision(test, size)) for size in sizes]
            if test == "permutation":
                runs = [("permutation decision vs scipy, one thread", lambda size=size: bench_permutation_decision(size, 3))
                        for size in sizes[:1]]
                runs.append(("permutation case deletion, whole budget (the bound)",
                             lambda: bench_permutation_deletion_budget(10_000)))
            runs += [(f"case deletion, {test}", lambda: bench_deletion(test, n_del, sub_del, 3)),
                     (f"regroup scan, {test}", lambda: bench_regroup(test, 10_000, sub_reg, 3))]
            for name, run in runs:
                _show(name, run())
            if test == "permutation" and not quick:
                _show("permutation decision of a new view, n = 1e5", bench_decision("permutation", 100_000))
                _show("permutation budget (9,999 orderings), n = 1e5, timed once", bench_permutation_budget(100_000))
    if "permutation" in args.tests:
        _show("permutation decision vs scipy, default BLAS threads", bench_permutation_decision(10_000, 3))


def _show(name: str, res: dict) -> None:
    print(f"{name} (load {os.getloadavg()[0]:.2f}):", flush=True)
    for key, val in res.items():
        print(f"  {key:38s} {val:.4g}" if isinstance(val, float) else f"  {key:38s} {val}", flush=True)


if __name__ == "__main__":
    main()
