"""Checks that a table's names, row ids and values can be told apart once written as text.

The kit names columns, levels and rows by text (in tables, edits, saved studies and
reports). Two different values that print the same (``1`` and ``"1"``, ``True`` and
``"True"``) would silently become one level or one row id, so they are refused with
the rows named. Column labels that are not text are read as text when that is
unambiguous; a response that is not a plain number (dates, durations, complex or
categorical values) is refused rather than converted behind the user's back.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

import numpy as np
import pandas as pd

from .errors import ColumnError, DataError, preview

__all__ = ["check_response_values", "column_names", "decimal_comma_hint", "refuse_text_collisions", "text_columns"]


def column_names(value: object, role: str) -> tuple[str, ...]:
    """One column name or a list of them, as a tuple of text; refuse anything else with an example."""
    items = (value,) if isinstance(value, str) else value
    names: tuple[object, ...]
    try:
        names = tuple(items)  # type: ignore[arg-type]
    except TypeError:
        names = (value,)
    bad = [n for n in names if not isinstance(n, str) or not n]
    if bad:
        b = bad[0]
        example = f"{str(b)!r}" if b is not None and str(b) else "'machine'"
        raise ColumnError(
            f"column names are text: name the {role} as {example}, not {b!r} ({type(b).__name__}); "
            "a table's non-text column labels are read as text"
        )
    return tuple(str(n) for n in names)


def text_columns(frame: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """The table with every column label as text; refuse labels that cannot be (notes say what changed)."""
    cols = frame.columns
    if isinstance(cols, pd.MultiIndex):
        example = cols[0]
        raise ColumnError(
            f"the table has {cols.nlevels} header rows (MultiIndex columns such as {example!r}); flatten them "
            "first, e.g. df.columns = ['_'.join(map(str, c)) for c in df.columns]"
        )
    labels = [str(c) for c in cols]
    seen: dict[str, list[object]] = {}
    for raw, text in zip(cols, labels):
        seen.setdefault(text, []).append(raw)
    clash = {t: raws for t, raws in seen.items() if len(raws) > 1}
    if clash:
        repeated = [t for t, raws in clash.items() if len({(type(r), r) for r in raws}) == 1]
        if repeated:
            raise ColumnError(f"the table has repeated column names {sorted(repeated)}; rename them so each is unique")
        shown = "; ".join(" and ".join(repr(r) for r in raws) for raws in clash.values())
        raise ColumnError(f"column names {shown} read the same as text; rename one of them")
    notes: list[str] = []
    if any(not isinstance(c, str) for c in cols):
        odd = [c for c in cols if not isinstance(c, str)]
        notes.append(f"Column labels {preview(odd)} are not text; they are used as {preview([str(c) for c in odd])}.")
        frame = frame.copy(deep=False)
        frame.columns = labels
    return frame, notes


def check_response_values(col: pd.Series, response: str) -> None:
    """Refuse a response column whose values are not plain real numbers (or text that reads as them)."""
    dtype = col.dtype
    if pd.api.types.is_bool_dtype(dtype):
        raise DataError(f"response column {response!r} is true/false; the analysis of variance needs a numeric response")
    if pd.api.types.is_datetime64_any_dtype(dtype) or pd.api.types.is_timedelta64_dtype(dtype) or isinstance(
            dtype, pd.PeriodDtype):
        raise DataError(
            f"response column {response!r} holds dates or times ({dtype}); convert them to a number in a stated "
            f"unit first, e.g. hours: df[{response!r}] / pd.Timedelta(hours=1)"
        )
    if pd.api.types.is_complex_dtype(dtype):
        raise DataError(f"response column {response!r} holds complex numbers; analyse the real part, the imaginary "
                        "part or the magnitude as a column of its own")
    if isinstance(dtype, pd.CategoricalDtype):
        raise DataError(
            f"response column {response!r} is categorical; if its categories are measurements, convert them "
            f"first (df[{response!r}].astype(float)), else it is a factor, not the response"
        )
    if dtype == object:  # noqa: E721  (a numpy dtype equals object; it is not the object type)
        kinds = {type(v).__name__ for v in col.dropna().head(10_000) if not isinstance(v, (str, int, float, np.number))}
        kinds |= {"complex" for v in col.dropna().head(10_000) if isinstance(v, (complex, np.complexfloating))}
        if kinds:
            raise DataError(f"response column {response!r} holds values of type {preview(sorted(kinds))}; "
                            "the analysis of variance needs real numbers")


_DECIMAL_COMMA = re.compile(r"[-+]?\d{1,3}(?:\.\d{3})*,\d+|[-+]?\d+,\d+")


def decimal_comma_hint(examples: Sequence[str]) -> str:
    """A sentence for values such as '1,5' (a decimal comma, or a thousands separator), else ''."""
    texts = [str(e).strip() for e in examples]
    if texts and all(_DECIMAL_COMMA.fullmatch(t) for t in texts):
        return (" They look like numbers written with a decimal comma (or a thousands separator); read the file "
                "with pandas.read_csv(path, sep=';', decimal=',') (thousands: thousands=',') and pass the DataFrame")
    return ""


def _family(v: object) -> str:
    if isinstance(v, (bool, np.bool_)):
        return "true/false"
    if isinstance(v, (int, float, np.integer, np.floating)):
        return "a number"
    if isinstance(v, str):
        return "text"
    return type(v).__name__


def refuse_text_collisions(values: pd.Series, labels: pd.Series, ids: np.ndarray, what: str) -> None:
    """Refuse values of different kinds that print the same text, naming a few rows of each.

    ``values`` are the raw values, ``labels`` their text, ``ids`` the row ids in the same
    order. Equal numbers of two types (1 and 1.0) are one value, not a collision.
    """
    if values.dtype != object or pd.api.types.infer_dtype(values, skipna=True) in ("string", "empty"):
        return  # one type throughout: equal text means equal values
    fam = values.map(_family)
    both = pd.DataFrame({"label": labels.to_numpy(), "family": fam.to_numpy()})
    per_label = both.groupby("label", sort=False)["family"].nunique()
    bad = per_label[per_label > 1]
    if bad.empty:
        return
    label = str(bad.index[0])
    parts = []
    for family in pd.unique(both.loc[both.label == label, "family"]):
        where = np.flatnonzero((both.label == label).to_numpy() & (both.family == family).to_numpy())
        example = values.iloc[int(where[0])]
        rows = ", ".join(f"row {r}" for r in (ids[where[:4]].tolist()))
        more = f" and {len(where) - 4} more" if len(where) > 4 else ""
        parts.append(f"{example!r} ({family}; {rows}{more})")
    others = f" ({len(bad) - 1} more such values)" if len(bad) > 1 else ""
    raise DataError(
        f"{what} has values that read the same as text {label!r}: {' and '.join(parts)}{others}; they would become "
        "one level. Make the column one type first, e.g. df[col] = df[col].astype(str), or correct the entries"
    )
