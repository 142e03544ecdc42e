"""Benchmark: memory and time of edits from 1e4 to 5e6 rows, the study build and the study file.

Each size runs in its own process (its peak resident memory is its own); invented data:
8 levels "L0".."L7" drawn at random, normal response, row ids 0..n-1. Per size:
  frame          memory of the input DataFrame (pandas memory_usage(deep=True))
  build          ex.Study(frame, "y", "g") against the floor "read the two columns and one
                 grouped pass" (pd.factorize of the factor + np.bincount counts and sums),
                 interleaved; the build's peak above the resident memory before it, in units of
                 the frame's size, measured twice: the resident high-water mark reset just
                 before the build (Linux /proc/self/clear_refs; ru_maxrss alone would report the
                 peak of making the frame, which is higher) and tracemalloc's peak of a second
                 build (numpy and Python allocations; not Arrow's own memory pool)
  edits          resident memory after 1 and after k edits (each leaves out one more row and
                 reads study.results), and after reset(); the growth per edit per row
  edit cost      one edit + study.results (drop a row, then restore it) against
                 scipy.stats.f_oneway on the groups already split (pinned to one BLAS thread,
                 and with the default threads), and against the two-pass floor (np.bincount
                 of counts and sums, then of squared deviations); medians of interleaved rounds
  study file     size of study.save(), the time of that first save (it computes the
                 fingerprint and the block digests) and of Study.load() on the same frame
                 and of the same file as the first definition wrote it (medians of --load-rounds
                 interleaved loads); the data check alone by each fingerprint
                 definition (column-sha256, what files are written with; pandas-row-hash,
                 what older files are checked by) from the built dataset's arrays, medians
                 of interleaved rounds
Prints the load average with each size. Run on a quiet machine, one size at a time for 5e6:
  python tests/benchmarks/bench_memory.py [--sizes 1e4 1e5 1e6 5e6] [--edits 30] [--rounds 15] [--load-rounds 3]
"""

from __future__ import annotations

import argparse
import base64
import gc
import json
import os
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_support import (  # noqa: E402
    blas_threads,
    edit_and_recompute,
    hwm_mib,
    interleaved,
    load_average,
    peak_mib,
    reset_peak,
    rss_mib,
)


def frame(n: int, k: int = 8, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"g": rng.choice([f"L{i}" for i in range(k)], n), "y": rng.normal(50, 3, n)})


def measure(n: int, edits: int, rounds: int, load_rounds: int = 3) -> dict:
    from scipy import stats

    import explorer as ex

    out: dict = {"n": n, "load_start": load_average(), "load_rounds": load_rounds}
    df = frame(n)
    gc.collect()
    out["frame_mib"] = df.memory_usage(deep=True).sum() / 2**20
    out["rss_before_mib"] = rss_mib()
    out["maxrss_before_mib"] = peak_mib()  # the high-water mark of making the frame

    fresh_peak = reset_peak()
    t0 = time.perf_counter()
    study = ex.Study(df, "y", "g")
    out["build_s"] = time.perf_counter() - t0
    out["build_peak_above_mib"] = hwm_mib() - out["rss_before_mib"] if fresh_peak else float("nan")
    out["rss_after_build_mib"] = rss_mib()
    del study
    gc.collect()
    tracemalloc.start()
    study = ex.Study(df, "y", "g")
    _, top = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    out["build_traced_peak_mib"] = top / 2**20

    def floor_build():
        codes, _ = pd.factorize(df["g"])
        y = df["y"].to_numpy()
        return np.bincount(codes), np.bincount(codes, weights=y)

    build_rounds = 5 if n >= 1e6 else 9
    timed = interleaved({"ours": lambda: ex.Study(df, "y", "g"), "floor": floor_build}, build_rounds)
    out["build_ratio"] = timed["ours"] / timed["floor"]
    gc.collect()

    built = rss_mib()
    study.drop([0], reason="bench")
    _ = study.results.pvalue()
    gc.collect()
    one = rss_mib()
    for i in range(1, edits):
        study.drop([i], reason="bench")
        _ = study.results.pvalue()
    gc.collect()
    many = rss_mib()
    study.reset()
    gc.collect()
    out.update(rss_built_mib=built, rss_1_edit_mib=one, rss_k_edits_mib=many, rss_reset_mib=rss_mib(),
               bytes_per_edit_per_row=(many - one) * 2**20 / max(edits - 1, 1) / n,
               k_edits_added_pct=100 * (many - built) / built)

    step = edit_and_recompute(study)
    step()
    step()
    groups = [g.to_numpy() for _, g in df.groupby("g")["y"]]
    codes, uniq = pd.factorize(df["g"])
    y = df["y"].to_numpy()
    k = len(uniq)

    def two_pass():
        c = np.bincount(codes, minlength=k)
        m = np.bincount(codes, weights=y, minlength=k) / c
        r = y - m[codes]
        return np.bincount(codes, weights=r * r, minlength=k)

    reps = rounds if n >= 1e6 else rounds * 10
    with blas_threads(1):
        one_thread = interleaved({"ours": step, "f_oneway": lambda: stats.f_oneway(*groups), "floor": two_pass}, reps)
    default = interleaved({"ours": step, "f_oneway": lambda: stats.f_oneway(*groups)}, reps)
    out.update(edit_ms=one_thread["ours"] * 1e3, f_oneway_ms=one_thread["f_oneway"] * 1e3,
               floor_ms=one_thread["floor"] * 1e3, f_oneway_over_ours=one_thread["f_oneway"] / one_thread["ours"],
               f_oneway_over_ours_default=default["f_oneway"] / default["ours"],
               ours_over_floor=one_thread["ours"] / one_thread["floor"])

    del study
    gc.collect()
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "bench.study.json"
        fresh = ex.Study(df, "y", "g")  # two edits only: the file's size is the data check's, not a long log's
        fresh.drop([1, 2], reason="bench")
        t0 = time.perf_counter()
        fresh.save(path)  # the first save computes the fingerprint and the block digests
        out["save_s"] = time.perf_counter() - t0
        out["file_bytes"] = path.stat().st_size
        # The same study as a file of the first definition (every file saved before the field existed): it is
        # checked by pandas' per-row hashes.
        older = Path(folder) / "older.study.json"
        doc = json.loads(path.read_text())
        doc["data"].pop("fingerprint_method")
        doc["data"]["fingerprint"] = fresh.dataset.fingerprint_by("pandas-row-hash")
        blocks = fresh.dataset.block_digests_by("pandas-row-hash").astype("<u8").tobytes()
        doc["data"]["block_check"]["digests"] = base64.b64encode(blocks).decode()
        older.write_text(json.dumps(doc))
        del fresh, doc
        gc.collect()

        def load(p: Path) -> None:
            again = ex.Study.load(p, df)
            assert again.dropped == (1, 2)

        loads = interleaved({"new": lambda: load(path), "older": lambda: load(older)}, load_rounds)
        gc.collect()
        out.update(load_s=loads["new"], load_older_s=loads["older"])
    out["peak_mib"] = peak_mib()
    # The data check alone by each definition, from the built dataset's arrays, as the kit computes it.
    import hashlib

    from explorer.engine.column_digest import column_bytes
    from explorer.engine.dataset import build_dataset
    from explorer.engine.row_hash import row_hashes

    ds = build_dataset(df, "y", ["g"])
    y_read = df["y"].to_numpy(dtype=np.float64)
    none = np.zeros(0, dtype=np.int64)
    checks = interleaved({
        "column-sha256": lambda: column_bytes("y", ["g"], ds.all_row_ids, y_read, ds.table, ds.codes, ds.levels, none,
                                              {}).fingerprint(),
        "pandas-row-hash": lambda: hashlib.sha256(row_hashes(ds.all_row_ids, y_read, ds.table, ["g"], {})[0]).digest(),
    }, load_rounds)
    out.update(check_new_s=checks["column-sha256"], check_old_s=checks["pandas-row-hash"])
    out["load_end"] = load_average()
    return out


def show(r: dict) -> None:
    n = r["n"]
    print(f"n = {n:.0e} (load average {r['load_start']} -> {r['load_end']}; peak resident {r['peak_mib']:.0f} MiB)")
    extra, traced, frame_mib = r["build_peak_above_mib"], r["build_traced_peak_mib"], r["frame_mib"]
    print(f"  frame {frame_mib:.1f} MiB; build {r['build_s']:.2f} s, {r['build_ratio']:.1f}x the factorize + "
          f"bincount floor (medians of interleaved rounds); build's peak {extra:.0f} MiB above the "
          f"{r['rss_before_mib']:.0f} MiB resident before it ({extra / frame_mib:.1f}x the frame; "
          f"{r['rss_after_build_mib'] - r['rss_before_mib']:.0f} MiB still held after it), tracemalloc peak "
          f"{traced:.0f} MiB ({traced / frame_mib:.1f}x)")
    print(f"  resident after build {r['rss_built_mib']:.0f} MiB, 1 edit {r['rss_1_edit_mib']:.0f}, k edits "
          f"{r['rss_k_edits_mib']:.0f} (+{r['k_edits_added_pct']:.1f}%; {r['bytes_per_edit_per_row']:.2f} bytes per "
          f"edit per row), after reset {r['rss_reset_mib']:.0f}")
    print(f"  one edit + results {r['edit_ms']:.3f} ms; f_oneway on split groups {r['f_oneway_ms']:.3f} ms "
          f"(f_oneway / ours {r['f_oneway_over_ours']:.2f}x one BLAS thread, {r['f_oneway_over_ours_default']:.2f}x "
          f"default threads); two-pass floor {r['floor_ms']:.3f} ms (ours / floor {r['ours_over_floor']:.1f}x)")
    print(f"  study file (two edits) {r['file_bytes'] / 1e3:.1f} kB, save {r['save_s']:.2f} s, load {r['load_s']:.2f} s; "
          f"the same file of the first definition (older files) {r['load_older_s']:.2f} s "
          f"({r['load_older_s'] / r['load_s']:.1f}x; medians of {r['load_rounds']} interleaved loads)")
    print("  the data check alone: "
          f"column-sha256 {r['check_new_s']:.3f} s, pandas-row-hash (older files) {r['check_old_s']:.3f} s "
          f"({r['check_old_s'] / r['check_new_s']:.0f}x; medians of interleaved rounds)")


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", nargs="*", type=float, default=[1e4, 1e5, 1e6])
    ap.add_argument("--edits", type=int, default=30)
    ap.add_argument("--rounds", type=int, default=15)
    ap.add_argument("--load-rounds", type=int, default=3, help="loads of the study file (median printed)")
    ap.add_argument("--one", type=float, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.one:
        print(json.dumps(measure(int(args.one), args.edits, args.rounds, args.load_rounds)))
        sys.exit(0)
    for size in args.sizes:
        env = {**os.environ, "OPENBLAS_NUM_THREADS": os.environ.get("OPENBLAS_NUM_THREADS", "")}
        env = {k: v for k, v in env.items() if v != ""}
        proc = subprocess.run([sys.executable, __file__, "--one", str(size), "--edits", str(args.edits),
                               "--rounds", str(args.rounds), "--load-rounds", str(args.load_rounds)],
                              capture_output=True, text=True, env=env)
        if proc.returncode:
            print(proc.stderr[-3000:])
            sys.exit(proc.returncode)
        show(json.loads(proc.stdout.strip().splitlines()[-1]))
