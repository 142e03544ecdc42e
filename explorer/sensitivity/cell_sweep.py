"""The robustness sweep of a factorial or block design: each specification analysed by the
engine on a derived view (the cell-level route of :mod:`.sweep`, as :mod:`.cell_deletion`
and :mod:`.cell_regroup` are of their scans).

Merges pool levels of the first treatment factor (:class:`explorer.engine.edits.MergeLevels`
on the view), outlier rules read the fit of each specification (influence measures from
its cell-level leverages; Cook 1977), and the scored term's F test is read from each
partition. The choices and their checks are :mod:`.sweep_choices`.

References
----------
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19, 15-18.
Steegen, S., Tuerlinckx, F., Gelman, A. and Vanpaemel, W. (2016). Increasing
transparency through a multiverse analysis. Perspectives on Psychological Science
11(5), 702-712.
"""

from __future__ import annotations

import itertools

import numpy as np

from ..engine.errors import DesignError
from ..engine.numerics import response_scale
from ..engine.results import Results
from .sweep_choices import check_merge_names, outlier_keep, pooled_groups, transformed_responses

__all__ = ["factorial_rows"]


def factorial_rows(study, term, outlier_rules, transforms, merges, a, notes):  # type: ignore[no-untyped-def]
    """Specifications of a factorial or block design, each analysed by the engine on a derived view.

    Merges pool levels of the first treatment factor; outlier rules read the fit of the
    specification (influence measures from its cell-level leverages); ``term``'s F test
    is read from each.
    """
    import dataclasses

    from ..engine.analysis import analyze
    from ..engine.edits import MergeLevels

    dataset, view, spec = study.dataset, study.view, study.spec
    factor = spec.factors[0]
    kept_pos = np.flatnonzero(view.kept)
    present = tuple(lv for i, lv in enumerate(view.levels[factor]) if np.any(view.codes[factor][kept_pos] == i))
    merge_list = check_merge_names(factor, present, merges)
    all_resp = transformed_responses(dataset, np.arange(dataset.n), transforms, notes)
    subsets = [c for r in range(len(merge_list) + 1) for c in itertools.combinations(range(len(merge_list)), r)]
    rows = []
    for t, (yt, off) in all_resp.items():
        ds = dataclasses.replace(dataset, y=yt, offset=off)
        scale = response_scale(off, yt[kept_pos])
        for subset in subsets:
            merge_name = "; ".join("+".join(merge_list[i]) for i in subset) or "none"
            v = view
            for group in pooled_groups(present, [merge_list[i] for i in subset]):
                v = MergeLevels(factor=factor, levels=group, into="+".join(group), reason="sweep").apply(v, ds)
            try:
                fit_all: Results | str = analyze(ds, v, spec)
            except DesignError as exc:
                fit_all = str(exc)
            for rule in outlier_rules:
                keep_fit = None
                res: Results | str = fit_all
                left_out: list = []
                if isinstance(fit_all, Results) and rule != "none":
                    keep_fit = outlier_keep(fit_all, rule, a, scale, np.asarray(fit_all.fit.row_ids))
                    drop_pos = np.asarray(fit_all.fit.positions)[~keep_fit]
                    left_out = np.asarray(fit_all.fit.row_ids)[~keep_fit].tolist()
                    if drop_pos.size:
                        kept = v.kept.copy()
                        kept[drop_pos] = False
                        try:
                            res = analyze(ds, v.replace(kept=kept), spec)
                        except DesignError as exc:
                            res = str(exc)
                stat = d1 = d2 = p = None
                note = res if isinstance(res, str) else " ".join(res.partition.notes) if res.pvalue(term) is None else ""
                if isinstance(res, Results):
                    row = res.partition.row(term)
                    stat, d1, d2, p = row.statistic, float(row.df), float(res.df_resid), row.pvalue
                n_used = res.n_used if isinstance(res, Results) else int(kept_pos.size) - len(left_out)
                levels = len(res.levels[factor].labels) if isinstance(res, Results) else None
                rows.append({
                    "outlier rule": rule, "test": "classic", "transform": t, "merges": merge_name,
                    "n": n_used, "levels": levels, "rows left out": left_out, "left out": len(left_out),
                    "statistic": stat, "df (term)": d1, "df (residual)": d2, "p-value": p, "note": note,
                })
    return rows, all_resp
