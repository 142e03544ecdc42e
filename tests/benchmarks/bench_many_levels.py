"""Benchmark: the one-way battery at 2,000 levels (24,000 rows), time and peak memory.

Phases, each in its own process (so each peak resident memory is its own):
  ours-battery     study.battery() at 2,000 levels: omnibus tests, checks, effect sizes,
                   power, screens; the three tables of 1,999,000 pairs are deferred and
                   letters are not built above 150 levels (notes say so).
  ours-pairwise-t  the battery, then reading battery.pairwise_t (Holm, 1,999,000 pairs).
  ours-tukey       the battery, then reading battery.tukey (studentized range per pair).
  ours-games-howell (with --all) the battery, then battery.games_howell (a Welch df per
                   pair: two million tail probabilities; the quantiles are interpolated
                   in log df from a few dozen solves).
  ref-omnibus      what scipy does for the battery's eager parts on the same groups:
                   f_oneway, f_oneway(equal_var=False), kruskal, levene(center='median'),
                   bartlett.
  ref-pairwise-t   scipy t.sf for every pair on the pooled variance + statsmodels
                   multipletests(method='holm').
References run pinned to one BLAS thread (OPENBLAS/OMP/MKL_NUM_THREADS=1) and again with
the default threads; ours runs pinned. Rounds are interleaved; the script prints the
median wall time over rounds, each phase's largest peak resident memory, and the load
average before and after.

With --before DIR (a checkout of an earlier version of the package), the Games-Howell
phase, then 200,000 studentized-range tails at k = 2,000 with real differences (q spread
over 0 to 10, df over 3.4 to 44), run with that version and with this one, interleaved,
and the script prints the ratios of the medians (earlier / now) with the load average.

Run: python tests/benchmarks/bench_many_levels.py [--rounds 3] [--all] [--before DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
LEVELS, ROWS = 2000, 24_000


def table(seed: int = 0) -> pd.DataFrame:
    """Invented lot readings: every level twice, the rest spread at random; no real differences."""
    rng = np.random.default_rng(seed)
    g = np.concatenate([np.arange(LEVELS), np.arange(LEVELS), rng.integers(0, LEVELS, ROWS - 2 * LEVELS)])
    return pd.DataFrame({"lot": [f"L{i:04d}" for i in g], "y": rng.normal(size=ROWS)})


def _phase(name: str) -> dict:
    import explorer as ex  # inside the phase: import cost is not timed, memory is

    out: dict = {}
    if name == "ours-tails":  # tails with real differences: q spread over 0 to 10, Welch-like df
        from explorer.engine.studentized_range import srange_sf

        rng = np.random.default_rng(2)
        q, df = rng.uniform(0, 10, 200_000), rng.uniform(3.4, 44, 200_000)
        t0 = time.perf_counter()
        srange_sf(q, LEVELS, df)
        out["tails"] = time.perf_counter() - t0
        out["peak_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        return out
    frame = table()
    if name.startswith("ours"):
        study = ex.Study(frame, "y", "lot")
        t0 = time.perf_counter()
        battery = study.battery()
        out["battery"] = time.perf_counter() - t0
        part = {"ours-pairwise-t": "pairwise_t", "ours-tukey": "tukey", "ours-games-howell": "games_howell"}.get(name)
        if part:
            t0 = time.perf_counter()
            getattr(battery, part)
            out[part] = time.perf_counter() - t0
    elif name == "ref-omnibus":
        from scipy import stats

        groups = [v.to_numpy() for _, v in frame.groupby("lot").y]
        t0 = time.perf_counter()
        stats.f_oneway(*groups)
        stats.f_oneway(*groups, equal_var=False)
        stats.kruskal(*groups)
        stats.levene(*groups, center="median")
        stats.bartlett(*groups)
        out["omnibus"] = time.perf_counter() - t0
    elif name == "ref-pairwise-t":
        from scipy import stats
        from statsmodels.stats.multitest import multipletests

        t0 = time.perf_counter()
        grouped = frame.groupby("lot").y
        n, means, var = grouped.count().to_numpy(float), grouped.mean().to_numpy(), grouped.var().to_numpy()
        df = ROWS - LEVELS
        ms = float(np.sum((n - 1) * var) / df)
        i, j = np.triu_indices(LEVELS, 1)
        t = (means[i] - means[j]) / np.sqrt(ms * (1 / n[i] + 1 / n[j]))
        multipletests(2 * stats.t.sf(np.abs(t), df), method="holm")
        out["pairwise_t"] = time.perf_counter() - t0
    out["peak_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def _run(name: str, pinned: bool, package_dir: str | None = None) -> dict:
    env = dict(os.environ)
    if package_dir is not None:
        env["PYTHONPATH"] = package_dir
    if pinned:
        env.update({v: "1" for v in THREAD_VARS})
    else:
        for v in THREAD_VARS:
            env.pop(v, None)
    res = subprocess.run([sys.executable, str(Path(__file__)), "--phase", name], env=env, capture_output=True,
                         text=True, check=True)
    return json.loads(res.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--all", action="store_true", help="also read the Games-Howell table (minutes)")
    ap.add_argument("--before", help="folder holding an earlier version of the package (Games-Howell only)")
    ap.add_argument("--phase", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.phase:
        print(json.dumps(_phase(args.phase)))
        return
    if args.before:
        _before_after(args.before, args.rounds)
        return
    print(f"{LEVELS} levels, {ROWS} rows; load average before: {os.getloadavg()}")
    plan = [("ours-battery", True), ("ref-omnibus", True), ("ref-omnibus", False),
            ("ours-pairwise-t", True), ("ref-pairwise-t", True), ("ref-pairwise-t", False), ("ours-tukey", True)]
    if args.all:
        plan.append(("ours-games-howell", True))
    seen: dict[tuple[str, bool], list[dict]] = {}
    for _ in range(args.rounds):
        for name, pinned in plan:
            seen.setdefault((name, pinned), []).append(_run(name, pinned))
    print(f"{'phase':32s} {'median s':>10s} {'peak MiB':>9s}")
    med: dict[str, float] = {}
    for (name, pinned), runs in seen.items():
        keys = [k for k in runs[0] if k != "peak_mib"]
        for key in keys:
            m = statistics.median(r[key] for r in runs)
            label = f"{name}{'' if pinned else ' (default threads)'}: {key}"
            med[label] = m
            print(f"{label:32s} {m:10.3f} {max(r['peak_mib'] for r in runs):9.0f}")
    ours = med["ours-battery: battery"]
    print(f"ref-omnibus (1 thread) / ours-battery: {med['ref-omnibus: omnibus'] / ours:.2f}x "
          f"(default threads {med['ref-omnibus (default threads): omnibus'] / ours:.2f}x)")
    pt = med["ours-pairwise-t: pairwise_t"]
    print(f"ref-pairwise-t (1 thread) / ours-pairwise-t: {med['ref-pairwise-t: pairwise_t'] / pt:.2f}x "
          f"(default threads {med['ref-pairwise-t (default threads): pairwise_t'] / pt:.2f}x)")
    print(f"load average after: {os.getloadavg()}")


def _before_after(before: str, rounds: int) -> None:
    """Games-Howell at 2,000 levels with an earlier version and with this one, interleaved rounds."""
    here = str(HERE.parent.parent)
    print(f"{LEVELS} levels, {ROWS} rows, Games-Howell read; load average before: {os.getloadavg()}")
    for phase, key in (("ours-games-howell", "games_howell"), ("ours-tails", "tails")):
        runs: dict[str, list[dict]] = {"earlier": [], "now": []}
        for _ in range(rounds):
            runs["earlier"].append(_run(phase, True, before))
            runs["now"].append(_run(phase, True, here))
        med = {k: statistics.median(r[key] for r in v) for k, v in runs.items()}
        for k, v in runs.items():
            each = ", ".join(f"{r[key]:.1f}" for r in v)
            print(f"{k:8s} {key} median {med[k]:9.2f} s  peak {max(r['peak_mib'] for r in v):6.0f} MiB  "
                  f"(rounds: {each})")
        print(f"{key}: earlier / now: {med['earlier'] / med['now']:.1f}x; load average: {os.getloadavg()}")


if __name__ == "__main__":
    main()
