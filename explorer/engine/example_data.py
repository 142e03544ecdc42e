"""Small invented data sets for the examples in the documentation (``explorer.example_data``).

Every value here is invented (written for the examples, not measured anywhere); the
scenarios are plain manufacturing and lab settings so that an example reads as an
analysis. Each call returns a fresh DataFrame, so an example may edit its copy.

========  ==================================================================================
name      what it is (all invented)
========  ==================================================================================
coating   film thickness (µm) of 12 panels from three spray nozzles A, B, C (one factor)
lines     film thickness (µm) by nozzle (A, B, C) and line speed (slow, fast), three panels
          per combination (two crossed factors, 18 rows)
oven      hardness of 12 test bars cured at 60, 80, 100 and 120 °C (one factor with numeric
          levels, for trends and contrasts)
gauge     a measurement-system study: five parts, each measured twice by three operators
          (30 rows; both factors random)
cure      hardness of six panels, each read after 1 h, 4 h and 24 h of curing (repeated
          measures: subject ``panel``, within factor ``time``)
========  ==================================================================================
"""

from __future__ import annotations

import pandas as pd

from .errors import ExplorerError

__all__ = ["EXAMPLES", "example_data"]

_LINES = [49.8, 50.1, 49.4, 49.8, 49.6, 49.3, 51.1, 51.3, 51.1, 51.5, 51.8, 51.8, 49.8, 50.0, 49.7, 49.0, 49.1, 49.4]
_GAUGE = [10.19, 10.09, 10.31, 10.40, 10.08, 10.09, 9.65, 9.75, 9.69, 9.86, 9.40, 9.51, 10.81, 11.01, 11.12, 11.14,
          10.73, 10.85, 9.96, 9.96, 10.19, 10.22, 9.92, 9.85, 9.23, 9.42, 9.50, 9.51, 9.37, 9.13]
_CURE = [63.5, 66.3, 67.6, 65.0, 68.3, 68.3, 61.6, 64.1, 65.7, 60.1, 63.0, 66.3, 58.5, 61.7, 62.0, 61.6, 62.6, 64.9]


def _coating() -> pd.DataFrame:
    return pd.DataFrame({
        "nozzle": ["A"] * 4 + ["B"] * 4 + ["C"] * 4,
        "thickness_um": [50.1, 49.8, 50.4, 50.0, 51.2, 51.5, 50.9, 51.3, 49.6, 49.9, 50.2, 49.7],
    })


def _lines() -> pd.DataFrame:
    return pd.DataFrame({
        "nozzle": [n for n in "ABC" for _ in range(6)],
        "speed": (["slow"] * 3 + ["fast"] * 3) * 3,
        "thickness_um": _LINES,
    })


def _oven() -> pd.DataFrame:
    return pd.DataFrame({
        "temperature": [t for t in ("60", "80", "100", "120") for _ in range(3)],
        "hardness": [41.2, 42.0, 40.7, 44.9, 45.6, 44.1, 47.0, 47.9, 46.5, 47.8, 48.6, 47.1],
    })


def _gauge() -> pd.DataFrame:
    return pd.DataFrame({
        "part": [f"P{p}" for p in range(1, 6) for _ in range(6)],
        "operator": [o for _ in range(5) for o in ("ana", "ben", "cho") for _ in range(2)],
        "diameter_mm": _GAUGE,
    })


def _cure() -> pd.DataFrame:
    return pd.DataFrame({
        "panel": [f"panel{s}" for s in range(1, 7) for _ in range(3)],
        "time": ["1h", "4h", "24h"] * 6,
        "hardness": _CURE,
    })


#: name -> builder of each invented example table
EXAMPLES = {"coating": _coating, "lines": _lines, "oven": _oven, "gauge": _gauge, "cure": _cure}


def example_data(name: str = "coating") -> pd.DataFrame:
    """One of the kit's small invented example tables (see the module docstring).

    Parameters
    ----------
    name : 'coating', 'lines', 'oven', 'gauge' or 'cure'.

    Returns
    -------
    pandas.DataFrame
        A fresh copy; its values are invented for the documentation.

    References
    ----------
    None: the values are invented, not taken from a publication.

    Examples
    --------
    >>> import explorer as ex
    >>> df = ex.example_data("lines")
    >>> df.shape, list(df.columns)
    ((18, 3), ['nozzle', 'speed', 'thickness_um'])
    """
    if name not in EXAMPLES:
        raise ExplorerError(f"no example table {name!r}; there are {sorted(EXAMPLES)}")
    return EXAMPLES[name]()
