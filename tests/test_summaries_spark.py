"""Summary-backed studies through Apache Spark in local mode (local[2]).

References: the row-backed study of the same data (checked against NIST StRD and
statsmodels elsewhere); the NIST StRD certified values (SmLs09, read from the installed
scipy wheel) for a DECIMAL column summarised by Spark.
"""

from __future__ import annotations

import os
import shutil
import sys
from decimal import Decimal

import pandas as pd
import pytest
from nist_strd import available, lre, read_set
from summaries_support import assert_same_results, close, unbalanced_frame

import explorer as ex
from explorer.engine.errors import EditError
from explorer.summaries import SummaryStudy

pytest.importorskip("pyspark")
pytestmark = [
    pytest.mark.spark,
    pytest.mark.skipif(shutil.which("java") is None, reason="Spark needs a Java runtime (installed by .ci/run)"),
    pytest.mark.filterwarnings("ignore::FutureWarning"),
    pytest.mark.filterwarnings("ignore::DeprecationWarning"),
]


@pytest.fixture(scope="module")
def spark():
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    from pyspark.sql import SparkSession

    session = (
        SparkSession.builder.master("local[2]").appName("variance-explorer-tests")
        .config("spark.ui.enabled", "false").config("spark.ui.showConsoleProgress", "false")
        .config("spark.sql.shuffle.partitions", "2").config("spark.default.parallelism", "2")
        .config("spark.sql.execution.arrow.pyspark.enabled", "true")
        .config("spark.driver.memory", "1g").getOrCreate()
    )
    session.sparkContext.setLogLevel("ERROR")
    yield session
    session.stop()


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    return unbalanced_frame()


@pytest.fixture(scope="module")
def sdf(spark, frame):
    return spark.createDataFrame(frame).repartition(3).cache()  # three partitions: partial summaries are merged


def test_oneway_and_twoway_agree_with_row_study(sdf, frame):
    """Partitions (types I-III), levels and marginal means from Spark summaries equal the row study's (1e-10)."""
    one = SummaryStudy(sdf, "thickness", "line", sample_size=0)
    assert_same_results(one.results, ex.Study(frame, "thickness", "line").results)
    two = SummaryStudy(sdf, "thickness", ["line", "shift"], ss_type="III", sample_size=40, seed=2)
    assert_same_results(two.results, ex.Study(frame, "thickness", ["line", "shift"], ss_type="III").results)
    assert len(two.results.fit.y) == 40 and any("drawn by Spark" in n for n in two.results.notes)


def test_edits_through_spark(sdf, frame):
    """drop_where and move_where pushed down to Spark equal the same edits row by row; row-id drops are refused."""
    s = SummaryStudy(sdf, "thickness", ["line", "shift"], sample_size=0)
    r = ex.Study(frame, "thickness", ["line", "shift"])
    s.drop_where("temperature > 80 OR lot IN (3)", reason="oven range; lot 3 recall")
    r.drop(list(frame.index[(frame.temperature > 80) | (frame.lot == 3)]))
    s.move_where("lot = 2 AND line = 'L1'", "line", "L2", reason="lot 2 ran on the L2 rig")
    for row in frame.index[(frame.lot == 2) & (frame.line == "L1") & (frame.temperature <= 80)]:
        r.reassign(int(row), "line", "L2")
    assert_same_results(s.results, r.results)
    with pytest.raises(EditError, match="drop_where"):
        s.drop([1], reason="x")


def test_replay_across_engines(sdf, frame, tmp_path):
    """A study saved on DuckDB summaries replays on the Spark DataFrame of the same rows (same fingerprint)."""
    pytest.importorskip("duckdb")
    d = SummaryStudy(frame, "thickness", ["line", "shift"], sample_size=0)
    d.drop_where("temperature < 60", reason="cold start")
    d.merge_levels("line", ["L2", "L3"], into="L23", reason="same supplier")
    path = d.save(tmp_path / "study.json")
    back = SummaryStudy.load(path, sdf)
    assert back.fingerprint == d.fingerprint
    assert_same_results(back.results, d.results)


@pytest.mark.skipif(not available(), reason="NIST StRD files not found in the installed scipy")
def test_nist_decimal_column_through_spark(spark):
    """SmLs09 (13 constant leading digits) as a DECIMAL column: LRE >= 13 against the NIST certified values."""
    from pyspark.sql import types as T

    s = read_set("SmLs09")
    schema = T.StructType([T.StructField("level", T.StringType()), T.StructField("y", T.DecimalType(20, 1))])
    sdf = spark.createDataFrame([(g, Decimal(t)) for g, t in zip(s.levels, s.texts)], schema).repartition(2)
    r = SummaryStudy(sdf, "y", "level", sample_size=0).results
    b, w = r.partition.rows[0], r.partition.rows[1]
    ours = {"ss_between": b.sum_sq, "ss_within": w.sum_sq, "f": b.statistic, "r_squared": r.r_squared,
            "resid_sd": r.residual_sd}
    scores = {q: lre(v, getattr(s, q)) for q, v in ours.items()}
    assert min(scores.values()) >= 13, scores
    assert close(r.ms_resid, s.ms_within, 1e-12)


def test_conditions_are_type_checked_and_literals_kept_through_spark(spark, frame):
    """Spark gets the same checks as DuckDB: an ill-typed condition is a PredicateError before Spark sees it,
    and a literal with spaced brackets reaches Spark byte for byte (reference: a pandas mask)."""
    from explorer.engine.errors import PredicateError

    data = frame.assign(note=["rework ( line 2 )" if i % 7 == 0 else "ok" for i in range(len(frame))])
    s = SummaryStudy(spark.createDataFrame(data), "thickness", "line", sample_size=0)
    with pytest.raises(PredicateError, match="'line'.*text.*number"):
        s.drop_where("line > 5", reason="hostile")
    assert s.edits == ()
    r = s.drop_where("note = 'rework ( line 2 )'", reason="rework")
    assert r.n_used == len(data) - int((data.note == "rework ( line 2 )").sum())


def test_huge_values_through_spark_match_the_rescaled_data(spark, frame):
    """|y| near 1e300: Spark summaries in units of 2**e give the F and p of the data (reference: scipy
    f_oneway on the unscaled readings; the scaling by 2**997 is exact)."""
    import numpy as np
    from scipy import stats

    data = frame.assign(thickness=np.ldexp(frame.thickness.to_numpy(), 997))
    s = SummaryStudy(spark.createDataFrame(data), "thickness", "line", sample_size=0)
    ref = stats.f_oneway(*[frame.thickness[frame.line == lv] for lv in ("L1", "L2", "L3")])
    assert close(s.results.statistic(), ref.statistic, 1e-9) and close(s.results.pvalue(), ref.pvalue, 1e-7)
    assert s.prepared.unit_exponent != 0
