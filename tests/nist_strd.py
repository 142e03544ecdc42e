"""Read the NIST StRD analysis-of-variance sets from the installed scipy wheel.

The files ship at ``scipy/stats/tests/data/nist_anova/*.dat`` with certified values in
each header. They are read in place and never copied into this repository.

Source: NIST Statistical Reference Datasets, Analysis of Variance
(Simon and Lesage 1989, Comput. Stat. Data Anal. 8, 325-332).

Also: exact rational reference computations on the float64 inputs, and the log
relative error (LRE) used to score agreement (McCullough 1998, Am. Stat. 52(4)).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from decimal import Decimal, getcontext
from fractions import Fraction
from pathlib import Path

import scipy

NIST_DIR = Path(scipy.__file__).parent / "stats" / "tests" / "data" / "nist_anova"
SETS = ["SiRstv", "SmLs01", "SmLs02", "SmLs03", "AtmWtAg", "SmLs04", "SmLs05", "SmLs06", "SmLs07", "SmLs08", "SmLs09"]

_NUM = r"([-+]?\d+\.\d+E[-+]\d+)"


@dataclass(frozen=True)
class NistSet:
    name: str
    levels: list[str]
    texts: list[str]
    leading_digits: int
    df_between: int
    df_within: int
    ss_between: float
    ss_within: float
    ms_between: float
    ms_within: float
    f: float
    r_squared: float
    resid_sd: float


def available() -> bool:
    return all((NIST_DIR / f"{s}.dat").exists() for s in SETS)


def read_set(name: str) -> NistSet:
    text = (NIST_DIR / f"{name}.dat").read_text()
    lines = text.splitlines()
    between = next(ln for ln in lines if ln.startswith("Between"))
    within = next(ln for ln in lines if ln.startswith("Within"))
    b = re.findall(_NUM, between)
    w = re.findall(_NUM, within)
    df_b = int(re.search(r"\s(\d+)\s", between).group(1))
    df_w = int(re.search(r"\s(\d+)\s", within).group(1))
    r2 = float(re.search(r"R-Squared\s+" + _NUM, text).group(1))
    sd = float(re.search(r"Standard Deviation\s+" + _NUM, text).group(1))
    lead = int(re.search(r"(\d+) Constant Leading Digit", text).group(1))
    levels, texts = [], []
    for ln in lines:
        m = re.fullmatch(r"\s*(\d+)\s+([-+]?\d+\.?\d*)\s*", ln)
        if m:
            levels.append(m.group(1))
            texts.append(m.group(2))
    return NistSet(name, levels, texts, lead, df_b, df_w, float(b[0]), float(w[0]), float(b[1]), float(w[1]),
                   float(b[2]), r2, sd)


def exact_oneway(values: list[float], levels: list[str]) -> dict[str, float]:
    """Exact rational one-way partition of the given float64 values (then rounded once)."""
    groups: dict[str, list[Fraction]] = {}
    for v, g in zip(values, levels):
        groups.setdefault(g, []).append(Fraction(v))
    n = sum(len(g) for g in groups.values())
    k = len(groups)
    grand = sum(sum(g) for g in groups.values()) / n
    ssb = Fraction(0)
    ssw = Fraction(0)
    for g in groups.values():
        m = sum(g) / len(g)
        ssb += len(g) * (m - grand) ** 2
        ssw += sum((x - m) ** 2 for x in g)
    msb, msw = ssb / (k - 1), ssw / (n - k)
    getcontext().prec = 50
    sd = Decimal(msw.numerator) / Decimal(msw.denominator)
    return {
        "ss_between": float(ssb), "ss_within": float(ssw), "ms_between": float(msb), "ms_within": float(msw),
        "f": float(msb / msw), "r_squared": float(ssb / (ssb + ssw)), "resid_sd": float(sd.sqrt()),
    }


def lre(x: float, ref: float) -> float:
    """Log relative error: number of correct significant digits (capped at 15.9)."""
    if x == ref:
        return 15.9
    if ref == 0:
        return -math.log10(abs(x))
    return min(15.9, -math.log10(abs(x - ref) / abs(ref)))
