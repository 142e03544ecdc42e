"""The one number formatter (``explorer.formatting``): each role's rule, the data's resolution,
units in headings, and the frame that computes with every digit but displays the kit's.

The rules are the kit's own conventions (stated in the module docstring); the resolution rule
("one decimal finer than the readings") is the usual reporting practice for means, e.g.
ASTM E29 on retaining one more significant digit in intermediate and averaged values (from
memory). Cross-surface agreement (widget, report, command line, to_frame) is checked in
``test_display_consistency.py``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from explorer import formatting as fm


@pytest.mark.parametrize(("p", "shown"), [
    (0.03114, "0.0311"), (0.0501589, "0.0502"), (0.5, "0.500"), (1.0, "1.00"), (0.00123, "0.00123"),
    (0.000234, "2.34e-04"), (3.1e-7, "3.10e-07"), (1e-10, "1.00e-10"), (9.9e-11, "< 1e-10"), (0.0, "< 1e-10"),
    (None, "—"), (float("nan"), "—"),
])
def test_p_values_have_one_style_and_a_floor_instead_of_zero(p, shown):
    assert fm.p_value(p) == shown
    assert fm.format_value(p, "p") == shown


@pytest.mark.parametrize(("x", "role", "shown"), [
    (609.317, "ss", "609.32"), (24.3361, "ss", "24.336"), (3.95648, "ss", "3.9565"),
    (3.06312, "stat", "3.063"), (3.0631, "stat", "3.063"), (12.168, "stat", "12.17"), (1234.56, "stat", "1235"),
    (9.99996, "stat", "10.00"), (-0.59509, "stat", "-0.5951"), (3.2e-6, "stat", "3.200e-06"),
    (0.0529564, "share", "0.053"), (0.0771, "share", "0.077"),
    (110, "df", "110"), (110.0, "df", "110"), (54.1982, "df", "54.2"),
    (114, "count", "114"), (0, "stat", "0"), (True, "number", "yes"), (False, "p", "no"), ("N1", "stat", "N1"),
])
def test_each_role_has_one_rule(x, role, shown):
    assert fm.format_value(x, role) == shown


def test_measures_follow_the_readings_resolution_plus_one_decimal():
    assert fm.measurement_decimals([59.6, 61.6, 65.2, 48.9]) == 1
    assert fm.measurement_decimals([12, 15, 20]) == 0
    assert fm.measurement_decimals([0.1 + 0.2, 0.5]) == 1  # binary noise is not a finer reading
    assert fm.measurement_decimals([1.125, 2.5]) == 3
    assert fm.measurement_decimals([1 / 3, 2.0]) is None
    assert fm.measurement_decimals([np.nan]) is None
    assert fm.format_value(62.5133, "measure") == "62.51"  # no scale known: 4 significant digits
    with fm.scale(1, "µm"):
        assert fm.format_value(62.5133, "measure") == "62.51"
        assert fm.format_value(1.74232, "measure") == "1.74"
        assert fm.format_value(-0.001, "measure") == "0.00"  # no negative zero
        assert fm.format_value(0.000123, "p") == "1.23e-04"  # other roles ignore the scale
    with fm.scale(0):
        assert fm.format_value(62.5133, "measure") == "62.5"
    assert fm.current_scale() == fm.Scale()  # the block ends with its scale


@pytest.mark.parametrize(("heading", "role"), [
    ("p-value", "p"), ("p-value (studentized range, 4 means)", "p"), ("outlier test p (Bonferroni)", "p"),
    ("p-value after removal", "p"), ("change in p-value", "number"), ("df", "df"), ("df (residual)", "df"),
    ("sum of squares", "ss"), ("mean square", "ss"), ("F", "stat"), ("t", "stat"), ("q", "stat"),
    ("statistic", "stat"), ("Cook's distance", "stat"), ("studentized residual (external)", "stat"),
    ("DFFITS", "stat"), ("leverage", "stat"), ("eta²", "share"), ("partial omega²", "share"),
    ("Cohen's f (partial)", "share"), ("power at alpha 0.05", "share"), ("mean", "measure"), ("SD", "measure"),
    ("standard error", "measure"), ("difference", "measure"), ("95% CI low (pooled SD)", "measure"),
    ("95% simultaneous high", "measure"), ("marginal mean", "measure"), ("residual", "measure"),
    ("n", "count"), ("rows left out", "count"), ("rank", "count"), ("level", "number"),
])
def test_roles_are_read_from_the_kits_headings(heading, role):
    assert fm.column_role(heading) == role


def test_a_table_can_state_its_roles_and_units_go_into_the_headings():
    frame = fm.result_frame({"effect size": ["eta squared"], "estimate": [0.0529564], "90% CI low": [0.0]},
                            roles={"estimate": "share", "90% CI low": "share"})
    shown = fm.format_frame(frame, units="µm")
    assert list(shown.columns) == ["effect size", "estimate", "90% CI low"]  # shares carry no units
    assert shown.iloc[0].tolist() == ["eta squared", "0.053", "0.000"]
    part = pd.DataFrame({"source": ["nozzle"], "df": [3], "sum of squares": [50.902], "mean": [62.51]})
    with fm.scale(1, "µm"):
        assert list(fm.format_frame(part).columns) == ["source", "df", "sum of squares (µm²)", "mean (µm)"]
        assert fm.heading("95% CI low (pooled SD)", "measure") == "95% CI low (µm, pooled SD)"


def test_result_frames_compute_with_every_digit_and_display_the_kits_digits():
    frame = fm.result_frame({"source": ["nozzle", "residual"], "df": [3, 110], "sum of squares": [50.9021, 609.317],
                             "F": [3.06312, None], "p-value": [0.0311432, None]})
    assert frame["sum of squares"].sum() == pytest.approx(660.2191)
    text = repr(frame)
    assert "609.32" in text and "3.063" in text and "0.0311" in text and "609.317" not in text
    assert "<td class='vx-num' data-label='p-value'>0.0311</td>" in frame._repr_html_()
    derived = frame[frame["df"] > 5]
    assert type(derived) is pd.DataFrame  # selections are ordinary frames


def test_text_tables_align_numbers_right_and_words_left():
    frame = pd.DataFrame({"level": ["N1", "N2+N3"], "mean": [62.5133, 63.5593]})
    with fm.scale(1):
        lines = fm.text_table(frame).splitlines()
    assert lines == ["level   mean", "N1     62.51", "N2+N3  63.56"]
