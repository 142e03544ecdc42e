"""Shared pieces of the benchmark scripts: timers, interleaved rounds, thread pinning, load and memory.

Every benchmark states the ratio of the medians of interleaved runs (ours, reference,
ours, reference, ...), runs the reference libraries pinned to one BLAS thread and prints
the default-thread figure beside it, prints the load average and the peak resident memory.
"""

from __future__ import annotations

import os
import resource
import statistics
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any


def median_time(fn: Callable[[], Any], repeats: int) -> float:
    """Median wall time of ``repeats`` calls of ``fn`` (seconds)."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def interleaved(fns: dict[str, Callable[[], Any]], rounds: int) -> dict[str, float]:
    """Median wall time (seconds) of each function over ``rounds`` rounds that call them in turn."""
    times: dict[str, list[float]] = {k: [] for k in fns}
    for _ in range(rounds):
        for name, fn in fns.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
    return {k: statistics.median(v) for k, v in times.items()}


@contextmanager
def blas_threads(limit: int | None) -> Iterator[None]:
    """Run the block with the BLAS/OpenMP pools limited to ``limit`` threads (``None``: the default)."""
    if limit is None:
        yield
        return
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=limit):
        yield


def load_average() -> str:
    one, five, fifteen = os.getloadavg()
    return f"{one:.2f} {five:.2f} {fifteen:.2f}"


def peak_mib() -> float:
    """Peak resident memory of this process so far (MiB; Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def reset_peak() -> bool:
    """Start the resident high-water mark (``VmHWM``) afresh from the resident memory now.

    ``ru_maxrss`` is the process's high-water mark since it started and cannot be reset: read
    after a step, it is the larger of that step's peak and every earlier one (building the
    input data, say). Linux (4.0 and later) resets ``VmHWM`` when ``5`` is written to
    ``/proc/self/clear_refs``; False where that is not possible (then use tracemalloc).
    """
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
    except OSError:
        return False
    return True


def hwm_mib() -> float:
    """Resident high-water mark of this process since the last :func:`reset_peak` (MiB)."""
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def rss_mib() -> float:
    """Resident memory of this process now (MiB)."""
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def edit_and_recompute(study: Any, rows: int = 50) -> Callable[[], Any]:
    """A call that makes one edit on ``study`` and reads what the reference libraries compute.

    Calls alternate: drop a row, then restore it, cycling through the first ``rows``
    row ids, so every call is a real edit followed by a recompute. Each call returns the
    F and p of every row of the partition (what ``f_oneway`` or ``anova_lm`` give), read
    from ``study.results``: results make their tables around the partition (level tables,
    intervals, per-row fit) when first read, so reading only ``study.results`` would time
    less than the references compute.
    """
    state = {"i": 0}

    def step() -> Any:
        i = state["i"]
        if i % 2 == 0:
            study.drop([i % rows], reason="bench")
        else:
            study.restore([(i - 1) % rows], reason="bench")
        state["i"] += 1
        return [(row.statistic, row.pvalue) for row in study.results.partition.rows]

    return step
