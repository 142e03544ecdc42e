"""Cell summaries computed inside DuckDB (in-process), for Parquet or CSV files of any size.

DuckDB streams the files through a grouped aggregation with a small, fixed number of
groups, so memory stays bounded (``memory_limit``) whatever the number of rows. Each
atom's statistics come from one SQL statement with two scans (corrected two-pass
algorithm of Chan, Golub and LeVeque 1983): pass one gives the count and the
compensated (Kahan) mean of the shifted response, pass two the compensated sums of the
deviations from it and of their squares. No raw sum of squares is ever formed.

Exact input: a DECIMAL column (or plain decimal text in a CSV file, read as DECIMAL)
has its offset subtracted in decimal arithmetic before the one rounding to float64, as
row studies do with decimal text (:mod:`explorer.core.decimal_shift`).

References
----------
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
sample variance: analysis and recommendations. The American Statistician 37(3), 242-247.
Kahan, W. (1965). Further remarks on reducing truncation errors. CACM 8(1), 40.
Raasveldt, M. and Muehleisen, H. (2019). DuckDB: an embeddable analytical database.
SIGMOD '19, 1981-1984.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..core.errors import ColumnError, DataError, closest_names, preview
from .atoms import AtomTable, Prepared, choose_offset, finish_two_pass
from .predicate import Predicate

__all__ = ["DuckDBSource"]

_NUMERIC = ("TINYINT", "SMALLINT", "INTEGER", "BIGINT", "HUGEINT", "UTINYINT", "USMALLINT", "UINTEGER",
            "UBIGINT", "FLOAT", "DOUBLE", "REAL")
_OFFSET_ROWS = 100_000


def _q(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _lit(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


def _import_duckdb() -> Any:
    try:
        import duckdb
    except ImportError:
        raise DataError("summaries through DuckDB need the duckdb package: pip install 'variance-explorer[scale]'") from None
    return duckdb


class DuckDBSource:
    """A table DuckDB reads: Parquet or CSV path(s) (globs allowed), or a pandas DataFrame.

    Parameters
    ----------
    data : path, glob or list of paths (``.parquet``/``.pq``/``.csv``/``.tsv``), or a DataFrame.
    memory_limit : DuckDB's memory cap (it spills to disk beyond it), e.g. ``"1GB"``.
    threads : worker threads (default: the machine's cores).
    """

    engine = "DuckDB"

    def __init__(self, data: str | Path | Sequence[str | Path] | pd.DataFrame, *, memory_limit: str = "1GB",
                 threads: int | None = None) -> None:
        duckdb = _import_duckdb()
        self.con = duckdb.connect(":memory:")
        self.con.execute(f"SET memory_limit={_lit(str(memory_limit))}")
        self.con.execute(f"SET threads={int(threads or os.cpu_count() or 1)}")
        self.con.execute("SET preserve_insertion_order=false")
        self._csv_paths: list[str] = []
        if isinstance(data, pd.DataFrame):
            self.con.register("vx_frame", data.copy(deep=False))
            self._from = "vx_frame"
            self.label = "DataFrame"
        else:
            paths = [str(p) for p in ([data] if isinstance(data, (str, Path)) else list(data))]
            if not paths:
                raise DataError("no files given: pass a Parquet or CSV path, a glob, or a list of them")
            for p in paths:
                if not any(ch in p for ch in "*?[") and not Path(p).exists():
                    raise DataError(f"no file at {p!r}: check the path (relative paths start from {Path.cwd()})")
            suffixes = {Path(p).suffix.lower() for p in paths}
            plist = "[" + ", ".join(_lit(p) for p in paths) + "]"
            if suffixes <= {".parquet", ".pq"}:
                self._from = f"read_parquet({plist})"
            elif suffixes <= {".csv", ".tsv", ".txt"}:
                self._csv_paths = paths
                self._from = f"read_csv({plist}, header=true)"
            else:
                raise DataError(f"unknown file type(s) {sorted(suffixes)}: use Parquet (.parquet) or CSV (.csv) files")
            self.label = ", ".join(Path(p).name for p in paths[:3]) + (" ..." if len(paths) > 3 else "")
        try:
            desc = self.con.execute(f"DESCRIBE SELECT * FROM {self._from}").fetchall()
        except duckdb.Error as exc:
            raise DataError(f"DuckDB could not read {self.label}: {exc}") from None
        self.types = {str(r[0]): str(r[1]).upper() for r in desc}
        self._relation = self._from

    @property
    def columns(self) -> tuple[str, ...]:
        return tuple(self.types)

    def describe(self) -> str:
        return f"DuckDB over {self.label}"

    # ------------------------------------------------------------------ prepare
    def _check_columns(self, response: str, factors: Sequence[str]) -> None:
        for role, name in [("response", response)] + [("factor", f) for f in factors]:
            if name not in self.types:
                near = closest_names(name, self.columns)
                hint = f" Did you mean {', '.join(repr(n) for n in near)}?" if near else ""
                raise ColumnError(f"{role} column {name!r} is not in {self.label}.{hint} Columns: {preview(list(self.columns), 12)}")
        if response in factors:
            raise ColumnError(f"column {response!r} is named as both the response and a factor; pick one role")

    def prepare(self, response: str, factors: Sequence[str]) -> Prepared:
        factors = tuple(factors)
        self._check_columns(response, factors)
        rtype = self.types[response]
        if self._csv_paths and not rtype.startswith("DECIMAL"):
            plist = "[" + ", ".join(_lit(p) for p in self._csv_paths) + "]"
            self._relation = f"read_csv({plist}, header=true, types={{{_lit(response)}: 'VARCHAR'}})"
            rtype = "VARCHAR"
        y = _q(response)
        missing = " OR ".join([f"{y} IS NULL"] + [f"{_q(f)} IS NULL" for f in factors])
        notes: list[str] = []
        scale: int | None = None
        if rtype.startswith("DECIMAL"):
            scale = int(rtype.split(",")[1].rstrip(") "))
            self._yv = y
        elif rtype == "VARCHAR":
            t = f"trim({y})"
            plain = f"regexp_full_match({t}, '[-+]?[0-9]*\\.?[0-9]*')"
            row = self.con.execute(
                f"SELECT count(*) FILTER (WHERE {y} IS NOT NULL AND TRY_CAST({t} AS DOUBLE) IS NULL), "
                f"count(*) FILTER (WHERE {y} IS NOT NULL AND NOT {plain}), "
                f"max(length(split_part({t}, '.', 2))), max(length(regexp_replace(split_part({t}, '.', 1), '[-+]', ''))) "
                f"FROM {self._relation}"
            ).fetchone()
            if row[0]:
                ex = [r[0] for r in self.con.execute(
                    f"SELECT {y} FROM {self._relation} WHERE {y} IS NOT NULL AND TRY_CAST({t} AS DOUBLE) IS NULL LIMIT 3"
                ).fetchall()]
                raise DataError(f"response column {response!r} has {row[0]} non-numeric values (e.g. {preview(ex, 3)}); "
                                "fix or remove them, or pick another response")
            sc, digits = int(row[2] or 0), int(row[3] or 0)
            if row[1] == 0 and sc + digits <= 38:
                scale = sc
                self._yv = f"CAST({t} AS DECIMAL(38, {scale}))"
            else:
                self._yv = f"CAST({t} AS DOUBLE)"
                notes.append(f"Response {response!r} has values in exponent form or with more than 38 digits; "
                             "read as float64 (no exact decimal shift).")
        elif rtype in _NUMERIC:
            self._yv = f"CAST({y} AS DOUBLE)"
            missing += f" OR isnan({self._yv})"
            inf = self.con.execute(f"SELECT count(*) FROM {self._relation} WHERE isinf({self._yv})").fetchone()[0]
            if inf:
                raise DataError(f"response column {response!r} has {inf} infinite values; replace them with real "
                                "measurements or leave those rows out of the files")
        else:
            raise DataError(f"response column {response!r} has type {rtype}; the analysis of variance needs a numeric response")
        self._usable = f"NOT ({missing})"
        total, aside = self.con.execute(
            f"SELECT count(*), count(*) FILTER (WHERE {missing}) FROM {self._relation}"
        ).fetchone()
        if total == aside:
            raise DataError(f"every row of {self.label} has a missing {response!r} or factor value; nothing to analyse")
        mid = self.con.execute(
            f"SELECT quantile_disc(v, 0.5) FROM (SELECT {self._yv} AS v FROM {self._relation} "
            f"WHERE {self._usable} LIMIT {_OFFSET_ROWS})"
        ).fetchone()[0]
        offset, offset_text, exact = choose_offset(mid)
        if scale is not None:
            self._shifted = f"CAST({self._yv} - CAST({_lit(offset_text)} AS DECIMAL(38, {scale})) AS DOUBLE)"
        else:
            self._shifted = f"({self._yv} - CAST({_lit(repr(float(exact)))} AS DOUBLE))"
        numeric = tuple(f for f in factors if self.types[f] in _NUMERIC or self.types[f].startswith("DECIMAL"))
        for f in numeric:
            notes.append(f"Factor {f!r} is numeric; each distinct value is treated as a level, not as a quantity.")
        detail = (f"{aside} row(s) have a missing {response!r} or factor value and are set aside.",) if aside else ()
        return Prepared(response=response, factors=factors, offset=offset, offset_text=offset_text,
                        decimal_scale=scale, numeric_factors=numeric, rows_total=int(total),
                        rows_set_aside=int(aside), set_aside_detail=detail, notes=tuple(notes))

    # ------------------------------------------------------------------ queries
    def _where(self, filters: Sequence[Predicate]) -> str:
        parts = [self._usable] + [f"NOT coalesce(({p.render('duckdb')}), false)" for p in filters]
        return " AND ".join(parts)

    def _move_columns(self, prep: Prepared, moves: Sequence[tuple[Predicate, str]]) -> list[str]:
        cols = []
        for j, f in enumerate(prep.factors):
            whens = [f"WHEN coalesce(({p.render('duckdb')}), false) THEN {k + 1}"
                     for k, (p, fac) in reversed(list(enumerate(moves))) if fac == f]
            cols.append(f"CASE {' '.join(whens)} ELSE 0 END AS m{j}" if whens else f"0 AS m{j}")
        return cols

    def atoms(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]]) -> AtomTable:
        """Per-atom n, mean and centred SS of the rows that pass ``filters`` (one statement, two scans)."""
        k = len(prep.factors)
        keys = [f"f{j}" for j in range(k)] + [f"m{j}" for j in range(k)]
        fcols = [f"{_q(f)} AS f{j}" for j, f in enumerate(prep.factors)]
        src = (f"SELECT {self._shifted} AS y, {', '.join(fcols + self._move_columns(prep, moves))} "
               f"FROM {self._relation} WHERE {self._where(filters)}")
        on = " AND ".join(f"s.{c} = p.{c}" for c in keys)
        sql = (
            f"WITH src AS NOT MATERIALIZED ({src}), "
            f"pass1 AS (SELECT {', '.join(keys)}, count(*) AS n, fsum(y) / count(*) AS mean FROM src GROUP BY ALL) "
            f"SELECT {', '.join('p.' + c for c in keys)}, p.n, p.mean, fsum(s.y - p.mean) AS rs, "
            f"fsum((s.y - p.mean) * (s.y - p.mean)) AS r2 "
            f"FROM src s JOIN pass1 p ON {on} GROUP BY ALL ORDER BY ALL"
        )
        rows = self.con.execute(sql).fetchall()
        return _atom_table(prep, rows)

    def sample(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]],
               size: int, seed: int) -> pd.DataFrame:
        """A seeded sample of ``size`` rows that pass ``filters``: the rows with the smallest hash of
        their values and the seed (the same rows on every run and thread count)."""
        cols = ", ".join(_q(c) for c in self.columns)
        sql = (
            f"SELECT {cols}, {self._shifted} AS vx_y, {', '.join(self._move_columns(prep, moves))}, "
            f"hash({cols}, {int(seed)}) AS vx_h FROM {self._relation} WHERE {self._where(filters)} "
            f"ORDER BY vx_h, {cols} LIMIT {int(size)}"
        )
        frame = self.con.execute(sql).fetchdf()
        return frame.drop(columns=["vx_h"])


def _atom_table(prep: Prepared, rows: list[tuple]) -> AtomTable:
    k = len(prep.factors)
    if not rows:
        raw: tuple[tuple[object, ...], ...] = tuple(() for _ in range(k))
        return AtomTable(factors=prep.factors, raw=raw, move=np.zeros((0, k), dtype=np.int64), n=np.zeros(0, dtype=np.int64),
                         mean=np.zeros(0), m2=np.zeros(0), offset=prep.offset)
    cols = list(zip(*rows))
    n = np.asarray(cols[2 * k], dtype=np.int64)
    mean, m2 = finish_two_pass(n, np.asarray(cols[2 * k + 1], float), np.asarray(cols[2 * k + 2], float),
                               np.asarray(cols[2 * k + 3], float))
    return AtomTable(factors=prep.factors, raw=tuple(tuple(cols[j]) for j in range(k)),
                     move=np.asarray(cols[k:2 * k], dtype=np.int64).T.reshape(-1, k), n=n, mean=mean, m2=m2,
                     offset=prep.offset)
