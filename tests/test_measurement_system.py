"""Measurement-system study: repeatability, reproducibility, part-to-part, distinct categories.

Outside references:
- Montgomery, Design and Analysis of Experiments, 8th ed., ch. 13, the measurement-systems
  capability example (20 parts, 3 operators, 2 measurements; data and results from memory).
  The recalled data reproduce every printed sum of squares (parts 1185.425, operators
  2.617, parts x operators 27.050, error 59.500, total 1274.592), which is how the recall
  is checked. Printed results: F (random model) parts 87.65, operators 1.84, P x O 0.72;
  variance components 10.28 (parts), 0.015 (operators), -0.14 (P x O, negative), 0.99
  (error); reduced model without the interaction: error MS 0.88, parts 10.25, operators
  0.01, gauge variance 0.89, gauge SD 0.94, and with specifications 5 to 60 the
  precision-to-tolerance ratio 6 (0.94) / 55 = 0.10.
- AIAG Measurement Systems Analysis reference manual, 4th ed.: number of distinct
  categories = 1.41 (PV / GRR), truncated (from memory); computed here by hand.
- Generated designs with known components: the moment estimates are unbiased, so their
  average over 300 seeds recovers the components within sampling error.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.engine.errors import ExplorerError

MONTGOMERY = """21 20 20 20 19 21
24 23 24 24 23 24
20 21 19 21 20 22
27 27 28 26 27 28
19 18 19 18 18 21
23 21 24 21 23 22
22 21 22 24 22 20
19 17 18 20 19 18
24 23 25 23 24 24
25 23 26 25 24 25
21 20 20 20 21 20
18 19 17 19 18 19
23 25 25 25 25 25
24 24 23 25 24 25
29 30 30 28 31 30
26 26 25 26 25 27
20 20 19 20 20 20
19 21 19 19 21 23
25 26 25 24 25 25
19 19 18 17 19 17"""


def montgomery() -> pd.DataFrame:
    rows = []
    for i, line in enumerate(MONTGOMERY.splitlines()):
        v = [float(x) for x in line.split()]
        rows += [(f"P{i + 1:02d}", f"O{o + 1}", v[2 * o + r]) for o in range(3) for r in range(2)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def test_montgomery_capability_study_full_model():
    study = ex.Study(montgomery(), "y", ["part", "operator"], random=["part", "operator"])
    t = study.results.partition
    assert [round(t.row(s).sum_sq, 3) for s in ("part", "operator", "part × operator", "residual",
                                                "total (corrected)")] == [1185.425, 2.617, 27.050, 59.500, 1274.592]
    assert round(t.row("part").statistic, 2) == 87.65
    assert round(t.row("operator").statistic, 2) == 1.84
    assert round(t.row("part × operator").statistic, 2) == 0.72
    assert t.row("part").error_term == "part × operator"
    vc = study.results.variance_components
    assert round(vc.component("part").estimate, 2) == 10.28
    assert round(vc.component("operator").estimate, 3) == 0.015
    assert round(vc.component("part × operator").estimate, 2) == -0.14
    assert round(vc.component("residual").estimate, 2) == 0.99
    ms = study.measurement_system("part", "operator")
    assert ms.line("part × operator").variance == 0.0  # the negative estimate counts as zero
    assert any("Negative estimate for part × operator" in n for n in ms.notes)


def test_montgomery_reduced_model_gauge_and_tolerance():
    study = ex.Study(montgomery(), "y", ["part", "operator"], random=["part", "operator"], interactions=False)
    assert round(study.results.partition.row("residual").mean_sq, 2) == 0.88
    ms = study.measurement_system("part", "operator", tolerance=60 - 5)
    assert round(ms.line("part-to-part").variance, 2) == 10.25
    assert round(ms.line("operator").variance, 2) == 0.01
    assert round(ms.line("gauge R&R").variance, 2) == 0.89
    assert round(math.sqrt(round(ms.line("gauge R&R").variance, 2)), 2) == 0.94  # the book roots the rounded 0.89
    assert round(ms.line("gauge R&R").share_of_tolerance, 2) == 0.10
    grr, pv = ms.line("gauge R&R").sd, ms.line("part-to-part").sd
    assert ms.distinct_categories == math.floor(1.41 * pv / grr) == 4
    tot = ms.line("total")
    assert tot.variance == pytest.approx(ms.line("gauge R&R").variance + ms.line("part-to-part").variance)
    assert ms.line("repeatability").share_of_variance + ms.line("reproducibility").share_of_variance + \
        ms.line("part-to-part").share_of_variance == pytest.approx(1.0)
    assert ms.line("gauge R&R").share_of_sd == pytest.approx(grr / tot.sd)
    frame = ms.to_frame()
    assert "share of tolerance" in frame.columns and "study variation (6 SD)" in frame.columns


def gauge_study(seed, parts=10, operators=3, reps=3, sd=(2.0, 0.5, 0.3, 0.4), nested=False) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    sp, so, spo, se = sd
    rows = []
    o_eff = rng.normal(scale=so, size=operators)
    if nested:  # destructive test: each operator measures its own parts
        for o in range(operators):
            for p in range(parts):
                pe = rng.normal(scale=sp)
                rows += [(f"O{o}", f"P{p}", 50 + pe + o_eff[o] + rng.normal(scale=se)) for _ in range(reps)]
        return pd.DataFrame(rows, columns=["operator", "part", "y"])
    p_eff = rng.normal(scale=sp, size=parts)
    po = rng.normal(scale=spo, size=(parts, operators))
    for p in range(parts):
        for o in range(operators):
            rows += [(f"P{p}", f"O{o}", 50 + p_eff[p] + o_eff[o] + po[p, o] + rng.normal(scale=se))
                     for _ in range(reps)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def test_generated_crossed_design_recovers_known_components():
    """Average of 300 moment estimates within 4 standard errors of the true components; interval coverage."""
    truth = {"part": 4.0, "operator": 0.25, "part × operator": 0.09, "residual": 0.16}
    est = {k: [] for k in truth}
    covered = 0
    for seed in range(300):
        study = ex.Study(gauge_study(seed), "y", ["part", "operator"], random=["part", "operator"])
        vc = study.results.variance_components
        for k in truth:
            est[k].append(vc.component(k).estimate)
        r = vc.component("residual")
        covered += r.ci_low <= truth["residual"] <= r.ci_high
    for k, v in truth.items():
        x = np.asarray(est[k])
        assert abs(x.mean() - v) < 4 * x.std(ddof=1) / np.sqrt(x.size), k
    assert 0.92 <= covered / 300 <= 0.98  # exact 95% chi-square interval of the residual: binomial spread


def test_nested_destructive_layout():
    frame = gauge_study(3, nested=True)
    study = ex.Study(frame, "y", ["operator", "part"], random=["operator", "part"], nested={"part": "operator"})
    ms = study.measurement_system("part", "operator")
    assert ms.layout == "nested"
    t = study.results.partition
    vc = study.results.variance_components
    n = 3
    assert vc.component("part (within operator)").estimate == pytest.approx(
        (t.row("part (within operator)").mean_sq - t.row("residual").mean_sq) / n, rel=1e-12)
    assert ms.line("reproducibility").variance == pytest.approx(max(vc.component("operator").estimate, 0))
    assert ms.line("part-to-part").variance == pytest.approx(vc.component("part (within operator)").estimate)
    assert [x.source for x in ms.lines] == ["repeatability", "reproducibility", "operator", "gauge R&R",
                                            "part-to-part", "total"]


def test_unbalanced_gauge_study_uses_reml():
    frame = gauge_study(4).drop(index=[0, 7, 20])
    study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    ms = study.measurement_system("part", "operator")
    assert ms.method == "REML"
    assert ms.line("gauge R&R").ci_low is None or ms.line("gauge R&R").ci_low > 0


def test_measurement_system_errors():
    frame = gauge_study(1)
    fixed = ex.Study(frame, "y", ["part", "operator"], random=["part"])
    with pytest.raises(ExplorerError, match="must be random"):
        fixed.measurement_system("part", "operator")
    study = ex.Study(frame, "y", ["part", "operator"], random=["part", "operator"])
    with pytest.raises(ExplorerError, match="not a column"):
        study.measurement_system("piece", "operator")
    with pytest.raises(ExplorerError, match="tolerance must be a positive number"):
        study.measurement_system("part", "operator", tolerance=-1)
    with pytest.raises(ExplorerError, match="multiplier"):
        study.measurement_system("part", "operator", multiplier=float("nan"))
