"""Cell summaries computed inside DuckDB (in-process), for Parquet or CSV files of any size.

DuckDB streams the files through a grouped aggregation with a small, fixed number of
groups, so memory stays bounded (``memory_limit``) whatever the number of rows. By
default each atom's statistics come from one scan: every thread keeps Welford's running
count, mean and centred sum of squares per atom (DuckDB's ``var_pop`` state) and the
thread-partial states are merged with the pairwise formula of Chan, Golub and LeVeque
(1983); the mean is a compensated (Kahan) sum over the count. ``passes=2`` runs the
corrected two-pass algorithm instead (a second scan joins the rows to the pass-one means
and sums the deviations and their squares). No raw sum of squares is ever formed.

Exact input: a DECIMAL column (or plain decimal text in a CSV file, read as DECIMAL)
has its offset subtracted in decimal arithmetic before the one rounding to float64, as
row studies do with decimal text (:mod:`explorer.engine.decimal_shift`).

References
----------
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
sample variance: analysis and recommendations. The American Statistician 37(3), 242-247.
Welford, B. P. (1962). Note on a method for calculating corrected sums of squares and
products. Technometrics 4(3), 419-420.
Kahan, W. (1965). Further remarks on reducing truncation errors. CACM 8(1), 40.
Raasveldt, M. and Muehleisen, H. (2019). DuckDB: an embeddable analytical database.
SIGMOD '19, 1981-1984.
"""

from __future__ import annotations

import dataclasses
import math
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..engine.errors import ColumnError, DataError, PredicateError, closest_names, preview
from ..engine.response_unit import pow2_factors
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


def duckdb_kind(type_name: str) -> str:
    """The kind of a DuckDB column type for conditions: number, text, date, timestamp, boolean or other."""
    t = type_name.upper()
    if t in _NUMERIC or t.startswith("DECIMAL") or t == "UHUGEINT":
        return "number"
    if t == "VARCHAR" or t.startswith("ENUM"):
        return "text"
    if t == "DATE":
        return "date"
    if t.startswith("TIMESTAMP"):
        return "timestamp"
    if t == "BOOLEAN":
        return "boolean"
    return "other"


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
    passes : 1 (default): one scan; each thread keeps Welford's running count, mean and
        centred SS per atom (DuckDB's ``var_pop``) and the partial states are merged with
        the pairwise formula of Chan et al.; the mean is a compensated sum over the count.
        2: the corrected two-pass algorithm (a second scan for the deviations from the
        pass-one means); about twice the time, the tightest error bound.
    """

    engine = "DuckDB"
    samples_with_atoms = True  # atoms() keeps a pool of hash-sampled rows in its first scan

    def __init__(self, data: str | Path | Sequence[str | Path] | pd.DataFrame, *, memory_limit: str = "1GB",
                 threads: int | None = None, passes: int = 1) -> None:
        if passes not in (1, 2):
            raise DataError(f"passes must be 1 (Welford with pairwise merges) or 2 (corrected two-pass), not {passes!r}")
        self.passes = passes
        duckdb = _import_duckdb()
        self.con = duckdb.connect(":memory:")
        self.con.execute(f"SET memory_limit={_lit(str(memory_limit))}")
        self.con.execute(f"SET threads={int(threads or os.cpu_count() or 1)}")
        self.con.execute("SET preserve_insertion_order=false")
        self._csv_paths: list[str] = []
        self._pool: tuple[int, bool] | None = None  # (seed, pool holds every row) once a sample pool is kept
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

    @property
    def kinds(self) -> dict[str, str]:
        """The kind of each column for type-checking conditions (the response reads as a number once prepared)."""
        kinds = {name: duckdb_kind(t) for name, t in self.types.items()}
        if getattr(self, "_response", None):
            kinds[self._response] = "number"
        return kinds

    def _sql(self, p: Predicate) -> str:
        """A condition as DuckDB text; the response is read as the number the analysis uses."""
        return p.render("duckdb", {self._response: self._yv} if getattr(self, "_response", None) else None)

    def describe(self) -> str:
        return f"DuckDB over {self.label}"

    # ------------------------------------------------------------------ prepare
    def _check_columns(self, response: str, factors: Sequence[str]) -> None:
        for role, name in [("response", response)] + [("factor", f) for f in factors]:
            if name not in self.types:
                near = closest_names(name, self.columns)
                hint = f" Did you mean {', '.join(repr(n) for n in near)}?" if near else ""
                raise ColumnError(
                    f"{role} column {name!r} is not in {self.label}.{hint} Columns: {preview(list(self.columns), 12)}"
                )
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
        infinite = "false"
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
            infinite = f"isinf({self._yv})"
        else:
            raise DataError(f"response column {response!r} has type {rtype}; the analysis of variance needs a numeric response")
        self._usable = f"NOT ({missing})"
        self._infinite = infinite
        self._response = response
        # The count of rows comes from the file metadata for Parquet; rows set aside for
        # missing values and infinite responses are found in the first summary scan.
        total = self.con.execute(f"SELECT count(*) FROM {self._relation}").fetchone()[0]
        mid = self.con.execute(
            f"SELECT quantile_disc(v, 0.5) FROM (SELECT {self._yv} AS v FROM {self._relation} "
            f"WHERE {self._usable} LIMIT {_OFFSET_ROWS})"
        ).fetchone()[0]
        if mid is None:
            raise DataError(f"every row of {self.label} has a missing {response!r} or factor value; nothing to analyse")
        offset, offset_text, exact = choose_offset(mid)
        if scale is not None:
            self._shifted = f"CAST({self._yv} - CAST({_lit(offset_text)} AS DECIMAL(38, {scale})) AS DOUBLE)"
        else:
            self._shifted = f"({self._yv} - CAST({_lit(repr(float(exact)))} AS DOUBLE))"
        self._shifted_own = self._shifted  # in the response's own unit (see with_unit)
        numeric = tuple(f for f in factors if self.types[f] in _NUMERIC or self.types[f].startswith("DECIMAL"))
        for f in numeric:
            notes.append(f"Factor {f!r} is numeric; each distinct value is treated as a level, not as a quantity.")
        return Prepared(response=response, factors=factors, offset=offset, offset_text=offset_text,
                        decimal_scale=scale, numeric_factors=numeric, rows_total=int(total),
                        rows_set_aside=None, notes=tuple(notes))

    # ------------------------------------------------------------------ queries
    def _where(self, filters: Sequence[Predicate], only: Predicate | None = None) -> str:
        parts = [self._usable] + [f"NOT coalesce(({self._sql(p)}), false)" for p in filters]
        if only is not None:  # first, so that the scan can skip rows on it
            parts.insert(0, f"coalesce(({self._sql(only)}), false)")
        return " AND ".join(parts)

    def _move_columns(self, prep: Prepared, moves: Sequence[tuple[Predicate, str]]) -> list[str]:
        cols = []
        for j, f in enumerate(prep.factors):
            whens = [f"WHEN coalesce(({self._sql(p)}), false) THEN {k + 1}"
                     for k, (p, fac) in reversed(list(enumerate(moves))) if fac == f]
            cols.append(f"CASE {' '.join(whens)} ELSE 0 END AS vx_m{j}" if whens else f"0 AS vx_m{j}")
        return cols

    def _kept_rows(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]],
                   seed: int | None = None, relation: str | None = None, only: Predicate | None = None) -> str:
        """The kept rows with the shifted response, factor keys, move indices (and the sample hash)."""
        fcols = [f"{_q(f)} AS vx_f{j}" for j, f in enumerate(prep.factors)]
        extra = ""
        if seed is not None:
            cols = ", ".join(_q(c) for c in self.columns)
            extra = f", {cols}, " + ("vx_h" if relation else f"hash({cols}, {int(seed)}) AS vx_h")
        return (f"SELECT {self._shifted} AS vx_y, {', '.join(fcols + self._move_columns(prep, moves))}{extra} "
                f"FROM {relation or self._relation} WHERE {self._where(filters, only)}")

    def _execute(self, sql: str, conditions: Sequence[Predicate] = ()) -> Any:
        """Run a summary query; an engine error becomes the kit's own error, naming the conditions in effect."""
        duckdb = _import_duckdb()
        try:
            return self.con.execute(sql)
        except duckdb.Error as exc:
            texts = [p.text for p in conditions]
            first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            if texts:
                raise PredicateError(f"DuckDB could not evaluate the conditions {preview(texts, 4)}: {first}") from None
            raise DataError(f"DuckDB could not summarise {self.label}: {first}") from None

    def atoms(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]], *,
              sample_size: int = 0, seed: int = 0, only: Predicate | None = None) -> AtomTable:
        """Per-atom n, mean and centred SS of the rows that pass ``filters`` (one scan, or two with ``passes=2``).

        With ``sample_size`` on the unedited rows, the same scan keeps a pool of the rows
        whose seeded hash falls below a threshold (about three times the sample size);
        later samples of edited views are taken from that pool without another scan.
        ``only`` restricts the summary to the kept rows where that predicate holds (the rows
        a new condition would leave out, or an old one bring back).
        """
        conds = [*filters, *(p for p, _ in moves), *([only] if only is not None else [])]
        k = len(prep.factors)
        moved = {f for _, f in moves}
        # Factors without row moves group by their value alone (a constant move index costs a grouping column).
        keys = [f"vx_f{j}" for j in range(k)] + [f"vx_m{j}" for j, f in enumerate(prep.factors) if f in moved]
        out_keys = [f"vx_f{j}" for j in range(k)] + [
            f"vx_m{j}" if f in moved else f"0 AS vx_m{j}" for j, f in enumerate(prep.factors)]
        smp = ""
        pooling = bool(sample_size) and not filters and not moves and only is None and self._pool is None
        if pooling:
            frac = min(1.0, 3.0 * sample_size / max(prep.rows_total - (prep.rows_set_aside or 0), 1))
            limit = min(int(frac * 2.0**64), 2**64 - 1)
            fields = ", ".join([f"{_q(c)} := {_q(c)}" for c in self.columns] + ["vx_h := vx_h"])
            smp = f", list(struct_pack({fields})) FILTER (WHERE vx_h <= CAST('{limit}' AS UBIGINT)) AS vx_sample"
        welford = ", var_pop(vx_y) * count(*) AS vx_m2" if self.passes == 1 else ""
        self._execute(
            f"CREATE OR REPLACE TEMP TABLE vx_pass1 AS SELECT {', '.join(keys)}, count(*) AS vx_n, "
            f"fsum(vx_y) / count(*) AS vx_mean{welford}{smp} "
            f"FROM ({self._kept_rows(prep, filters, moves, seed if pooling else None, only=only)}) GROUP BY ALL",
            conds,
        )
        if pooling:
            self._execute("CREATE OR REPLACE TEMP TABLE vx_pool AS "
                          "SELECT unnest(vx_sample, recursive := true) FROM vx_pass1", conds)
            self._pool = (int(seed), frac >= 1.0)
        if self.passes == 1:
            rows = self._execute(
                f"SELECT {', '.join(out_keys)}, vx_n, vx_mean, 0.0, vx_m2 FROM vx_pass1 ORDER BY ALL", conds
            ).fetchall()
        else:
            on = " AND ".join(f"s.{c} = p.{c}" for c in keys)
            rows = self._execute(
                f"SELECT {', '.join(c if ' AS ' in c else 'p.' + c for c in out_keys)}, p.vx_n, p.vx_mean, "
                f"fsum(s.vx_y - p.vx_mean), "
                f"fsum((s.vx_y - p.vx_mean) * (s.vx_y - p.vx_mean)) "
                f"FROM ({self._kept_rows(prep, filters, moves, only=only)}) s JOIN vx_pass1 p ON {on} "
                f"GROUP BY ALL ORDER BY ALL",
                conds,
            ).fetchall()
        table = _atom_table(prep, rows)
        if not (np.all(np.isfinite(table.mean)) and np.all(np.isfinite(table.m2))):
            inf = self._execute(f"SELECT count(*) FROM {self._relation} WHERE {self._infinite}", conds).fetchone()[0]
            if inf:
                raise DataError(f"response column {prep.response!r} has {inf} infinite values; replace them with real "
                                "measurements or leave those rows out of the files")
        return table  # finite values whose squares overflowed: the study chooses a unit (with_unit) and asks again

    def largest_shifted(self, prep: Prepared) -> float:
        """The largest |response - offset| over the usable rows, in the current unit (one scan)."""
        row = self._execute(f"SELECT max(abs(vx_y)) FROM ({self._kept_rows(prep, (), ())})").fetchone()
        return float(row[0]) if row and row[0] is not None else 0.0

    def with_unit(self, prep: Prepared, e: int) -> Prepared:
        """Summarise the shifted response in units of 2**e from now on (exact; see engine.response_unit)."""
        scale = " * ".join(repr(f) for f in pow2_factors(e))
        self._shifted = f"(({self._shifted_own}) * {scale})"
        return dataclasses.replace(prep, offset=math.ldexp(prep.offset, -e), unit_exponent=e)

    def sample(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]],
               size: int, seed: int) -> pd.DataFrame:
        """A seeded sample of ``size`` rows that pass ``filters``: the rows with the smallest hash of
        their values and the seed (the same rows on every run and thread count).

        Taken from the pool kept by :meth:`atoms` when that holds enough rows, else by a scan.
        """
        conds = [*filters, *(p for p, _ in moves)]
        frame = None
        if self._pool is not None and self._pool[0] == int(seed):
            sql = (f"SELECT * EXCLUDE (vx_h) FROM ({self._kept_rows(prep, filters, moves, seed, 'vx_pool')}) "
                   f"ORDER BY vx_h LIMIT {int(size)}")
            frame = self._execute(sql, conds).fetchdf()
            if len(frame) < size and not self._pool[1]:
                frame = None
        if frame is None:
            sql = (f"SELECT * EXCLUDE (vx_h) FROM ({self._kept_rows(prep, filters, moves, seed)}) "
                   f"ORDER BY vx_h LIMIT {int(size)}")
            frame = self._execute(sql, conds).fetchdf()
        return frame.drop(columns=[c for c in frame.columns if c.startswith("vx_f")])


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
