"""How numbers read on every surface of the kit: widget, report, command line, printed results.

One rule per kind of number, so that the same value shows the same digits wherever it
appears. The kind (*role*) of a table column is read from its heading (the kit's headings
are plain trade words: "p-value", "sum of squares", "mean", ...) unless the table states it
in ``frame.attrs["roles"]``.

========== ======================================================= ====================
role       rule                                                    example
========== ======================================================= ====================
p          3 significant digits; below 0.001 in powers of ten;     0.0312, 2.34e-05,
           below :data:`P_FLOOR` the floor, never "0"              < 1e-10
stat       4 significant digits (F, t, q, H, W, Cook's distance)   3.076, 12.17
ss         5 significant digits (sums of squares, mean squares)    609.32
share      3 decimals (R², eta², omega², power, proportions)       0.053
measure    the data's resolution plus one decimal (means, SDs,     62.51 (data in 0.1)
           standard errors, differences, interval ends, residuals)
reading    one observation, to the decimals it was recorded with   48.9
df         whole numbers as they are, others to 1 decimal          110, 54.2
count      whole numbers                                           114
number     4 significant digits (anything else)                    0.8416
========== ======================================================= ====================

*Measure* decimals come from the recorded values (:func:`measurement_decimals`: the
fewest decimals that write every reading exactly, e.g. 1 for thickness read to 0.1 µm)
plus one, the usual practice of reporting a mean one digit finer than the readings. Where
no resolution is known (a table shown on its own, readings with no fixed step) measures
take 4 significant digits.

The resolution and the response's units are the display *scale*. Surfaces that know the
study (the explorer, the report, the command line, ``print(results)``) set it for the
span of one rendering with :func:`scale`, a context manager (a context variable, so it
never leaks between threads or into another study's rendering); there is no global
option. With units, headings of measure columns read ``mean (µm)`` and sums of squares
``sum of squares (µm²)``.

This module imports numpy, pandas and, of the kit, only the HTML renderer's leaf
(:mod:`explorer.rendering`, which imports nothing of the kit), so that every layer (engine
included) may use it. ``esc``, the one escaping helper, lives in that leaf and is
re-exported here.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass
from typing import Any, cast

import numpy as np
import pandas as pd

from .rendering import esc, output, table

__all__ = [
    "P_FLOOR",
    "ROLES",
    "ResultFrame",
    "Scale",
    "column_role",
    "current_scale",
    "esc",
    "format_frame",
    "format_value",
    "heading",
    "measurement_decimals",
    "p_equals",
    "p_value",
    "scale",
    "show_coefficient",
    "show_df",
    "show_measure",
    "show_number",
    "show_p",
    "show_reading",
    "show_share",
    "show_ss",
    "show_stat",
    "significant",
    "text_table",
    "html_cells",
    "result_frame",
]

#: Smallest p-value written as a number; smaller ones read "< 1e-10" (never "0").
P_FLOOR = 1e-10
ROLES = ("p", "stat", "ss", "share", "measure", "reading", "df", "count", "number", "text")
_MISSING = "—"


@dataclass(frozen=True)
class Scale:
    """The display scale of one study: decimals of its readings (``None``: unknown) and its units."""

    decimals: int | None = None
    units: str = ""

    @property
    def measure_decimals(self) -> int | None:
        """Decimals of means, SDs and other values in the response's units (one finer than the readings)."""
        return None if self.decimals is None else min(self.decimals + 1, 9)


_NO_SCALE = Scale()
_SCALE: ContextVar[Scale] = ContextVar("explorer_display_scale", default=_NO_SCALE)  # noqa: B039 (frozen value)


def current_scale() -> Scale:
    """The scale set by the innermost :func:`scale` block (no decimals, no units outside any)."""
    return _SCALE.get()


@contextmanager
def scale(decimals: int | None = None, units: str = "", *, of: Scale | None = None) -> Iterator[Scale]:
    """Render with this scale inside the block: ``with scale(1, "µm"): html = table._repr_html_()``."""
    chosen = of if of is not None else Scale(decimals=decimals, units=units or "")
    token = _SCALE.set(chosen)
    try:
        yield chosen
    finally:
        _SCALE.reset(token)


def measurement_decimals(values: Any, *, most: int = 6) -> int | None:
    """Fewest decimals (0 to ``most``) that write every finite value exactly; ``None`` if none do.

    Readings 59.6, 61.6, 65.2 give 1; counts give 0; values with no fixed step (computed
    quantities, 15 significant digits) give ``None``.
    """
    v = np.asarray(values, dtype=float)
    head = v[:4096]
    head = head[np.isfinite(head)]
    if v.size > 4096 and head.size and not any(_exact(head, d) for d in range(most + 1)):
        return None  # no step the first values take: none the whole table takes (no pass over the rest)
    if v.size <= _BLOCK:
        v = v[np.isfinite(v)]
        if v.size == 0:
            return None
        return next((d for d in range(most + 1) if _exact(v, d)), None)

    # A step the first values cannot take, no longer table can: try the long table only from the
    # first step its first 4,096 values take (the same answer, without seven passes over readings
    # that have no fixed step). The table is read in blocks (no temporary the size of the table).
    first = _first_finite(v, 4096)
    if first.size == 0:
        return None
    start = next((d for d in range(most + 1) if _exact(first, d)), most + 1)
    return next((d for d in range(start, most + 1) if _exact_blocks(v, d)), None)


_BLOCK = 1 << 16


def _first_finite(v: np.ndarray, m: int) -> np.ndarray:
    """The first ``m`` finite values of ``v`` (fewer when it has fewer)."""
    parts: list[np.ndarray] = []
    got = 0
    for i in range(0, v.size, _BLOCK):
        block = v[i:i + _BLOCK]
        block = block[np.isfinite(block)][:m - got]
        parts.append(block)
        got += block.size
        if got >= m:
            break
    return np.concatenate(parts) if parts else v[:0]


def _exact_blocks(v: np.ndarray, d: int) -> bool:
    """:func:`_exact` over the finite values of ``v``, block by block (stops at the first block that fails).

    The same operations in two reused block-sized arrays: no allocation per block.
    """
    scaled, err = np.empty(_BLOCK), np.empty(_BLOCK)
    step = 10.0**d
    for i in range(0, v.size, _BLOCK):
        block = v[i:i + _BLOCK]
        finite = np.isfinite(block)
        if not finite.all():
            block = block[finite]
        a, b = scaled[:block.size], err[:block.size]
        np.multiply(block, step, out=a)
        np.round(a, out=b)
        np.subtract(a, b, out=b)
        np.abs(b, out=b)  # |scaled - round(scaled)|
        np.abs(a, out=a)
        np.maximum(a, 1.0, out=a)
        np.multiply(a, 1e-7, out=a)
        np.add(a, 1e-9, out=a)  # the tolerance of _exact
        if not np.all(b <= a):
            return False
    return True


def _exact(part: np.ndarray, d: int) -> bool:
    """Whether ``d`` decimals write every value of ``part`` exactly (to the tolerance of decimal input)."""
    scaled = part * 10.0**d
    err = np.abs(scaled - np.round(scaled))
    return bool(np.all(err <= 1e-7 * np.maximum(1.0, np.abs(scaled)) + 1e-9))


# --------------------------------------------------------------------------- single values
def _is_missing(x: Any) -> bool:
    if x is None or x is pd.NA or x is pd.NaT:
        return True
    try:
        return bool(isinstance(x, (float, np.floating)) and math.isnan(x))
    except TypeError:
        return False


def significant(x: float, digits: int = 4) -> str:
    """``digits`` significant digits, in plain notation from 1e-4 up (larger values keep their whole digits)."""
    if x == 0:
        return "0"
    if not math.isfinite(x):
        return "∞" if x > 0 else "-∞" if x < 0 else _MISSING
    ax = abs(x)
    if ax < 1e-4:
        return f"{x:.{digits - 1}e}"
    exponent = math.floor(math.log10(ax))
    decimals = max(digits - 1 - exponent, 0)
    out = f"{x:.{decimals}f}"
    if float(out) != 0 and len(out.replace("-", "").replace(".", "").lstrip("0")) > digits and decimals:
        out = f"{x:.{decimals - 1}f}"  # 9.9996 -> 10.000 would show a fifth digit
    return "0" if float(out) == 0 else out


def p_value(p: Any) -> str:
    """A p-value in the kit's one style: 0.0312, 2.34e-05, ``< 1e-10``; '—' when undefined."""
    if _is_missing(p):
        return _MISSING
    p = float(p)
    if p < P_FLOOR:
        return f"< {P_FLOOR:.0e}"
    if p < 1e-3:
        return f"{p:.2e}"
    return significant(p, 3)


def _fixed(x: float, decimals: int) -> str:
    out = f"{x:.{decimals}f}"
    return out[1:] if out.startswith("-") and float(out) == 0 else out


def format_value(x: Any, role: str = "number", *, decimals: int | None = None) -> str:
    """One value by its role (see the module table); ``decimals`` overrides the scale for measures."""
    if _is_missing(x):
        return _MISSING
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, str):
        return x
    if role == "text":
        return str(x)
    if isinstance(x, (int, np.integer)) and role not in ("share",):
        return str(int(x))
    try:
        xf = float(x)
    except (TypeError, ValueError):
        return str(x)
    if not math.isfinite(xf):
        return significant(xf)
    if role == "p":
        return p_value(xf)
    if role in ("count", "df") and xf.is_integer():
        return str(int(xf))
    if role == "df":
        return _fixed(xf, 1)
    if role == "share":
        return _fixed(xf, 3)
    if role == "ss":
        return significant(xf, 5)
    if role == "reading":
        d = current_scale().decimals
        if d is not None and abs(xf) < 1e12:
            return _fixed(xf, d)
        return f"{xf:.12g}"  # as stored: no digits added, none invented
    if role == "measure":
        d = decimals if decimals is not None else current_scale().measure_decimals
        if d is not None and abs(xf) < 1e12:
            return _fixed(xf, d)
        return significant(xf, 4)
    return significant(xf, 4)


def show_p(p: Any) -> str:
    """A p-value (role ``p``)."""
    return format_value(p, "p")


def p_equals(p: Any, name: str = "p") -> str:
    """A p-value in a sentence: ``p = 0.0312``, or ``p < 1e-10`` below the display floor."""
    shown = show_p(p)
    return f"{name} {shown}" if shown.startswith("<") else f"{name} = {shown}"


def show_stat(x: Any) -> str:
    """A test statistic or score (role ``stat``: F, t, q, H, W, Cook's distance)."""
    return format_value(x, "stat")


def show_ss(x: Any) -> str:
    """A sum of squares or mean square (role ``ss``)."""
    return format_value(x, "ss")


def show_share(x: Any) -> str:
    """R², eta², omega², power or another proportion (role ``share``)."""
    return format_value(x, "share")


def show_measure(x: Any, decimals: int | None = None) -> str:
    """A value in the response's units (role ``measure``: mean, SD, difference, interval end)."""
    return format_value(x, "measure", decimals=decimals)


def show_reading(x: Any) -> str:
    """One observation as recorded (role ``reading``: the readings' own decimals, 48.9)."""
    return format_value(x, "reading")


def show_coefficient(x: Any) -> str:
    """A multiplier inside a formula (4 σ², 3.429 σ²): whole numbers bare, others 4 significant digits."""
    if _is_missing(x):
        return _MISSING
    xf = float(x)
    if math.isfinite(xf) and abs(xf - round(xf)) <= 1e-9 * max(1.0, abs(xf)):
        return str(int(round(xf)))
    return significant(xf, 4)


def show_df(x: Any) -> str:
    """Degrees of freedom (role ``df``)."""
    return format_value(x, "df")


def show_number(x: Any) -> str:
    """Any other number (role ``number``)."""
    return format_value(x, "number")


# --------------------------------------------------------------------------- columns
_RULES: tuple[tuple[str, str], ...] = (
    # (regular expression on the lower-cased heading, role); first match wins
    (r"^change in p", "number"),
    (r"p-value|\bp\b|^p ", "p"),
    (r"^df\b|\bdf$|degrees of freedom", "df"),
    (r"sum of squares|mean square|^ss\b|^ms\b", "ss"),
    (r"eta|omega|epsilon|cohen|r²|r-squared|power|share|proportion|efficiency", "share"),
    (r"^(n|rows?|count|rank|step|specification|k)$|^n |rows left out|^left out$|examined", "count"),
    (r"^(f|t|q|h|w|z|statistic|score|dffits)$|statistic|studentized|cook|leverage|^pair t|distance", "stat"),
    (r"mean|\bsd\b|standard deviation|standard error|difference|estimate|ci low|ci high|interval|"
     r"simultaneous (low|high)|observed|fitted|residual|^low$|^high$", "measure"),
)


def column_role(name: Any, frame: pd.DataFrame | None = None) -> str:
    """The role of a column: ``frame.attrs["roles"][name]`` if the table states it, else by its heading."""
    if frame is not None:
        stated = (frame.attrs or {}).get("roles") or {}
        if name in stated:
            return str(stated[name])
    low = str(name).strip().lower()
    for pattern, role in _RULES:
        if re.search(pattern, low):
            return role
    return "number"


def heading(name: Any, role: str, units: str | None = None) -> str:
    """The column heading with the units of its role: ``mean (µm)``, ``sum of squares (µm²)``."""
    units = current_scale().units if units is None else units
    text = str(name)
    if not units or "(" + units in text:
        return text
    unit = units if role == "measure" else f"{units}²" if role == "ss" else ""
    if not unit:
        return text
    if text.endswith(")") and "(" in text:  # "95% CI low (pooled SD)" -> "95% CI low (µm, pooled SD)"
        i = text.rindex("(")
        return f"{text[:i]}({unit}, {text[i + 1:]}"
    return f"{text} ({unit})"


def format_frame(frame: pd.DataFrame, *, units: str | None = None, with_units: bool = True) -> pd.DataFrame:
    """The table as text, cell by cell by column role, headings with units (object dtype, same index).

    Measures take ``frame.attrs["decimals"]`` (and headings ``frame.attrs["units"]``) when the
    table states them, else the current :func:`scale`.
    """
    out: dict[int, list[str]] = {}
    names: list[str] = []
    attrs = frame.attrs or {}
    decimals = attrs.get("decimals")
    if units is None and attrs.get("units") is not None:
        units = str(attrs["units"])
    for col in frame.columns:
        role = column_role(col, frame)
        values = frame[col].tolist()
        out[len(names)] = [format_value(v, role, decimals=decimals) for v in values]
        names.append(heading(col, role, units) if with_units else str(col))
    shown = pd.DataFrame(out, index=frame.index)
    shown.columns = names
    return shown


def text_table(frame: pd.DataFrame, *, units: str | None = None, index: bool = False) -> str:
    """Aligned plain text of :func:`format_frame` (numbers right-aligned), for a terminal."""
    shown = format_frame(frame, units=units)
    heads = [str(c) for c in shown.columns]
    cols = [[str(v) for v in shown[c].tolist()] for c in shown.columns]
    numeric = [column_role(c, frame) not in ("text",) and not frame[c].map(
        lambda v: isinstance(v, str)).all() for c in frame.columns]
    widths = [max([len(h)] + [len(v) for v in col]) for h, col in zip(heads, cols)]
    lines = ["  ".join(h.rjust(w) if num else h.ljust(w) for h, w, num in zip(heads, widths, numeric)).rstrip()]
    for i in range(len(shown)):
        cells = [col[i].rjust(w) if num else col[i].ljust(w) for col, w, num in zip(cols, widths, numeric)]
        lines.append("  ".join(cells).rstrip())
    return "\n".join(lines)


def html_cells(frame: pd.DataFrame, *, units: str | None = None) -> tuple[list[str], list[list[tuple[str, bool]]]]:
    """Escaped headings and, per row, (escaped text, is_number) per cell: the HTML renderers' input."""
    shown = format_frame(frame, units=units)
    heads = [esc(c) for c in shown.columns]
    rows = []
    for i in range(len(frame)):
        raw = frame.iloc[i].tolist()
        rows.append([(esc(s), not isinstance(r, str)) for s, r in zip(shown.iloc[i].tolist(), raw)])
    return heads, rows


class ResultFrame(pd.DataFrame):  # type: ignore[misc,unused-ignore]  # pandas is untyped without its stubs
    """A DataFrame of full-precision results that *displays* with the kit's digits.

    ``to_frame()`` of the kit's results returns one: computing with it uses every digit;
    printing it, or showing it in a notebook, goes through :func:`format_frame`. Anything
    derived from it (a selection, a sum) is an ordinary DataFrame.
    """

    @property
    def _constructor(self) -> type[pd.DataFrame]:  # derived frames are plain DataFrames
        return cast("type[pd.DataFrame]", pd.DataFrame)

    def __repr__(self) -> str:
        return text_table(self)

    def _repr_html_(self) -> str:  # type: ignore[override,unused-ignore]
        """The frame through the one renderer (:mod:`explorer.rendering`), numbers by :func:`format_frame`."""
        return output(lambda: table(*html_cells(self)))


def result_frame(data: Any = None, *, roles: Mapping[str, str] | None = None, **kwargs: Any) -> ResultFrame:
    """A :class:`ResultFrame` (same arguments as ``pd.DataFrame``), with column roles stated when given."""
    frame = ResultFrame(data, **kwargs)
    if isinstance(data, pd.DataFrame) and data.attrs:
        frame.attrs.update(data.attrs)
    if roles:
        frame.attrs["roles"] = dict(roles)
    return frame
