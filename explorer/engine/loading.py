"""Read a tidy table from a DataFrame or a CSV, Parquet or Excel file.

Text sources keep the response column as text until :mod:`decimal_shift` has taken
the exact decimal offset out, so no digits are lost before the analysis starts.
"""

from __future__ import annotations

import csv
import importlib.util
from pathlib import Path
from typing import Any

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
        frame = _read_delimited(path, "\t" if suffix == ".tsv" else None, text_columns)
        wanted = [c for c in text_columns if c in frame.columns]
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
        except Exception as exc:  # the reader's own error types (ArrowInvalid, OSError, ...)
            raise DataError(f"could not read {path.name!r} as a Parquet file: {_first_line(exc)}") from None
    elif suffix in _EXCEL:
        if importlib.util.find_spec("openpyxl") is None:
            raise DataError("reading Excel files needs openpyxl: pip install openpyxl (or save the sheet as CSV)")
        try:
            frame = pd.read_excel(path)
        except ImportError as exc:
            raise DataError(f"reading {path.name!r} needs another package: {_first_line(exc)}") from None
        except Exception as exc:  # the reader's own error types (BadZipFile, ValueError, KeyError, ...)
            raise DataError(f"could not read {path.name!r} as an Excel workbook: {_first_line(exc)}") from None
    else:
        raise DataError(f"unknown file type {suffix!r} for {path.name!r}: use .csv, .tsv, .parquet or .xlsx")
    if len(frame) == 0:
        raise DataError(f"{path.name!r} has a header ({', '.join(str(c) for c in frame.columns[:8])}) but no data rows")
    if frame.columns.duplicated().any():
        dups = sorted({str(c) for c in frame.columns[frame.columns.duplicated()]})
        raise ColumnError(f"{path.name!r} has repeated column names {dups}; rename them so each is unique")
    return frame, texts


_BOMS = ((b"\xff\xfe\x00\x00", "utf-32"), (b"\x00\x00\xfe\xff", "utf-32"), (b"\xff\xfe", "utf-16"),
         (b"\xfe\xff", "utf-16"), (b"\xef\xbb\xbf", "utf-8-sig"))


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _encoding(path: Path) -> str:
    """UTF-8 (a byte-order mark is stripped), or UTF-16/UTF-32 when the file starts with their mark."""
    try:
        with path.open("rb") as fh:
            head = fh.read(8192)
    except OSError as exc:
        raise DataError(f"could not open {path.name!r}: {exc.strerror or exc}") from None
    if not head:
        raise DataError(f"{path.name!r} is empty (0 bytes): nothing to read")
    for mark, encoding in _BOMS:
        if head.startswith(mark):
            return encoding
    if b"\x00" in head:
        raise DataError(f"{path.name!r} contains NUL bytes: it is not a text table (a binary file, or UTF-16 "
                        "text without a byte-order mark); save it as UTF-8 CSV")
    return "utf-8-sig"


def _not_utf8(path: Path, encoding: str) -> DataError:
    """Where a file stops being valid text: byte, line and column, with what to do."""
    todo = ("save the file as UTF-8, or read it with pandas.read_csv(path, encoding='latin-1') (or the encoding "
            "it was written in) and pass the DataFrame")
    if encoding.startswith("utf-8"):
        with path.open("rb") as fh:
            for number, raw in enumerate(fh, start=1):  # a newline byte is never inside a UTF-8 sequence
                try:
                    raw.decode(encoding if number == 1 else "utf-8")
                except UnicodeDecodeError as exc:
                    bad = raw[exc.start]
                    return DataError(f"{path.name!r} is not UTF-8 text: byte 0x{bad:02x} on line {number}, "
                                     f"column {exc.start + 1} cannot be read; {todo}")
    return DataError(f"{path.name!r} is not valid {encoding} text; {todo}")


def _has_text(path: Path, encoding: str) -> bool:
    """Whether the file holds anything but white space (read up to the first visible character)."""
    try:
        with path.open("r", encoding=encoding, errors="replace") as fh:
            while chunk := fh.read(1 << 16):
                if chunk.strip():
                    return True
    except OSError:
        return True  # let the reader report it
    return False


def _read_delimited(path: Path, sep: str | None, text_columns: tuple[str, ...]) -> pd.DataFrame:
    """Read a delimited text table, with a specific message for each way a text file can be unusable."""
    encoding = _encoding(path)
    engine = "python" if sep is None else "c"
    # index_col=False: a row with more fields than the header is an error, never silently turned into an index.
    options: dict[str, Any] = {"sep": sep, "engine": engine, "encoding": encoding, "index_col": False}
    if not _has_text(path, encoding):
        raise DataError(f"{path.name!r} has no header row (the file holds only blank lines)")
    try:
        header = pd.read_csv(path, nrows=1, header=None, dtype=str, keep_default_na=False, **options)
    except pd.errors.EmptyDataError:
        raise DataError(f"{path.name!r} has no header row (the file holds only blank lines)") from None
    except UnicodeDecodeError:
        raise _not_utf8(path, encoding) from None
    except (pd.errors.ParserError, csv.Error) as exc:
        raise DataError(f"could not read {path.name!r} as a delimited text table (comma, semicolon or tab "
                        f"separated, with a header row): {_first_line(exc)}") from None
    names = [str(v).strip() for v in header.iloc[0].tolist()] if len(header) else []
    if not any(names):
        raise DataError(f"{path.name!r} has no header row (the first line is blank)")
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise ColumnError(f"{path.name!r} has repeated column names {repeated}; rename them so each is unique")
    wanted = [c for c in text_columns if c in names]
    try:
        return pd.read_csv(path, dtype={c: str for c in wanted}, **options)
    except UnicodeDecodeError:
        raise _not_utf8(path, encoding) from None
    except (pd.errors.ParserError, csv.Error) as exc:
        raise DataError(f"could not read {path.name!r} as a delimited text table: {_first_line(exc)}") from None
