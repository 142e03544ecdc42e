"""Cell summaries computed by Apache Spark from a (cluster) DataFrame, in one pass.

Each partition reduces its rows to per-atom (n, mean, centred SS): every Arrow batch
with the corrected two-pass algorithm, batches merged with the pairwise formula of
Chan, Golub and LeVeque (1983). The driver collects one small record per partition and
atom and pools them with the k-way form of the same formula
(:func:`explorer.engine.groupstats.pool_groups`). No raw sum of squares is ever formed,
and the rows never leave the executors.

The per-partition function uses only numpy and pandas (the usual requirements of
Spark's pandas functions, with pyarrow); executors do not need this kit installed.

References
----------
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
sample variance: analysis and recommendations. The American Statistician 37(3), 242-247.
Zaharia, M. et al. (2016). Apache Spark: a unified engine for big data processing.
CACM 59(11), 56-65.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterator, Sequence
from decimal import Decimal
from typing import Any

import numpy as np
import pandas as pd

from ..engine.errors import ColumnError, DataError, closest_names, preview
from ..engine.groupstats import pool_groups
from ..engine.response_unit import pow2_factors
from .atoms import AtomTable, Prepared, choose_offset
from .predicate import Predicate

__all__ = ["SparkSource"]

_OFFSET_ROWS = 100_000


def _partition_fn(keys: list[str]) -> Any:
    """The per-partition reducer, built as a closure so that Spark ships it by value (no kit on executors)."""

    def partition_stats(batches: Iterator[pd.DataFrame]) -> Iterator[pd.DataFrame]:
        """Per-atom (n, mean, m2) of one partition: two-pass per batch, batches merged pairwise."""
        acc: dict[tuple, list[float]] = {}
        for pdf in batches:
            if not len(pdf):
                continue
            old_err = np.seterr(over="ignore", invalid="ignore")  # overflowed squares: the driver picks a unit
            codes = pdf.groupby(keys, sort=False, dropna=False).ngroup().to_numpy()
            first = pdf.groupby(keys, sort=False, dropna=False).head(1)[keys].itertuples(index=False, name=None)
            k = int(codes.max()) + 1
            y = pdf["y"].to_numpy(dtype=np.float64)
            n = np.bincount(codes, minlength=k).astype(np.float64)
            mean = np.bincount(codes, weights=y, minlength=k) / n
            r = y - mean[codes]
            rs = np.bincount(codes, weights=r, minlength=k)
            corr = rs / n
            mean = mean + corr
            m2 = np.maximum(np.bincount(codes, weights=r * r, minlength=k) - rs * corr, 0.0)
            for g, key in enumerate(first):
                if key not in acc:
                    acc[key] = [n[g], mean[g], m2[g]]
                    continue
                na, ma, qa = acc[key]
                nb, mb, qb = n[g], mean[g], m2[g]
                tot = na + nb
                d = mb - ma
                acc[key] = [tot, ma + d * nb / tot, qa + qb + d * d * na * nb / tot]
            np.seterr(**old_err)
        if acc:
            out = pd.DataFrame([list(k) + v for k, v in acc.items()], columns=keys + ["n", "mean", "m2"])
            out["n"] = np.rint(out["n"]).astype(np.int64)
            yield out

    return partition_stats


def spark_kind(data_type: Any) -> str:
    """The kind of a Spark SQL type for conditions (by type name, so no Spark import is needed)."""
    name = type(data_type).__name__
    if name in ("ByteType", "ShortType", "IntegerType", "LongType", "FloatType", "DoubleType", "DecimalType"):
        return "number"
    if name in ("StringType", "VarcharType", "CharType"):
        return "text"
    if name == "DateType":
        return "date"
    if name in ("TimestampType", "TimestampNTZType"):
        return "timestamp"
    if name == "BooleanType":
        return "boolean"
    return "other"


class SparkSource:
    """A Spark DataFrame to summarise where it lives.

    Parameters
    ----------
    df : a ``pyspark.sql.DataFrame`` (any source Spark can read: Parquet, tables, JDBC, ...).
    """

    engine = "Spark"

    def __init__(self, df: Any) -> None:
        try:
            from pyspark.sql import functions as F
        except ImportError:
            raise DataError("summaries through Spark need pyspark: pip install 'variance-explorer[spark]'") from None
        self.F = F
        self.df = df
        self.types = {f.name: f.dataType for f in df.schema.fields}

    @property
    def columns(self) -> tuple[str, ...]:
        return tuple(self.types)

    @property
    def kinds(self) -> dict[str, str]:
        """The kind of each column for type-checking conditions: number, text, date, timestamp, boolean or other."""
        return {name: spark_kind(t) for name, t in self.types.items()}

    def describe(self) -> str:
        return f"Spark over a DataFrame of {len(self.types)} columns"

    def _col(self, name: str) -> Any:
        return self.F.col(f"`{name}`")

    def prepare(self, response: str, factors: Sequence[str]) -> Prepared:
        from pyspark.sql import types as T

        F = self.F
        factors = tuple(factors)
        for role, name in [("response", response)] + [("factor", f) for f in factors]:
            if name not in self.types:
                near = closest_names(name, self.columns)
                hint = f" Did you mean {', '.join(repr(n) for n in near)}?" if near else ""
                raise ColumnError(f"{role} column {name!r} is not in the Spark DataFrame.{hint} "
                                  f"Columns: {preview(list(self.columns), 12)}")
        if response in factors:
            raise ColumnError(f"column {response!r} is named as both the response and a factor; pick one role")
        rtype = self.types[response]
        y = self._col(response)
        missing = y.isNull()
        for f in factors:
            missing = missing | self._col(f).isNull()
        scale = None
        infinite = F.lit(False)
        if isinstance(rtype, T.DecimalType):
            scale = int(rtype.scale)
        elif isinstance(rtype, (T.FloatType, T.DoubleType)):
            missing = missing | F.isnan(y)
            infinite = y.isin(float("inf"), float("-inf"))
        elif not isinstance(rtype, T.NumericType):
            raise DataError(f"response column {response!r} has Spark type {rtype.simpleString()}; the analysis of "
                            "variance needs a numeric response (cast it to double or decimal first)")
        self._usable = ~missing
        total, aside, inf = self.df.agg(F.count(F.lit(1)), F.sum(F.when(missing, 1).otherwise(0)),
                                        F.sum(F.when(infinite, 1).otherwise(0))).first()
        if inf:
            raise DataError(f"response column {response!r} has {inf} infinite values; replace them with real "
                            "measurements or filter those rows out of the DataFrame")
        aside = int(aside or 0)
        if total == aside:
            raise DataError(f"every row has a missing {response!r} or factor value; nothing to analyse")
        yv = y if scale is not None else y.cast("double")
        mid = self.df.where(self._usable).select(yv.alias("v")).limit(_OFFSET_ROWS).agg(
            F.percentile_approx("v", 0.5, 100_000)).first()[0]
        offset, offset_text, exact = choose_offset(Decimal(str(mid)) if scale is not None else mid)
        if scale is not None:
            self._shifted = (y - F.lit(Decimal(offset_text)).cast(rtype)).cast("double")
        else:
            self._shifted = yv - F.lit(float(exact))
        self._shifted_own = self._shifted  # in the response's own unit (see with_unit)
        numeric = tuple(f for f in factors if isinstance(self.types[f], T.NumericType))
        notes = tuple(f"Factor {f!r} is numeric; each distinct value is treated as a level, not as a quantity."
                      for f in numeric)
        detail = (f"{aside} row(s) have a missing {response!r} or factor value and are set aside.",) if aside else ()
        return Prepared(response=response, factors=factors, offset=offset, offset_text=offset_text,
                        decimal_scale=scale, numeric_factors=numeric, rows_total=int(total), rows_set_aside=aside,
                        set_aside_detail=detail, notes=notes)

    def _kept(self, filters: Sequence[Predicate], only: Predicate | None = None) -> Any:
        F = self.F
        df = self.df.where(self._usable)
        if only is not None:
            df = df.where(F.coalesce(F.expr(only.render("spark")), F.lit(False)))
        for p in filters:
            df = df.where(~F.coalesce(F.expr(p.render("spark")), F.lit(False)))
        return df

    def _moves(self, prep: Prepared, moves: Sequence[tuple[Predicate, str]]) -> list[Any]:
        F = self.F
        out = []
        for j, f in enumerate(prep.factors):
            expr = F.lit(0).cast("long")
            for k, (p, fac) in enumerate(moves):  # later moves win: applied last
                if fac == f:
                    expr = F.when(F.coalesce(F.expr(p.render("spark")), F.lit(False)), F.lit(k + 1)).otherwise(expr)
            out.append(expr.cast("long").alias(f"vx_m{j}"))
        return out

    def largest_shifted(self, prep: Prepared) -> float:
        """The largest |response - offset| over the usable rows, in the current unit (one pass)."""
        F = self.F
        value = self._kept(()).agg(F.max(F.abs(self._shifted))).first()[0]
        return float(value) if value is not None else 0.0

    def with_unit(self, prep: Prepared, e: int) -> Prepared:
        """Summarise the shifted response in units of 2**e from now on (exact; see engine.response_unit)."""
        F = self.F
        shifted = self._shifted_own
        for factor in pow2_factors(e):
            shifted = shifted * F.lit(factor)
        self._shifted = shifted
        return dataclasses.replace(prep, offset=math.ldexp(prep.offset, -e), unit_exponent=e)

    def atoms(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]], *,
              only: Predicate | None = None) -> AtomTable:
        """Per-atom statistics: one pass over the rows, partials pooled on the driver.

        ``only`` restricts the summary to the kept rows where that predicate holds.
        """
        from pyspark.sql import types as T

        k = len(prep.factors)
        keys = [f"f{j}" for j in range(k)] + [f"m{j}" for j in range(k)]
        sel = self._kept(filters, only).select(
            self._shifted.alias("y"), *[self._col(f).alias(f"f{j}") for j, f in enumerate(prep.factors)],
            *[m.alias(f"m{j}") for j, m in enumerate(self._moves(prep, moves))],
        )
        schema = T.StructType(
            [T.StructField(f"f{j}", self.types[f]) for j, f in enumerate(prep.factors)]
            + [T.StructField(f"m{j}", T.LongType()) for j in range(k)]
            + [T.StructField("n", T.LongType()), T.StructField("mean", T.DoubleType()), T.StructField("m2", T.DoubleType())]
        )
        rows = sel.mapInPandas(_partition_fn(keys), schema=schema).collect()
        index: dict[tuple, int] = {}
        codes = [index.setdefault(tuple(r[:2 * k]), len(index)) for r in rows]
        order = list(index)
        with np.errstate(over="ignore", invalid="ignore"):  # overflowed squares: the study picks a unit and asks again
            pooled = pool_groups(np.asarray([r["n"] for r in rows], dtype=np.int64),
                                 np.asarray([r["mean"] for r in rows]), np.asarray([r["m2"] for r in rows]),
                                 np.asarray(codes, dtype=np.int64), tuple(str(i) for i in range(len(order))),
                                 prep.offset)
        move = np.asarray([key[k:] for key in order], dtype=np.int64).reshape(-1, k)
        return AtomTable(factors=prep.factors, raw=tuple(tuple(key[j] for key in order) for j in range(k)), move=move,
                         n=pooled.n, mean=np.asarray(pooled.mean), m2=np.asarray(pooled.m2), offset=prep.offset)

    def sample(self, prep: Prepared, filters: Sequence[Predicate], moves: Sequence[tuple[Predicate, str]],
               size: int, seed: int) -> pd.DataFrame:
        """A seeded sample: the ``size`` kept rows with the smallest 64-bit hash of their values and the seed."""
        F = self.F
        cols = [self._col(c) for c in self.columns]
        df = self._kept(filters).select(*cols, self._shifted.alias("vx_y"), *self._moves(prep, moves),
                                        F.xxhash64(*cols, F.lit(int(seed))).alias("vx_h"))
        frame = df.orderBy("vx_h").limit(int(size)).toPandas()
        return frame.drop(columns=["vx_h"])
