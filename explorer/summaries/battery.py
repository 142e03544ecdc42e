"""The one-way battery on a summary-backed study: exact parts from summaries, row parts from the sample.

Everything the battery computes from level counts, means and variances (classic F,
Welch, Brown-Forsythe, Bartlett, Tukey-Kramer, Games-Howell, pairwise t, Dunnett,
letters, effect sizes, power) is taken from the exact summary results. The parts that
read rows (Kruskal-Wallis and the permutation F, Levene's spread test, the normality
check of the residuals, the outlier screens) run on the seeded sample of rows, and the
battery's notes say so.
"""

from __future__ import annotations

import dataclasses
from typing import Any

from ..engine.errors import ExplorerError
from ..inference.assumptions import bartlett, recommend
from ..inference.battery import Battery, comparison_parts, run_battery
from ..inference.effect_sizes import effect_sizes
from ..inference.omnibus import brown_forsythe_f, classic_f, welch_f
from ..inference.power import power_plan

__all__ = ["summary_battery"]


def summary_battery(study: Any, **options: Any) -> Battery:
    """:func:`explorer.inference.battery.run_battery` for a :class:`~explorer.summaries.SummaryStudy`.

    Takes the same options; see the module docstring for which parts are exact.
    """
    sample = study.sample_results()
    part = run_battery(sample, **options)
    full = study.results
    opts = dict(part.options)
    a, conf = part.alpha, float(opts["confidence"])  # type: ignore[arg-type]
    compared = comparison_parts(full, confidence=conf, pairwise_adjust=str(opts["pairwise_adjust"]),
                                letters_from=str(opts["letters_from"]), alpha=a,
                                control=opts["control"],  # type: ignore[arg-type]
                                dunnett_alternative=opts["dunnett_alternative"])  # type: ignore[arg-type]
    skip = ("No effect sizes", "No power", "Group sizes", "No letters", "No Dunnett", "With ")
    notes = [n for n in part.notes if not n.startswith(skip)] + compared.pop("notes")
    try:
        eff_conf = opts.get("effect_confidence")
        sizes = effect_sizes(full, confidence=None if eff_conf is None else float(eff_conf), alpha=a)  # type: ignore[arg-type]
    except ExplorerError as exc:
        sizes = None
        notes.append(f"No effect sizes: {exc}.")
    try:
        plan = power_plan(full, effect_f=opts["effect_f"], alpha=a, target_power=float(opts["target_power"]))  # type: ignore[arg-type]
    except ExplorerError as exc:
        plan = None
        notes.append(f"No power: {exc}.")
    notes.append(
        f"Exact from all {full.n_used} rows: classic F, Welch, Brown-Forsythe, Bartlett, comparisons, letters, effect "
        f"sizes and power. From a seeded sample of {sample.n_used} rows (seed {study.seed}): Kruskal-Wallis, "
        "permutation F, Levene, the normality check and the outlier screens."
    )
    return dataclasses.replace(
        part,
        classic=classic_f(full), welch=welch_f(full), brown_forsythe=brown_forsythe_f(full), bartlett=bartlett(full),
        recommendation=recommend(full, part.levene, part.shapiro, alpha=a),
        **compared, effect_sizes=sizes, power=plan, notes=tuple(notes),
    )
