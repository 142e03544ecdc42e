"""One formatter for every surface: the same value shows the same digits in the explorer, the HTML
report, the command line, ``print(results)`` and a displayed ``to_frame()``; p-values below the
floor read "< 1e-10", never "0"; units head the measure and sum-of-squares columns.

The values themselves are the kit's (checked against outside references in test_oneway and
test_nist_strd); here only their display is compared, surface against surface.
"""

from __future__ import annotations

import html
import re

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.formatting import show_measure, show_p, show_share, show_ss, show_stat
from explorer.report import summary_text
from explorer.report.html_report import report_html

DEMO = __import__("pathlib").Path(__file__).resolve().parents[1] / "data" / "coating_thickness.csv"


@pytest.fixture(scope="module")
def study() -> ex.Study:
    s = ex.Study(str(DEMO), "thickness_um", "nozzle", id_column="panel", units="µm")
    s.drop(["P1007"], reason="gauge slip")
    return s


@pytest.fixture(scope="module")
def surfaces(study) -> dict[str, str]:
    widget = ex.Explorer(study)
    widget.tabs.selected_index = widget._tab_groups.index("Levels and edits")
    widget_html = " ".join(c.html.value for c in widget.cards.values()) + widget.header.value
    return {
        "widget": html.unescape(widget_html),
        "report": html.unescape(report_html(study, charts=False)),
        "command line": summary_text(study, cautions=False),
        "print(results)": str(study.results),
        "to_frame": repr(study.results.to_frame()) + repr(study.results.levels["nozzle"].to_frame()),
    }


def test_the_same_value_shows_the_same_digits_everywhere(study, surfaces):
    res = study.results
    row = res.partition.row("nozzle")
    n1 = list(res.levels["nozzle"].labels).index("N1")
    with ex.formatting.scale(of=study.display_scale()):
        shown = {
            "F": show_stat(row.statistic), "p": show_p(row.pvalue), "SS": show_ss(row.sum_sq),
            "residual SS": show_ss(res.partition.row("residual").sum_sq),
        }
        mean_n1 = show_measure(res.levels["nozzle"].mean[n1])
    assert shown["F"] == "2.336" and shown["p"] == "0.0778" and mean_n1 == "62.45"  # data read to 0.1 µm
    for where, text in surfaces.items():
        for what, value in shown.items():
            assert re.search(rf"(?<![\d.]){re.escape(value)}(?![\d])", text), f"{what} {value} not shown in {where}"
        for raw in (f"{row.statistic:.6g}", f"{row.pvalue:.6g}", f"{row.sum_sq:.6g}"):
            assert raw not in text, f"{where} shows {raw}, more digits than the formatter's"
    for where in ("widget", "report", "print(results)", "to_frame"):
        assert re.search(rf"N1\D+\d+\D+{re.escape(mean_n1)}\b", surfaces[where]), f"mean of N1 in {where}"
    assert "62.5133" not in " ".join(surfaces.values())


def test_units_head_the_measure_and_sum_of_squares_columns(surfaces):
    for where in ("widget", "report", "command line", "print(results)", "to_frame"):
        assert "sum of squares (µm²)" in surfaces[where], where
    for where in ("widget", "report", "print(results)", "to_frame"):
        assert "mean (µm)" in surfaces[where], where


def test_tiny_p_values_read_below_the_floor_never_zero():
    rng = np.random.default_rng(3)
    df = pd.DataFrame({"g": np.repeat(["a", "b", "c"], 40),
                       "y": np.round(np.concatenate([rng.normal(m, 1, 40) for m in (0, 5, 10)]), 1)})
    s = ex.Study(df, "y", "g")
    assert s.results.pvalue() < 1e-10
    for text in (str(s.results), summary_text(s, cautions=False), html.unescape(s.results._repr_html_()),
                 repr(s.results.to_frame())):
        assert "< 1e-10" in text
        assert not re.search(r"p-value\s.*\b0\.0\b|p = 0(\.0+)?\b(?![.\d])", text)


def test_print_gives_short_readable_text(study):
    text = str(study)
    assert len(text.splitlines()) < 15 and "leave out row(s) 'P1007': gauge slip" in text
    assert "Unedited data:" in text and "Current view:" in text and "(µm)" in text
    results = str(study.results)
    assert len(results.splitlines()) < 25 and "Levels of nozzle:" in results
    battery = str(study.battery())
    assert len(battery.splitlines()) < 45 and "Suggested test:" in battery and "Tukey" in battery
    assert "dataclass" not in repr(study.results) and len(repr(study.results)) < 200
    assert show_share(study.results.r_squared) in results


def test_units_are_saved_with_the_study_and_checked(tmp_path):
    s = ex.Study(str(DEMO), "thickness_um", "nozzle", id_column="panel", units="µm")
    path = s.save(tmp_path / "u.study.json")
    again = ex.Study.load(path, data=str(DEMO))
    assert again.spec.units == "µm" and "sum of squares (µm²)" in str(again.results)
    for bad in ("<b>µm</b>", "x" * 30, 5):
        with pytest.raises(ex.ExplorerError, match="units"):
            ex.Study(str(DEMO), "thickness_um", "nozzle", units=bad)
