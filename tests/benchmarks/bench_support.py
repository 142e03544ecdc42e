"""Shared pieces of the benchmark scripts: a median timer and a one-edit-per-call driver."""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from typing import Any


def median_time(fn: Callable[[], Any], repeats: int) -> float:
    """Median wall time of ``repeats`` calls of ``fn`` (seconds)."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def edit_and_recompute(study: Any, rows: int = 50) -> Callable[[], Any]:
    """A call that makes one edit on ``study`` and reads its results.

    Calls alternate: drop a row, then restore it, cycling through the first ``rows``
    row ids, so every call is a real edit followed by a recompute.
    """
    state = {"i": 0}

    def step() -> Any:
        i = state["i"]
        if i % 2 == 0:
            study.drop([i % rows], reason="bench")
        else:
            study.restore([(i - 1) % rows], reason="bench")
        state["i"] += 1
        return study.results

    return step
