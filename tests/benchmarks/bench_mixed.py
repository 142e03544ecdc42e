"""Benchmark: edit + recompute of random-factor designs, against statsmodels in the same run.

Cases (median time of one edit + recompute; every figure from its own process):
  msa-balanced     10 parts x 3 operators x 3 repeats. Ours: drop (or restore) a whole
                   part - the layout stays complete and balanced, so the fit takes the
                   closed-form path (engine/balanced.py) and moment estimates - then
                   study.results and study.measurement_system("part", "operator"), and
                   reads each term's F and p (each against its own error term: part and
                   operator against part x operator, part x operator against the residual),
                   every variance component's estimate and share, and every measurement-
                   system line's variance, share of variance and SD. What an edit makes only
                   when first read is not read here: level tables, effect sizes with their
                   noncentral-F intervals and power, the cell table, the per-row fit, the
                   components' Satterthwaite df and intervals, the measurement lines'
                   intervals (engine/deferred.py; tests/test_mixed_deferred.py checks that
                   they equal a fresh analysis). Reference: statsmodels ols + anova_lm on
                   the edited table (SS, df, MS, F and p, every F against the residual) +
                   the balanced variance-component algebra by hand (four estimates) - the
                   cheapest statsmodels route to the components.
  msa-balanced-qr  the msa-balanced case of ours with the closed-form path switched off
                   (the general QR cell engine), against the same reference: what the
                   closed form saves.
  msa-balanced-vs-mixedlm  the same edit and reads of ours; reference: statsmodels MixedLM
                   REML (part, operator and part x operator as variance components, one
                   group) on the edited balanced table - statsmodels' route to variance
                   components with a likelihood fit (estimates, no intervals).
  msa-unbalanced   the same study with its last row left out, one more row dropped or restored
                   (both states unbalanced: the QR engine, Hartley's E(MS) and REML), the same
                   reads. Reference: statsmodels MixedLM REML with part, operator and part x
                   operator as variance components (one group) on the table less one row.
  random-intercept 1e4 rows, 200 subjects of unequal size, a fixed 3-level factor.
                   Ours: drop or restore one row + study.results.variance_components (REML).
                   Reference: statsmodels MixedLM("y ~ C(dose)", groups=subject).fit(reml=True).
Each reference runs pinned to one BLAS thread (OPENBLAS/OMP/MKL_NUM_THREADS=1) and
again with the default threads; ours runs pinned to one thread. Rounds are
interleaved (ours, reference 1 thread, reference default, ours, ...). In each process,
after 8 untimed calls (2 for the random intercept), the same for both sides, the same
calls are timed in wall time and in the process's CPU time (which other jobs on a loaded
machine disturb less); the script prints the median over rounds of each process's
medians, each process's peak resident memory, and the load average before and after.
Targets: balanced (closed form) reference/ours >= 20; random-intercept reference/ours >= 1.

Run: python tests/benchmarks/bench_mixed.py [--rounds 5] [--repeats 9]
     python tests/benchmarks/bench_mixed.py --closed-vs-qr   (closed form vs QR engine, one process)
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
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def gauge_table(parts: int = 10, operators: int = 3, reps: int = 3, seed: int = 0) -> pd.DataFrame:
    """Invented measurement study (parts x operators x repeats)."""
    rng = np.random.default_rng(seed)
    p_eff, o_eff = rng.normal(scale=2.0, size=parts), rng.normal(scale=0.5, size=operators)
    po = rng.normal(scale=0.3, size=(parts, operators))
    rows = [(f"P{p:02d}", f"O{o}", 50 + p_eff[p] + o_eff[o] + po[p, o] + rng.normal(scale=0.4))
            for p in range(parts) for o in range(operators) for _ in range(reps)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def intercept_table(n: int = 10_000, subjects: int = 200, seed: int = 0) -> pd.DataFrame:
    """Invented random-intercept data: subjects of unequal size, a fixed three-level dose."""
    rng = np.random.default_rng(seed)
    sizes = rng.multinomial(n - subjects, np.full(subjects, 1 / subjects)) + 1
    subj = np.repeat(np.arange(subjects), sizes)
    dose = rng.choice(["low", "mid", "high"], n)
    u = rng.normal(scale=1.5, size=subjects)
    y = 20 + u[subj] + (dose == "mid") * 0.4 + (dose == "high") * 0.9 + rng.normal(size=n)
    return pd.DataFrame({"subject": [f"s{s:03d}" for s in subj], "dose": dose, "y": y})


def _ours(case: str):
    import explorer as ex

    if case == "msa-balanced-qr":
        from explorer.engine import factorial

        factorial.balanced_counts = lambda *a, **k: None  # every layout through the QR engine
    if case.startswith("msa"):
        balanced = case.startswith("msa-balanced")
        frame = gauge_table()
        study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
        if not balanced:  # every timed state unbalanced (REML), as the reference's table is
            study.drop([89], reason="bench")
        state = {"i": 0}

        def step():
            i = state["i"]
            if balanced:
                part = f"P{(i // 2) % 10:02d}"
                (study.drop_unit if i % 2 == 0 else study.restore_unit)("part", part, reason="bench")
            else:
                row = (i // 2) % 50
                (study.drop if i % 2 == 0 else study.restore)([row], reason="bench")
            state["i"] += 1
            res = study.results
            table = study.measurement_system("part", "operator")
            # the numbers the reference computes (and more): each term's F and p, the components and shares
            tests = [(r.statistic, r.pvalue) for r in res.partition.rows]
            components = [(c.estimate, c.share) for c in res.variance_components.components]
            lines = [(x.variance, x.share_of_variance, x.sd) for x in table.lines]
            return tests, components, lines

        return step
    frame = intercept_table()
    study = ex.Study(frame, "y", ["dose", "subject"], random=["subject"], interactions=False)
    state = {"i": 0}

    def step():
        i = state["i"]
        row = (i // 2) % 50
        (study.drop if i % 2 == 0 else study.restore)([row], reason="bench")
        state["i"] += 1
        return study.results.variance_components

    return step


def _reference(case: str):
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    warnings.simplefilter("ignore")
    if case in ("msa-balanced", "msa-balanced-qr"):
        edited = gauge_table()
        edited = edited[edited.part != "P03"]

        def step():
            t = anova_lm(smf.ols("y ~ C(part) * C(operator)", data=edited).fit(), typ=1)
            ms = t.sum_sq / t.df
            r, o, p = 3, 3, 9
            return {"part": (ms["C(part)"] - ms["C(part):C(operator)"]) / (o * r),
                    "operator": (ms["C(operator)"] - ms["C(part):C(operator)"]) / (p * r),
                    "part x operator": (ms["C(part):C(operator)"] - ms["Residual"]) / r, "residual": ms["Residual"]}

        return step
    if case in ("msa-unbalanced", "msa-balanced-vs-mixedlm"):
        edited = gauge_table()
        edited = (edited.drop(index=[7]) if case == "msa-unbalanced" else edited[edited.part != "P03"]).assign(one=1)

        def step():
            m = smf.mixedlm("y ~ 1", edited, groups="one", re_formula="0",
                            vc_formula={"part": "0 + C(part)", "operator": "0 + C(operator)",
                                        "po": "0 + C(part):C(operator)"})
            return m.fit(reml=True)

        return step
    edited = intercept_table().drop(index=[7])

    def step():
        return smf.mixedlm("y ~ C(dose)", edited, groups="subject").fit(reml=True)

    return step


def _timed(fn, repeats: int) -> tuple[float, float]:
    """Medians of the wall time and of the process's CPU time of the same ``repeats`` calls (CPU time is less
    sensitive to other jobs than wall time)."""
    wall, cpu = [], []
    for _ in range(repeats):
        w0, c0 = time.perf_counter(), time.process_time()
        fn()
        cpu.append(time.process_time() - c0)
        wall.append(time.perf_counter() - w0)
    return statistics.median(wall), statistics.median(cpu)


#: Untimed calls before the timed ones, the same for both sides: the interpreter specialises a function's code
#: over its first calls in a process, so the first calls of either side are slower than the rest.
WARM_CALLS = {"random-intercept": 2}
DEFAULT_WARM_CALLS = 8


def closed_form_vs_qr(rounds: int, calls: int) -> None:
    """In one process, interleaved: the msa-balanced edit + recompute with the closed form and with
    the QR engine (balanced_counts switched off), ``calls`` calls per turn; medians of wall and CPU."""
    from explorer.engine import factorial

    closed = factorial.balanced_counts
    step = _ours("msa-balanced")
    step()
    out: dict[str, dict[str, list[float]]] = {k: {"wall": [], "cpu": []} for k in ("closed form", "QR engine")}
    for _ in range(rounds):
        for name, fn in (("closed form", closed), ("QR engine", lambda *a, **k: None)):
            factorial.balanced_counts = fn
            for _ in range(calls):
                w0, c0 = time.perf_counter(), time.process_time()
                step()
                out[name]["cpu"].append(time.process_time() - c0)
                out[name]["wall"].append(time.perf_counter() - w0)
    factorial.balanced_counts = closed
    med = {k: {m: statistics.median(v) * 1e3 for m, v in d.items()} for k, d in out.items()}
    for k, d in med.items():
        print(f"{k:12s} wall {d['wall']:.3f} ms  CPU {d['cpu']:.3f} ms")
    print(f"QR / closed form: wall {med['QR engine']['wall'] / med['closed form']['wall']:.2f}, "
          f"CPU {med['QR engine']['cpu'] / med['closed form']['cpu']:.2f} "
          f"({rounds} interleaved turns of {calls} calls each)")


def worker(case: str, side: str, repeats: int) -> None:
    fn = _ours(case) if side == "ours" else _reference(case)
    for _ in range(WARM_CALLS.get(case, DEFAULT_WARM_CALLS)):
        fn()
    t, cpu = _timed(fn, repeats)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # MiB on Linux
    print(json.dumps({"seconds": t, "cpu_seconds": cpu, "peak_mib": peak}))


def _run(case: str, side: str, threads: str, repeats: int) -> dict:
    env = dict(os.environ)
    if threads == "1":
        env.update({v: "1" for v in THREAD_VARS})
    else:
        for v in THREAD_VARS:
            env.pop(v, None)
    out = subprocess.run([sys.executable, __file__, "--worker", case, side, str(repeats)], env=env,
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--repeats", type=int, default=9)
    ap.add_argument("--cases", default="msa-balanced,msa-balanced-vs-mixedlm,msa-unbalanced,random-intercept")
    ap.add_argument("--worker", nargs=3, metavar=("CASE", "SIDE", "REPEATS"))
    ap.add_argument("--closed-vs-qr", action="store_true",
                    help="only the in-process comparison of the closed form with the QR engine")
    args = ap.parse_args()
    if args.closed_vs_qr:
        if any(os.environ.get(v) != "1" for v in THREAD_VARS):  # BLAS threads are fixed at import: re-run pinned
            env = {**os.environ, **{v: "1" for v in THREAD_VARS}}
            subprocess.run([sys.executable, __file__, "--closed-vs-qr"], env=env, check=True)
            return
        print(f"load average before: {os.getloadavg()}")
        closed_form_vs_qr(rounds=15, calls=40)
        print(f"load average after: {os.getloadavg()}")
        return
    if args.worker:
        worker(args.worker[0], args.worker[1], int(args.worker[2]))
        return
    print(f"load average before: {os.getloadavg()}")
    rows = []
    for case in args.cases.split(","):
        ref_repeats = max(3, args.repeats // 3) if case not in ("msa-balanced", "msa-balanced-qr") else args.repeats
        runs: dict[str, list[dict]] = {"ours": [], "ref1": [], "refdef": []}
        for _ in range(args.rounds):
            runs["ours"].append(_run(case, "ours", "1", args.repeats))
            runs["ref1"].append(_run(case, "reference", "1", ref_repeats))
            runs["refdef"].append(_run(case, "reference", "default", ref_repeats))
        med = {k: statistics.median(r["seconds"] for r in v) for k, v in runs.items()}
        cpu = {k: statistics.median(r["cpu_seconds"] for r in v) for k, v in runs.items()}
        spread = {k: (min(r["seconds"] for r in v), max(r["seconds"] for r in v)) for k, v in runs.items()}
        mem = {k: max(r["peak_mib"] for r in v) for k, v in runs.items()}
        rows.append({
            "case": case, "ours ms": med["ours"] * 1e3,
            "statsmodels ms (1 thread)": med["ref1"] * 1e3, "statsmodels ms (default threads)": med["refdef"] * 1e3,
            "ratio (1 thread)": med["ref1"] / med["ours"], "ratio (default threads)": med["refdef"] / med["ours"],
            "ours ms, min-max of rounds": f"{spread['ours'][0] * 1e3:.2f}-{spread['ours'][1] * 1e3:.2f}",
            "CPU ms ours / statsmodels 1 thread": f"{cpu['ours'] * 1e3:.2f} / {cpu['ref1'] * 1e3:.2f}",
            "CPU ratio (1 thread)": cpu["ref1"] / cpu["ours"],
            "ours peak MiB": mem["ours"], "statsmodels peak MiB": mem["ref1"],
        })
    pd.set_option("display.width", 320)
    print(pd.DataFrame(rows).to_string(index=False, float_format=lambda x: f"{x:,.2f}"))
    print(f"load average after: {os.getloadavg()}")
    print("medians over interleaved rounds; each figure from a fresh process (peak memory includes imports); "
          "ratio > 1: we are faster; CPU: the process's CPU time per call (on a loaded machine wall time "
          "favours the side whose calls are shorter, since a long call is interrupted more often)")


if __name__ == "__main__":
    main()
