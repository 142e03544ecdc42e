"""Build one-way studies from lists of groups (shared by the battery tests)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

import explorer as ex

#: NIST/SEMATECH e-Handbook 7.4.7.1 (four levels of five; levels 1-3 from 7.4.3.3).
NIST_TUKEY_GROUPS = [
    [6.9, 5.4, 5.8, 4.6, 4.0],
    [8.3, 6.8, 7.8, 9.2, 6.5],
    [8.0, 10.5, 8.1, 6.9, 9.3],
    [5.8, 3.8, 6.1, 5.6, 6.2],
]


def frame_from_groups(groups: Sequence[Sequence[float]], names: Sequence[str] | None = None) -> pd.DataFrame:
    names = list(names) if names is not None else [f"L{i + 1}" for i in range(len(groups))]
    return pd.DataFrame({
        "y": np.concatenate([np.asarray(g, dtype=float) for g in groups]),
        "level": np.repeat(names, [len(g) for g in groups]),
    })


def study_from_groups(groups: Sequence[Sequence[float]], names: Sequence[str] | None = None) -> ex.Study:
    return ex.Study(frame_from_groups(groups, names), response="y", factors="level")


def random_groups(sizes: Sequence[int], *, seed: int = 0, spread_step: float = 0.5, shift: float = 0.4,
                  digits: int = 2) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    return [np.round(rng.normal(10 + i * shift, 1 + i * spread_step, n), digits) for i, n in enumerate(sizes)]
