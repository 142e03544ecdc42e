"""The robustness sweep's choices: what each option is, the checks of a user's list, and how
an option acts on the rows (the response under each transform, the rows an outlier rule
keeps, the pooled groups of chosen merges).

Shared by the one-factor route (:mod:`.sweep`) and the cell-level route
(:mod:`.cell_sweep`). The outlier rules follow the cut-offs of :mod:`.influence`
(externally studentized residual beyond 3, Cook's distance beyond 4/n) and the
Bonferroni outlier test (Weisberg 2005, ch. 9); the transforms are those of
:mod:`explorer.engine.transforms` (Box and Cox 1964).

References
----------
Weisberg, S. (2005). Applied Linear Regression, 3rd ed. Wiley, ch. 9.
Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations. JRSS B 26, 211-252.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..engine.errors import DataError, ExplorerError, closest_names
from ..engine.results import Results
from ..engine.spec import OVERALL_TESTS
from ..engine.transforms import NAMED, check_transform, with_transform
from ..inference.outliers import bonferroni_outlier_test
from .influence import influence_measures

__all__ = [
    "DEFAULT_TESTS",
    "DEFAULT_TRANSFORMS",
    "OUTLIER_RULES",
    "TESTS",
    "TRANSFORMS",
    "check_merge_names",
    "check_options",
    "check_transforms",
    "outlier_keep",
    "pooled_groups",
    "transform_name",
    "transformed_responses",
]

#: Outlier rules: name -> plain description.
OUTLIER_RULES = {
    "none": "keep every row",
    "studentized": "leave out |external studentized residual| > 3",
    "cooks": "leave out Cook's distance > 4/n",
    "outlier_test": "leave out rows the Bonferroni outlier test flags",
}
#: Overall tests: name -> plain description (the study's tests, :data:`.spec.OVERALL_TESTS`).
TESTS = dict(OVERALL_TESTS)
#: Tests swept by default after the study's own.
DEFAULT_TESTS = ("classic", "welch", "kruskal")
#: Response transforms by name: name -> plain description (a number is a Box-Cox power).
TRANSFORMS = NAMED
#: Transforms swept besides the study's own when none are listed.
DEFAULT_TRANSFORMS = ("none", "log")


def check_merge_names(factor: str, labels: tuple[str, ...], merges: Sequence[Sequence[str]]) -> list[tuple[str, ...]]:
    """The plausible merges as tuples of level names, each checked against ``labels`` (levels with kept rows)."""
    out = []
    for m in merges:
        if isinstance(m, str):
            raise ExplorerError("each plausible merge is a list of level names, e.g. merges=[['N2', 'N3']]")
        names = tuple(str(x) for x in m)
        for lv in names:
            if lv not in labels:
                near = closest_names(lv, labels)
                hint = f" Did you mean {near[0]!r}?" if near else ""
                raise ExplorerError(f"merge {list(names)}: {factor!r} has no level {lv!r} with kept rows "
                                    f"(levels: {list(labels)}).{hint}")
        if len(set(names)) < 2:
            raise ExplorerError(f"merge {list(names)} needs two or more different levels")
        out.append(names)
    return out


def check_options(name: str, chosen: Sequence[str], known: dict[str, str]) -> tuple[str, ...]:
    """``chosen`` as a tuple, refused unless it is a non-empty list of keys of ``known``."""
    chosen = tuple(chosen)
    bad = [c for c in chosen if c not in known]
    if bad or not chosen:
        raise ExplorerError(f"{name} must be a non-empty list from {list(known)}; got {list(chosen)}")
    return chosen


def transform_name(t: object) -> str:
    """The sweep's name of a transform: 'none', 'log', 'sqrt' or 'power 0.37' (a Box-Cox power)."""
    return t if isinstance(t, str) else f"power {float(t):g}"  # type: ignore[arg-type]


def check_transforms(transforms: Sequence[object] | None, current: object) -> tuple[object, ...]:
    """Canonical transforms (the study's own first by default), each once."""
    if transforms is None:
        transforms = (current, *DEFAULT_TRANSFORMS)
    if isinstance(transforms, str) or not len(transforms):
        raise ExplorerError(f"transforms must be a non-empty list from {list(TRANSFORMS)} or Box-Cox powers; "
                            f"got {transforms!r}")
    out = []
    for t in transforms:
        try:
            c = check_transform(t)
        except ExplorerError as exc:
            raise ExplorerError(f"transforms: {exc}") from None
        if c not in out:
            out.append(c)
    return tuple(out)


def transformed_responses(dataset: object, positions: np.ndarray, transforms: Sequence[object], notes: list[str]
               ) -> dict[str, tuple[np.ndarray, float]]:
    """The response of the rows at ``positions`` on the shifted scale for each transform.

    Each transform starts from the values as measured (the study's own transform is the
    study's dataset as it is, bit for one bit); one the response cannot take (the log of
    zero) is left out with a note.
    """
    out: dict[str, tuple[np.ndarray, float]] = {}
    for t in transforms:
        try:
            ds = with_transform(dataset, t)  # type: ignore[arg-type]
        except DataError as exc:
            notes.append(f"{transform_name(t).capitalize()} transform left out: {exc}")
            continue
        out[transform_name(t)] = (np.asarray(ds.y)[positions], float(ds.offset))
    return out


def outlier_keep(res: Results, rule: str, alpha: float, scale: float, row_ids: np.ndarray) -> np.ndarray:
    """Rows of ``res.fit`` kept by an outlier rule (one pass on that fit)."""
    f = res.fit
    if rule == "none":
        return np.ones(f.row_ids.size, dtype=bool)
    if rule == "outlier_test":
        flagged = bonferroni_outlier_test(res, alpha=alpha).flagged
        return ~np.isin(row_ids, np.asarray(flagged, dtype=row_ids.dtype))
    infl = influence_measures(f.residuals, f.leverage, res.df_resid, alpha=alpha, scale=scale)
    return ~infl.flagged("studentized" if rule == "studentized" else "cooks_4_over_n")


def pooled_groups(present: tuple[str, ...], chosen: list[tuple[str, ...]]) -> list[tuple[str, ...]]:
    """Chosen merges pooled transitively (overlapping merges become one group)."""
    groups: list[set[str]] = []
    for m in chosen:
        hit = [g for g in groups if g & set(m)]
        merged = set(m).union(*hit) if hit else set(m)
        groups = [g for g in groups if not (g & set(m))] + [merged]
    return [tuple(lv for lv in present if lv in g) for g in groups]
