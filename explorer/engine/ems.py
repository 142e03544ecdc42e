"""Expected mean squares of a model with random terms, and the error term of each F test.

Model (the unrestricted mixed model): every term that contains a random column is
random, with independent effects of variance sigma^2_U for each level combination of
its columns; fixed terms are constants; the residual has variance sigma^2.

* **Balanced data** (equal cell counts, every term's level combinations equally
  replicated): E(MS_T) = sigma^2 + sum over random U whose columns include all of T's
  of (N / number of level combinations of U) sigma^2_U, plus a fixed-effect quadratic
  when T is fixed (the classic algorithm; Montgomery, Design and Analysis of
  Experiments, 8th ed., ch. 13, from memory; Searle, Casella and McCulloch 1992, ch. 4).
  The coefficients are exact counts.
* **Any data** (Hartley 1967, the "method of synthesis"): a sum of squares is a
  quadratic form z'Mz in the weighted cell means, so E(SS) = tr(M Cov z) + (fixed
  part); with Cov z = sigma^2 I + sum_U sigma^2_U B_U B_U' (B_U = W^1/2 Z_U) the
  coefficient of sigma^2_U is ||Q_big' B_U||^2 - ||Q_small' B_U||^2. Balanced designs
  are computed both ways and the exact counts are kept when they agree.

The error term of a test of T is the combination of other mean squares whose
expectation equals E(MS_T) with T's own component removed. When one mean square
matches it is that one; otherwise the combination is synthesized and its degrees of
freedom are Satterthwaite's (1946) nu = (sum c_j MS_j)^2 / sum (c_j MS_j)^2 / df_j.

References
----------
Hartley, H. O. (1967). Expectations, variances and covariances of ANOVA mean squares
by "synthesis". Biometrics 23, 105-114.
Satterthwaite, F. E. (1946). An approximate distribution of estimates of variance
components. Biometrics Bulletin 2, 110-114.
Searle, S. R., Casella, G. and McCulloch, C. E. (1992). Variance Components. Wiley.
"""

from __future__ import annotations

import weakref
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations

import numpy as np
import pandas as pd

from ..formatting import result_frame, show_coefficient
from ..rendering import html_repr
from .cellfit import CellFit, model_comparisons
from .design import Term, term_columns
from .spec import ModelSpec
from .tables import html_table

__all__ = [
    "complete_balanced", "ErrorTerm", "ExpectedMeanSquares", "error_terms", "expected_mean_squares", "is_random",
    "random_indicators",
    "RESIDUAL",
]

RESIDUAL = "residual"


def is_random(term: Term, spec: ModelSpec) -> bool:
    """A term is random when it contains a random column (or the subject)."""
    rnd = set(spec.random_columns)
    return any(c in rnd for c in term)


@dataclass(frozen=True, kw_only=True, eq=False)
class ExpectedMeanSquares:
    """E(MS) of every row of a partition, as coefficients of the variance components.

    ``rows`` are the term names then ``"residual"``; ``components`` the random terms
    (their variance components) then ``"residual"``; ``coefficients[i, j]`` the
    coefficient of component j in E(MS) of row i; ``fixed[i]`` whether row i also
    carries a fixed-effect quadratic (its term is fixed). ``method`` says how the
    coefficients were found.
    """

    rows: tuple[str, ...]
    components: tuple[str, ...]
    coefficients: np.ndarray
    fixed: tuple[bool, ...]
    random_rows: tuple[bool, ...]
    method: str
    ss_type: str

    def expression(self, row: str) -> str:
        """E(MS) of ``row`` in words, e.g. ``σ² + 4 σ²[block × variety] + fixed[variety]``."""
        i = self.rows.index(row)
        parts = []
        order = [len(self.components) - 1] + list(range(len(self.components) - 1))  # σ² first
        for j in order:
            comp = self.components[j]
            c = float(self.coefficients[i, j])
            if abs(c) < 1e-12:
                continue
            name = "σ²" if comp == RESIDUAL else f"σ²[{comp}]"
            parts.append(name if abs(c - 1) < 1e-12 else f"{show_coefficient(c)} {name}")
        if self.fixed[i]:
            parts.append(f"fixed[{row}]")
        return " + ".join(parts) if parts else "0"

    def to_frame(self) -> pd.DataFrame:
        frame = pd.DataFrame(self.coefficients, columns=[f"σ²[{c}]" if c != RESIDUAL else "σ²" for c in self.components])
        frame.insert(0, "source", list(self.rows))
        frame.insert(1, "random", list(self.random_rows))
        frame["fixed effect"] = list(self.fixed)
        frame["expected mean square"] = [self.expression(r) for r in self.rows]
        return result_frame(frame)

    @html_repr
    def _repr_html_(self) -> str:
        return html_table(self.to_frame()[["source", "random", "expected mean square"]],
                          f"Expected mean squares ({self.method})", ())


@dataclass(frozen=True, kw_only=True)
class ErrorTerm:
    """The denominator of one F test: mean squares combined with coefficients.

    ``parts`` are (row, coefficient); ``df`` is the row's df for a single mean square,
    Satterthwaite's approximation for a synthesized one; ``exact`` is False when no
    combination reproduces the null expectation exactly (the test is approximate).
    """

    parts: tuple[tuple[str, float], ...]
    mean_sq: float | None
    df: float | None
    synthesized: bool
    exact: bool = True

    @property
    def label(self) -> str:
        return _label(self.parts)


@lru_cache(maxsize=256)
def _label(parts: tuple[tuple[str, float], ...]) -> str:
    """``MS_A + MS_B - MS_AB`` written with the rows' names (kept: a layout's error terms recur)."""
    if not parts:
        return "none"
    out = ""
    for i, (name, c) in enumerate(parts):
        sign = "−" if c < 0 else "+"
        mag = abs(c)
        piece = name if abs(mag - 1) < 1e-9 else f"{show_coefficient(mag)}·{name}"
        out += (piece if i == 0 and c > 0 else (f"{sign}{piece}" if i == 0 else f" {sign} {piece}"))
    return out


def _combos(cell_levels: np.ndarray, idx: Sequence[int]) -> tuple[np.ndarray, int]:
    code = np.unique(cell_levels[:, list(idx)], axis=0, return_inverse=True)[1].reshape(-1)
    return code, int(code.max()) + 1 if code.size else 0


def _basis(xw: np.ndarray, cols: np.ndarray, cache: dict[tuple[int, ...], np.ndarray]) -> np.ndarray:
    key = tuple(int(c) for c in cols)
    if key not in cache:
        cache[key] = np.linalg.qr(xw[:, cols])[0]
    return cache[key]


def random_indicators(
    fit: CellFit, spec: ModelSpec, cell_levels: np.ndarray, columns: Sequence[str]
) -> list[tuple[Term, np.ndarray]]:
    """Each random term of ``fit`` (most columns first) with its cells x level-combinations indicator matrix."""
    nesting = fit.design.nesting
    pos = {c: i for i, c in enumerate(columns)}
    terms = sorted((t for t in fit.terms if is_random(t, spec)), key=lambda t: -len(term_columns(t, nesting)))
    out = []
    for u in terms:
        code, k = _combos(cell_levels, [pos[c] for c in sorted(term_columns(u, nesting), key=lambda c: pos[c])])
        z = np.zeros((code.size, k))
        z[np.arange(code.size), code] = 1.0
        out.append((u, z))
    return out


def complete_balanced(fit: CellFit, cell_levels: np.ndarray, columns: Sequence[str]) -> bool:
    """True for a complete, equally replicated layout with a hierarchical term list.

    Every cell holds the same count; every crossed column has all its levels with every
    combination of the others, every nested column the same number of levels under each
    combination of its parents (so the cells number the product of those counts); and
    every term's marginal terms are in the model. Then the classic E(MS) rules hold.
    """
    n = fit.stats.n
    if n.size == 0 or not bool(np.all(n == n[0])):
        return False
    nesting = fit.design.nesting or {}
    pos = {c: i for i, c in enumerate(columns)}
    expected = 1
    for c in columns:
        if c in nesting:
            parents = [pos[p] for p in nesting[c]]
            pairs = np.unique(cell_levels[:, parents + [pos[c]]], axis=0)
            _, per = np.unique(pairs[:, :-1], axis=0, return_counts=True)
            if not bool(np.all(per == per[0])):
                return False
            expected *= int(per[0])
        else:
            expected *= int(np.unique(cell_levels[:, pos[c]]).size)
    if expected != n.size:
        return False
    present = {frozenset(t) for t in fit.terms}
    for t in fit.terms:
        for k in range(1, len(t)):
            for sub in combinations(t, k):
                crosses_parent = any(p in sub for c in sub for p in nesting.get(c, ()))
                if not crosses_parent and frozenset(sub) not in present:
                    return False
    return True


def expected_mean_squares(
    fit: CellFit, spec: ModelSpec, cell_levels: np.ndarray, columns: Sequence[str], ss_type: str,
    *, synthesis_only: bool = False, indicators: list[tuple[Term, np.ndarray]] | None = None,
) -> ExpectedMeanSquares:
    """E(MS) of every term and the residual of ``fit`` for the ``ss_type`` sums of squares.

    Complete balanced layouts (:func:`complete_balanced`) get the exact counts; any other
    layout Hartley's synthesis. ``synthesis_only`` forces the synthesis (to check one
    against the other); ``indicators`` reuses :func:`random_indicators`.
    """
    nesting = fit.design.nesting
    # components from the most specific (most columns) to the least, as E(MS) are usually written
    if indicators is None:
        indicators = random_indicators(fit, spec, cell_levels, columns)
    random_terms = [u for u, _ in indicators]
    n_c = fit.stats.n.astype(float)
    n = float(n_c.sum())
    rows = [fit.name(t) for t in fit.terms] + [RESIDUAL]
    comps = [fit.name(u) for u in random_terms] + [RESIDUAL]
    fixed = tuple(not is_random(t, spec) for t in fit.terms) + (False,)
    random_rows = tuple(is_random(t, spec) for t in fit.terms) + (True,)
    coef = np.zeros((len(rows), len(comps)))
    coef[:, -1] = 1.0
    if not synthesis_only and complete_balanced(fit, cell_levels, columns):
        for i, t in enumerate(fit.terms):
            cols_t = term_columns(t, nesting)
            for j, (u, z) in enumerate(indicators):
                if cols_t <= term_columns(u, nesting):
                    coef[i, j] = n / z.shape[1]
        return ExpectedMeanSquares(rows=tuple(rows), components=tuple(comps), coefficients=coef, fixed=fixed,
                                   random_rows=random_rows, method="balanced data: exact counts", ss_type=ss_type)
    w = np.sqrt(n_c)
    xw = w[:, None] * fit.design.matrix
    b_mats = [w[:, None] * z for _, z in indicators]
    comparisons = model_comparisons(fit.terms, fit.sequence, nesting)[ss_type]
    cache: dict[tuple[int, ...], np.ndarray] = fit.bases if fit.bases is not None else {}
    for i, t in enumerate(fit.terms):
        big, small = comparisons[t]
        qb = _basis(xw, fit.design.columns_of(big), cache)
        qs = _basis(xw, fit.design.columns_of(small), cache)
        df = fit.df[ss_type][t]
        for j, b in enumerate(b_mats):
            coef[i, j] = (np.sum((qb.T @ b) ** 2) - np.sum((qs.T @ b) ** 2)) / df
    q_full = _basis(xw, np.arange(fit.design.n_params), cache)
    for j, b in enumerate(b_mats):
        resid_b = b - q_full @ (q_full.T @ b)
        coef[-1, j] = float(np.sum(resid_b**2)) / fit.df_resid
    return ExpectedMeanSquares(rows=tuple(rows), components=tuple(comps), coefficients=coef, fixed=fixed,
                               random_rows=random_rows, method="unbalanced data: Hartley's synthesis",
                               ss_type=ss_type)


_Denominators = tuple[tuple[tuple[tuple[str, float], ...], bool], ...]
_DENOMINATORS: dict[tuple[object, ...], _Denominators] = {}
_BY_TABLE: "weakref.WeakKeyDictionary[ExpectedMeanSquares, _Denominators]" = weakref.WeakKeyDictionary()


def _denominators(ems: ExpectedMeanSquares) -> tuple[tuple[tuple[tuple[str, float], ...], bool], ...]:
    """For each term row: the (row, coefficient) parts of its error term and whether they match exactly.

    Depends on the E(MS) coefficients only, so it is memoised (a balanced design keeps its
    coefficients from one edit to the next).
    """
    known = _BY_TABLE.get(ems)
    if known is not None:
        return known
    coef = ems.coefficients
    key = (ems.rows, ems.components, ems.random_rows, coef.shape, coef.tobytes())
    if key in _DENOMINATORS:
        _BY_TABLE[ems] = _DENOMINATORS[key]
        return _DENOMINATORS[key]
    comp_index = {c: j for j, c in enumerate(ems.components)}
    out = []
    for i, row in enumerate(ems.rows[:-1]):
        target = coef[i].copy()
        if ems.random_rows[i]:
            target[comp_index[row]] = 0.0
        support = {ems.components[j] for j in np.flatnonzero(np.abs(target) > 1e-12)}
        cands = [k for k, r in enumerate(ems.rows) if k != i and (r == RESIDUAL or (ems.random_rows[k] and r in support))]
        a = coef[cands].T  # components x candidates
        c, *_ = np.linalg.lstsq(a, target, rcond=None)
        fit_err = float(np.max(np.abs(a @ c - target))) if target.size else 0.0
        exact = fit_err <= 1e-8 * max(1.0, float(np.max(np.abs(target))))
        parts = tuple((ems.rows[k], float(cc)) for k, cc in zip(cands, c) if abs(cc) > 1e-10)
        parts = tuple((name, float(np.round(cc)) if abs(cc - np.round(cc)) < 1e-9 else cc) for name, cc in parts)
        out.append((parts, exact))
    if len(_DENOMINATORS) > 256:
        _DENOMINATORS.clear()
    _DENOMINATORS[key] = _BY_TABLE[ems] = tuple(out)
    return _DENOMINATORS[key]


def error_terms(
    ems: ExpectedMeanSquares, mean_sq: dict[str, float], df: dict[str, float]
) -> dict[str, ErrorTerm]:
    """The denominator of each row's F test (see module docstring)."""
    out: dict[str, ErrorTerm] = {}
    for row, (parts, exact) in zip(ems.rows[:-1], _denominators(ems)):
        if not parts:
            out[row] = ErrorTerm(parts=(), mean_sq=None, df=None, synthesized=False, exact=False)
            continue
        value = float(sum(cc * mean_sq[name] for name, cc in parts))
        single = len(parts) == 1 and parts[0][1] == 1.0
        if single:
            dfe: float | None = float(df[parts[0][0]])
        else:
            denom = sum((cc * mean_sq[name]) ** 2 / df[name] for name, cc in parts)
            dfe = value**2 / denom if value > 0 and denom > 0 else None
        out[row] = ErrorTerm(parts=parts, mean_sq=value, df=dfe, synthesized=not single, exact=exact)
    return out
