"""Chart builders, checked through ``chart.to_dict()``: the data drawn equals the results' values."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.outliers_influence import OLSInfluence

import explorer as ex
from explorer import charts

DEMO = __import__("pathlib").Path(__file__).resolve().parents[1] / "data" / "coating_thickness.csv"
HANDBOOK_7433 = {"1": [6.9, 5.4, 5.8, 4.6, 4.0], "2": [8.3, 6.8, 7.8, 9.2, 6.5], "3": [8.0, 10.5, 8.1, 6.9, 9.3]}


def _handbook() -> pd.DataFrame:
    return pd.DataFrame({"level": [g for g, v in HANDBOOK_7433.items() for _ in v],
                         "y": [x for v in HANDBOOK_7433.values() for x in v],
                         "operator": ["ann", "bo", "cy", "di", "ed"] * 3})


def _layers(spec: dict) -> list[dict]:
    out = []
    for key in ("layer", "vconcat", "hconcat"):
        for sub in spec.get(key, []):
            out.extend(_layers(sub))
    if "mark" in spec:
        out.append(spec)
    return out


def _values(spec: dict, layer: dict) -> list[dict]:
    data = layer.get("data") or spec.get("data") or {}
    if "values" in data:
        return data["values"]
    return spec["datasets"][data["name"]]


def _point_layer(spec: dict) -> dict:
    return next(la for la in _layers(spec) if la["mark"]["type"] == "point")


def test_observations_chart_draws_every_row_with_state_and_pick():
    study = ex.Study(_handbook(), "y", "level")
    study.drop([2], reason="test")
    spec = charts.observations_chart(study).to_dict()
    pts = _point_layer(spec)
    (param,) = spec.get("params") or pts["params"]
    assert param["name"] == "pick" and param["select"]["type"] == "point" and param["select"]["fields"] == ["row"]
    rows = _values(spec, pts)
    assert len(rows) == 15
    assert {r["row"]: r["state"] for r in rows}["2"] == "left out"
    assert sum(r["state"] == "left out" for r in rows) == 1
    # hover: row id, current level and every column of the table
    titles = [t.get("title") for t in pts["encoding"]["tooltip"]]
    assert titles[0] == "row id" and {"level", "y", "operator"} <= set(titles)
    assert pts["encoding"]["description"]["field"] == "aria"


def test_observations_chart_means_are_the_level_table():
    """The mean layer draws ``results.levels`` (itself checked against NIST e-Handbook 7.4.3.3 in test_oneway)."""
    study = ex.Study(_handbook(), "y", "level")
    spec = charts.observations_chart(study).to_dict()
    tick = next(la for la in _layers(spec) if la["mark"]["type"] == "tick")
    means = [r["mean"] for r in _values(spec, tick)]
    np.testing.assert_allclose(means, [5.34, 7.72, 8.56], atol=5e-3)


def test_large_data_draws_a_stated_sample_with_every_left_out_row():
    rng = np.random.default_rng(3)
    n = 1200
    df = pd.DataFrame({"g": np.repeat(list("abcd"), n // 4), "y": rng.normal(size=n)})
    study = ex.Study(df, "y", "g")
    study.drop([5, 600, 1100], reason="test")
    chart = charts.observations_chart(study, max_points=300)
    spec = chart.to_dict()
    rows = _values(spec, _point_layer(spec))
    assert len(rows) == 300
    assert {"5", "600", "1100"} <= {r["row"] for r in rows if r["state"] == "left out"}
    assert any("Drawing 300 of 1,200 rows" in s for s in spec["title"]["subtitle"])
    assert study.results.n_used == n - 3  # the statistics use every row


def test_residual_chart_values_are_the_fit():
    study = ex.Study(_handbook(), "y", "level")
    spec = charts.residuals_fitted_chart(study.results).to_dict()
    rows = _values(spec, _point_layer(spec))
    np.testing.assert_allclose([r["residual"] for r in rows], study.results.fit.residuals)
    np.testing.assert_allclose(sorted({round(r["fitted"], 6) for r in rows}), [5.34, 7.72, 8.56], atol=5e-3)


def test_normal_probability_chart_matches_scipy_probplot():
    """Reference: scipy.stats.probplot (Filliben plotting positions) on the same residuals."""
    study = ex.Study(_handbook(), "y", "level")
    spec = charts.normal_probability_chart(study.results).to_dict()
    rows = _values(spec, _point_layer(spec))
    (osm, osr), _ = stats.probplot(study.results.fit.residuals, dist="norm")
    np.testing.assert_allclose([r["quantile"] for r in rows], osm)
    np.testing.assert_allclose([r["residual"] for r in rows], osr)


def test_cooks_distance_matches_statsmodels():
    """Reference: statsmodels OLSInfluence(ols('y ~ C(level)')).cooks_distance on NIST e-Handbook 7.4.3.3 data."""
    df = _handbook()
    df.loc[3, "y"] = 1.5  # one influential reading
    study = ex.Study(df, "y", "level")
    d = charts.influence_of(study.results).cooks_distance
    ref = OLSInfluence(ols("y ~ C(level)", data=df).fit()).cooks_distance[0]
    np.testing.assert_allclose(d, ref.to_numpy(), rtol=1e-10)
    spec = charts.cooks_distance_chart(study.results).to_dict()
    drawn = {r["row"]: r["distance"] for r in _values(spec, _point_layer(spec))}
    assert drawn["3"] == pytest.approx(float(ref.iloc[3]))


def _text_rows(spec: dict) -> list[str]:
    (text,) = [la for la in _layers(spec) if la["mark"]["type"] == "text"]
    return [r["row"] for r in _values(spec, text)]


def test_cooks_distance_names_the_rows_past_the_4_over_n_line():
    """Reference: statsmodels OLSInfluence(ols('y ~ C(level)')).cooks_distance; the rows named are those
    above 4/n (the cut-off the chart states), on NIST e-Handbook 7.4.3.3 data with two planted readings."""
    df = _handbook()
    df.loc[3, "y"], df.loc[11, "y"] = 1.5, 12.9
    ref = OLSInfluence(ols("y ~ C(level)", data=df).fit()).cooks_distance[0].to_numpy()
    expected = sorted(str(i) for i in np.flatnonzero(ref > 4 / len(df)))
    assert expected  # the planted readings are past the line
    spec = charts.cooks_distance_chart(ex.Study(df, "y", "level").results).to_dict()
    assert sorted(_text_rows(spec)) == expected
    assert any(f"Labelled: the {len(expected)} row(s) past the 4/n line" in s for s in spec["title"]["subtitle"])


def test_labels_are_capped_to_the_rows_furthest_past_the_line():
    frame = pd.DataFrame({"row": [f"r{i}" for i in range(30)], "order": range(30), "d": np.arange(30.0)})
    text, named = charts.style.id_labels(frame, frame["d"] > 2, frame["d"], "order", "d", what="the line", limit=5)
    assert sorted(text.data["row"]) == ["r25", "r26", "r27", "r28", "r29"]
    assert named == "Labelled: the 5 rows furthest past the line (of 27)."
    none, said = charts.style.id_labels(frame, frame["d"] > 99, frame["d"], "order", "d", what="the line")
    assert none is None and said == "No row is past the line."


def test_cooks_distance_undefined_for_a_level_of_one():
    df = pd.DataFrame({"g": ["a", "a", "a", "b", "b", "c"], "y": [1.0, 2.0, 3.5, 4.0, 5.5, 9.0]})
    results = ex.Study(df, "y", "g").results
    d = charts.influence_of(results).cooks_distance
    assert np.isnan(d[-1]) and np.isfinite(d[:-1]).all()
    spec = charts.cooks_distance_chart(results).to_dict()
    assert [r["distance"] for r in _values(spec, _point_layer(spec))][-1] is None
    assert any("leverage 1" in s for s in spec["title"]["subtitle"])


def test_partition_chart_shows_baseline_and_current():
    study = ex.Study(_handbook(), "y", "level")
    study.drop([14], reason="test")
    spec = charts.partition_chart(study.baseline, study.results).to_dict()
    (bars,) = _layers(spec)
    rows = _values(spec, bars)
    by = {(r["view"], r["source"]): r for r in rows}
    assert by[(charts.BASELINE_LABEL, "level")]["sum_sq"] == pytest.approx(27.897, abs=5e-4)  # e-Handbook 7.4.3.3
    assert by[(charts.CURRENT_LABEL, "level")]["F"] == pytest.approx(study.results.statistic())
    assert by[(charts.BASELINE_LABEL, "residual")]["F"] is None


def test_history_chart_has_one_point_per_step():
    steps = [charts.HistoryStep(step=i, action=a, pvalue=p, r_squared=0.5, edits_in_effect=i)
             for i, (a, p) in enumerate([("unedited data", 0.01), ("leave out row 3", 0.2), ("undo", 0.01)])]
    spec = charts.history_chart(steps, 0.05).to_dict()
    line = next(la for la in _layers(spec) if la["mark"]["type"] == "line" and la["encoding"]["y"]["field"] == "p")
    assert [r["p"] for r in _values(spec, line)] == [0.01, 0.2, 0.01]


def test_thin_keeps_everything_under_the_limit():
    t = charts.thin(10, 20)
    assert t.note == "" and list(t.positions) == list(range(10))


def test_case_deletion_chart_marks_the_rows_that_flip():
    """Values are the core's case-deletion scan (checked against refits in test_case_deletion)."""
    from explorer.sensitivity.case_deletion import case_deletion_scan

    study = ex.Study(str(DEMO), "thickness_um", "nozzle")
    scan = case_deletion_scan(study, record=False)
    spec = charts.case_deletion_chart(scan).to_dict()
    rows = _values(spec, _point_layer(spec))
    flips = {r["row"] for r in rows if r["effect"] == "flips the decision"}
    assert flips == {str(r) for r in scan.flip_rows} and len(rows) == study.results.n_used
    assert spec["params"][0]["name"] == "pick"
    # the flip rows are named on the chart (at most MAX_LABELS of them, the p-values moved most)
    named = set(_text_rows(spec))
    assert named <= flips and len(named) == min(len(flips), charts.style.MAX_LABELS)


def test_specification_curve_has_every_specification_in_rank_order():
    from explorer.sensitivity.sweep import robustness_sweep

    sweep = robustness_sweep(ex.Study(str(DEMO), "thickness_um", "nozzle"), record=False)
    spec = charts.specification_curve_chart(sweep).to_dict()
    rows = _values(spec, _point_layer(spec))
    assert len(rows) == sweep.n_specifications
    by_rank = sorted(rows, key=lambda r: r["rank"])
    assert [r["p"] for r in by_rank] == sorted(r["p"] for r in rows)


def test_row_charts_hover_every_column_when_given_the_table():
    study = ex.Study(_handbook(), "y", "level")
    study.drop([4], reason="test")
    cols = charts.row_columns(study)
    for build in (charts.residuals_fitted_chart, charts.normal_probability_chart, charts.cooks_distance_chart):
        spec = build(study.results, columns=cols).to_dict()
        layer = _point_layer(spec)
        titles = {t.get("title") for t in layer["encoding"]["tooltip"]}
        assert {"level", "y", "operator"} <= titles
        rows = {r["row"]: r for r in _values(spec, layer)}
        assert rows["3"]["c2"] == "di" and rows["3"]["c1"] == 4.6 and "4" not in rows
