"""Views of random-factor and repeated-measures designs: charts, widget panels, report, replay.

Charts are checked through ``chart.to_dict()`` against the results they draw; the
replay code of a mixed study is run and must give the identical partition.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import explorer as ex

pytest.importorskip("altair")
pytest.importorskip("ipywidgets")


def rm_frame(seed=0, subjects=10) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = [(f"s{s:02d}", f"g{s % 2}", f"t{t}", 10 + 0.5 * t + rng.normal(scale=0.3) + s * 0.1)
            for s in range(subjects) for t in range(3)]
    return pd.DataFrame(rows, columns=["panel", "group", "time", "y"])


def gauge_frame(seed=1) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    p_eff = rng.normal(scale=2, size=6)
    rows = [(f"P{p}", f"O{o}", 20 + p_eff[p] + 0.3 * o + rng.normal(scale=0.3))
            for p in range(6) for o in range(3) for _ in range(2)]
    return pd.DataFrame(rows, columns=["part", "operator", "y"])


def test_variance_components_chart_draws_the_estimates():
    from explorer.charts.mixed import variance_components_chart

    study = ex.Study(gauge_frame(), "y", ["part", "operator"], random=["part", "operator"])
    study.drop_unit("part", "P2", reason="invented: damaged part")
    spec = variance_components_chart(study.baseline, study.results).to_dict()
    rows = next(iter(spec["datasets"].values()))
    frame = pd.DataFrame(rows)
    for view, res in (("unedited data", study.baseline), ("current view", study.results)):
        for c in res.variance_components.components:
            line = frame[(frame.view == view) & (frame.source == c.source)].iloc[0]
            assert line["estimate"] == pytest.approx(c.estimate)
            assert line["variance"] == pytest.approx(max(c.estimate, 0.0))
    fixed = ex.Study(gauge_frame(), "y", ["part", "operator"])
    assert variance_components_chart(fixed.baseline, fixed.results) is None


def test_profile_chart_has_one_line_per_subject_and_pickable_rows():
    from explorer.charts.mixed import profile_chart, profile_frame

    study = ex.Study(rm_frame(), "y", ["group", "time"], subject="panel", within=["time"])
    frame = profile_frame(study)
    assert frame["subject"].nunique() == 10 and len(frame) == 30
    spec = profile_chart(study).to_dict()
    params = spec.get("params", []) + [p for layer in spec["layer"] for p in layer.get("params", [])]
    assert any(p.get("name") == "pick" for p in params)


def test_profile_chart_draws_a_coloured_line_per_subject():
    """Rendered offline by vl-convert: one line mark per subject, each with a stroke colour (the lines' group scale
    and the points' row-state scale are independent; shared, the lines had no colour and did not show)."""
    import re

    vlc = pytest.importorskip("vl_convert")
    from explorer.charts.mixed import profile_chart

    study = ex.Study(rm_frame(), "y", ["group", "time"], subject="panel", within=["time"])
    svg = vlc.vegalite_to_svg(profile_chart(study).to_dict())
    lines = re.findall(r'<path[^>]*aria-roledescription="line mark"[^>]*>', svg)
    assert len(lines) == 10
    assert all(re.search(r'stroke="#[0-9a-f]{6}"', p) for p in lines)


def test_panels_build_for_mixed_and_fixed_studies():
    from explorer.widget import Explorer
    from explorer.widget.panels import PANELS

    keys = ["model_roles", "expected_mean_squares", "variance_components", "components_table",
            "measurement_system", "profiles", "sphericity"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for study in (ex.Study(rm_frame(), "y", ["group", "time"], subject="panel", within=["time"]),
                      ex.Study(gauge_frame(), "y", ["part", "operator"], random=["part", "operator"]),
                      ex.Study(gauge_frame(), "y", ["part", "operator"])):
            ctx = Explorer(study)._context()
            for k in keys:
                PANELS[k].build(ctx)  # no panel raises; refusals become sentences


def test_role_pickers_rebuild_the_study_with_edits_carried_over():
    from explorer.widget import Explorer
    from explorer.widget.mixed_panels import RolePickers

    study = ex.Study(gauge_frame(), "y", ["part", "operator"])
    study.drop([0], reason="invented: smudged")
    explorer = Explorer(study)
    pickers = RolePickers(explorer._context(), explorer._context().replace_study)
    pickers.pickers["part"].value = "random"
    pickers.pickers["operator"].value = "random"
    assert pickers.apply() is not None
    new = explorer.study
    assert new.spec.random == ("part", "operator") and len(new.edits) == 1
    assert new.results.variance_components is not None
    # the choice of roles is in the ledger, which carries over (the carried edit is not a new one)
    last = new.ledger.entries[-1]
    assert (last.kind, last.what, last.old, last.new) == ("specification", "random factors", "(none)", "part, operator")
    assert new.disclosure.edits_made == 1 and new.disclosure.specifications == 1
    pickers = RolePickers(explorer._context(), explorer._context().replace_study)
    pickers.pickers["part"].value = "nested in"  # no parent picked
    assert pickers.apply() is None and "Not applied" in pickers.status.value


def test_report_and_text_carry_the_strata_part(tmp_path):
    from explorer.report.text_summary import summary_text

    study = ex.Study(gauge_frame(), "y", ["part", "operator"], random=["part", "operator"])
    study.drop_unit("operator", "O2", reason="invented: untrained")
    before = study.disclosure
    html = study.report(tmp_path / "r.html").read_text(encoding="utf-8")
    assert "Strata, error terms and variance components" in html
    assert "Expected mean squares" in html and "Measurement system" in html and "left out in turn" in html
    assert "tested against" in html
    text = summary_text(study)
    assert "Variance components, unedited data" in text and "repeatability" in text
    assert study.disclosure == before  # the report's scans are not counted


def test_replay_code_of_a_mixed_study_rebuilds_it_exactly():
    frame = rm_frame()
    study = ex.Study(frame, "y", ["group", "time"], subject="panel", within=["time"], variance_method="reml")
    study.drop_unit("panel", "s03", reason="invented: missed visit")
    code = study.to_code()
    assert "subject='panel'" in code and "within=['time']" in code and "drop_unit('panel', 's03'" in code
    scope = {"data": frame}
    exec(compile(code, "<replay>", "exec"), scope)  # noqa: S102 - the kit's own generated code
    again = scope["study"]
    assert again.results.partition.to_frame().equals(study.results.partition.to_frame())
    assert [c.estimate for c in again.results.variance_components.components] == \
        [c.estimate for c in study.results.variance_components.components]
