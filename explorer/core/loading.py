"""Read a tidy table from a DataFrame or a CSV, Parquet or Excel file.

Text sources keep the response column as text until :mod:`decimal_shift` has taken
the exact decimal offset out, so no digits are lost before the analysis starts.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pandas as pd

from .errors import ColumnError, DataError

__all__ = ["read_table"]

_CSV = {".csv", ".txt", ".tsv"}
_PARQUET = {".parquet", ".pq"}
_EXCEL = {".xlsx", ".xlsm", ".xls"}


def read_table(source: str | Path, text_columns: tuple[str, ...] = ()) -> tuple[pd.DataFrame, dict[str, pd.Series]]:
    """Load ``source``; return the table and, for CSV, the raw text of ``text_columns``.

    The raw text lets the caller shift decimals exactly (see :mod:`.decimal_shift`).
    """
    path = Path(source)
    if not path.exists():
        raise DataError(f"no file at {str(path)!r}: check the path (relative paths start from {Path.cwd()})")
    if path.is_dir():
        raise DataError(f"{str(path)!r} is a folder; give the path of a CSV, Parquet or Excel file")
    suffix = path.suffix.lower()
    texts: dict[str, pd.Series] = {}
    if suffix in _CSV:
        sep = "\t" if suffix == ".tsv" else None
        try:
            header = pd.read_csv(path, nrows=0, sep=sep, engine="python" if sep is None else "c")
        except (pd.errors.ParserError, UnicodeDecodeError, pd.errors.EmptyDataError) as exc:
            raise DataError(f"could not read {path.name!r} as a delimited text table: {exc}") from None
        wanted = [c for c in text_columns if c in header.columns]
        try:
            frame = pd.read_csv(
                path, sep=sep, engine="python" if sep is None else "c", dtype={c: str for c in wanted}
            )
        except (pd.errors.ParserError, UnicodeDecodeError) as exc:
            raise DataError(f"could not read {path.name!r} as a delimited text table: {exc}") from None
        for c in wanted:
            texts[c] = frame[c].copy()
            frame[c] = pd.to_numeric(frame[c].str.strip(), errors="coerce") if frame[c].notna().any() else frame[c]
            # Non-numeric text is restored so the validator can name the offending rows.
            bad = frame[c].isna() & texts[c].notna() & (texts[c].str.strip() != "")
            if bad.any():
                frame[c] = frame[c].astype(object)
                frame.loc[bad, c] = texts[c][bad]
    elif suffix in _PARQUET:
        try:
            frame = pd.read_parquet(path)
        except ImportError:
            raise DataError("reading Parquet needs pyarrow: pip install pyarrow") from None
    elif suffix in _EXCEL:
        if importlib.util.find_spec("openpyxl") is None:
            raise DataError("reading Excel files needs openpyxl: pip install openpyxl (or save the sheet as CSV)")
        try:
            frame = pd.read_excel(path)
        except (ValueError, OSError) as exc:
            raise DataError(f"could not read {path.name!r} as an Excel workbook: {exc}") from None
    else:
        raise DataError(f"unknown file type {suffix!r} for {path.name!r}: use .csv, .tsv, .parquet or .xlsx")
    if frame.columns.duplicated().any():
        dups = sorted({str(c) for c in frame.columns[frame.columns.duplicated()]})
        raise ColumnError(f"{path.name!r} has repeated column names {dups}; rename them so each is unique")
    return frame, texts
