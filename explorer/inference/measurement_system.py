"""Measurement-system study: how much of the observed variation the gauge itself adds.

Parts measured repeatedly by operators (crossed: every operator measures every part;
nested: each operator measures own parts, as in destructive tests). From the variance
components of the study (:mod:`.variance_components`; moments on balanced data, REML
otherwise):

* repeatability (equipment variation) = residual variance;
* reproducibility (appraiser variation) = operator variance + operator x part variance
  (crossed), or operator variance (nested);
* gauge repeatability and reproducibility (GRR) = repeatability + reproducibility;
* part-to-part = part variance (part within operator when nested);
* total = GRR + part-to-part.

Each line shows the variance, its share of the total variance, the standard
deviation, the study variation (``multiplier`` x SD, 6 by default), its share of the
total standard deviation (sigma_k / sigma_total, which do not add to 100%) and, when a
tolerance is given, its share of the tolerance (study variation / tolerance). The
number of distinct categories is floor(1.41 x sigma_part / sigma_GRR).

Trade terms as in the Automotive Industry Action Group's Measurement Systems Analysis
reference manual, 4th ed. (2010) and Montgomery, Design and Analysis of Experiments,
8th ed. (2013), ch. 13 (the measurement-systems capability example) - from memory; the 1.41 factor,
truncation of the number of distinct categories, and the 6-SD study variation follow
the 4th edition of the manual (older editions used 5.15 SD), also from memory.
Negative variance estimates count as zero here (the rule of
:mod:`.variance_components`), and the table says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..engine.deferred import deferrable, deferred
from ..engine.ems import RESIDUAL
from ..engine.errors import ExplorerError
from ..engine.tables import html_table
from ..engine.variance_components import NEGATIVE_RULE, VarianceComponents
from ..formatting import result_frame
from ..rendering import html_repr

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["GaugeLine", "MeasurementSystem", "measurement_system"]


@deferrable("df", "ci_low", "ci_high")
@dataclass(frozen=True, kw_only=True)
class GaugeLine:
    """One line of the measurement-system table (the df and interval are made when first read)."""

    source: str
    variance: float
    share_of_variance: float
    sd: float
    study_variation: float
    share_of_sd: float
    share_of_tolerance: float | None
    df: float | None = None
    ci_low: float | None = None
    ci_high: float | None = None


@dataclass(frozen=True, kw_only=True, eq=False)
class MeasurementSystem:
    """Repeatability, reproducibility, operator x part, part-to-part and total, with the distinct categories."""

    lines: tuple[GaugeLine, ...]
    layout: str  # "crossed" or "nested"
    distinct_categories: int | None
    multiplier: float
    tolerance: float | None
    method: str
    confidence: float
    notes: tuple[str, ...] = field(default=())

    def line(self, source: str) -> GaugeLine:
        for x in self.lines:
            if x.source == source:
                return x
        raise KeyError(f"no line {source!r}; lines are {[x.source for x in self.lines]}")

    def to_frame(self) -> pd.DataFrame:
        pct = f"{self.confidence:.0%}"
        data = {
            "source": [x.source for x in self.lines],
            "variance": [x.variance for x in self.lines],
            "share of variance": [x.share_of_variance for x in self.lines],
            "SD": [x.sd for x in self.lines],
            f"study variation ({self.multiplier:g} SD)": [x.study_variation for x in self.lines],
            "share of total SD": [x.share_of_sd for x in self.lines],
        }
        if self.tolerance is not None:
            data["share of tolerance"] = [x.share_of_tolerance for x in self.lines]
        data[f"variance {pct} CI low"] = pd.array([x.ci_low for x in self.lines], dtype="Float64")
        data[f"variance {pct} CI high"] = pd.array([x.ci_high for x in self.lines], dtype="Float64")
        return result_frame(data)

    @html_repr
    def _repr_html_(self) -> str:
        ndc = "—" if self.distinct_categories is None else str(self.distinct_categories)
        caption = (f"Measurement system ({self.layout} parts and operators; {self.method}); "
                   f"number of distinct categories: {ndc}")
        return html_table(self.to_frame(), caption, self.notes)


def measurement_system(
    results: Results, part: str, operator: str, *, tolerance: float | None = None, multiplier: float = 6.0
) -> MeasurementSystem:
    """The measurement-system table of a study of ``part`` x ``operator`` (both random).

    Parameters
    ----------
    results : Results
        The results of a study whose spec has ``part`` and ``operator`` among its random
        factors, crossed (with or without their interaction) or with ``part`` nested in
        ``operator``.
    part, operator : str
        The two columns.
    tolerance : float, optional
        Upper minus lower specification; adds each line's share of it.
    multiplier : float, default 6.0
        Study variation = multiplier x SD.

    Returns
    -------
    MeasurementSystem
        Repeatability, reproducibility, gauge R&R, part-to-part and total: variance,
        shares, SD, study variation and intervals; the number of distinct categories.

    References
    ----------
    Montgomery, D. C. (2013). Design and Analysis of Experiments, 8th ed., ch. 13 (the
    measurement-systems capability example; from memory).
    Burdick, R. K., Borror, C. M. and Montgomery, D. C. (2005). Design and Analysis of
    Gauge R&R Studies. SIAM (from memory).

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("gauge"), "diameter_mm", ["part", "operator"],
    ...                  random=["part", "operator"])
    >>> table = ex.stats.measurement_system(study.results, "part", "operator")
    >>> [line.source for line in table.lines][:3], table.distinct_categories
    (['repeatability', 'reproducibility', 'operator'], 4)
    """
    spec = results.spec
    vc: VarianceComponents | None = results.variance_components
    for col in (part, operator):
        if col not in spec.columns:
            raise ExplorerError(f"{col!r} is not a column of the study's model {list(spec.columns)}")
        if col not in spec.random:
            raise ExplorerError(
                f"{col!r} must be random (random=[{part!r}, {operator!r}]): a measurement-system study treats "
                "parts and operators as samples"
            )
    if vc is None:  # pragma: no cover - random columns always give components
        raise ExplorerError("the study has no variance components")
    if tolerance is not None and not (isinstance(tolerance, (int, float)) and math.isfinite(tolerance) and tolerance > 0):
        raise ExplorerError(f"tolerance must be a positive number (upper minus lower specification), not {tolerance!r}")
    if not (isinstance(multiplier, (int, float)) and math.isfinite(multiplier) and multiplier > 0):
        raise ExplorerError(f"multiplier must be a positive number of standard deviations, not {multiplier!r}")
    names = [c.source for c in vc.components]
    nested = dict(spec.nested).get(part) == (operator,)
    part_name = f"{part} (within {operator})" if nested else part
    inter = next((n for n in names if set(n.split(" × ")) == {part, operator}), None)
    expected = {part_name, operator, RESIDUAL} | ({inter} if inter else set())
    extra = [n for n in names if n not in expected]
    if part_name not in names or operator not in names or extra:
        raise ExplorerError(
            f"a measurement-system table needs exactly the components {part!r}, {operator!r}, their interaction "
            f"(optional) and the residual; this study has {names}"
        )
    reproducibility = [operator] + ([inter] if inter else [])
    groups: list[tuple[str, list[str]]] = [
        ("repeatability", [RESIDUAL]),
        ("reproducibility", reproducibility),
        (f"{operator}", [operator]),
    ]
    if inter:
        groups.append((inter, [inter]))
    groups += [("gauge R&R", [RESIDUAL] + reproducibility), ("part-to-part", [part_name]),
               ("total", [RESIDUAL] + reproducibility + [part_name])]
    value = {c.source: c.truncated for c in vc.components}
    total_var = sum(value.values())
    total_sd = math.sqrt(total_var)
    made: list[list[tuple[float | None, float | None, float | None]]] = []

    def intervals() -> list[tuple[float | None, float | None, float | None]]:
        """Each line's df and interval (made once, when one is first read)."""
        if not made:
            out: list[tuple[float | None, float | None, float | None]] = []
            for (_, parts), summed in zip(groups, vc.combined_many([parts for _, parts in groups])):
                if any(vc.component(p).estimate < 0 for p in parts):
                    out.append((None, None, None))  # the interval of a sum with a negative part is not defined
                else:
                    out.append((summed.df, summed.ci_low, summed.ci_high))
            made.append(out)
        return made[0]

    lines = []
    for i, (label, parts) in enumerate(groups):
        var = float(sum(value[p] for p in parts))
        sd = math.sqrt(var)
        lines.append(GaugeLine(
            source=label, variance=var, share_of_variance=var / total_var if total_var > 0 else 0.0, sd=sd,
            study_variation=multiplier * sd, share_of_sd=sd / total_sd if total_sd > 0 else 0.0,
            share_of_tolerance=None if tolerance is None else multiplier * sd / tolerance,
            df=deferred(lambda i=i: intervals()[i][0]),  # type: ignore[misc]
            ci_low=deferred(lambda i=i: intervals()[i][1]),  # type: ignore[misc]
            ci_high=deferred(lambda i=i: intervals()[i][2]),  # type: ignore[misc]
        ))
    grr = math.sqrt(sum(value[p] for p in [RESIDUAL] + reproducibility))
    pv = math.sqrt(value[part_name])
    ndc = int(np.floor(1.41 * pv / grr)) if grr > 0 else None
    notes = [
        "Repeatability is the residual variance; reproducibility the operator" + (" and operator × part" if inter else "")
        + " variance; shares of the total SD do not add up to 100%.",
        "Number of distinct categories = 1.41 × SD(part-to-part) / SD(gauge R&R), rounded down.",
    ]
    negative = [c.source for c in vc.components if c.estimate < 0]
    if negative:
        notes.append(f"Negative estimate for {', '.join(negative)}: counted as zero. {NEGATIVE_RULE}")
    if ndc is None:
        notes.append("The gauge R&R variance is zero: the number of distinct categories is undefined.")
    return MeasurementSystem(
        lines=tuple(lines), layout="nested" if nested else "crossed", distinct_categories=ndc,
        multiplier=float(multiplier), tolerance=None if tolerance is None else float(tolerance),
        method=vc.method, confidence=vc.confidence, notes=tuple(notes) + vc.notes,
    )
