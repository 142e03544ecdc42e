"""Repeated measures: sphericity, epsilon corrections and the multivariate tests.

From the subjects x within-cells table of means (each subject observed at every
combination of the within factors), for every within term W with more than one df:

* the orthonormal within-subject transformation M_W (Kronecker product of normalised
  Helmert contrasts for the factors in W and normalised averages for the others) and
  the pooled between-group covariance S = M_W' Sigma M_W on nu = N - g df;
* Mauchly's (1940) test of sphericity: W = det S / (tr S / p)^p,
  chi^2 = -nu f ln W with f = 1 - (2p^2 + p + 2) / (6 p nu), on r = p(p+1)/2 - 1 df; the
  p-value carries Box's (1949) second-order term (Anderson 2003, sec. 10.7):
  P = P(chi^2_r > x) + w2 (P(chi^2_{r+4} > x) - P(chi^2_r > x)),
  w2 = (p+2)(p-1)(p-2)(2p^3 + 6p^2 + 3p + 2) / (288 (nu p f)^2); the first-order p is kept too;
* Greenhouse-Geisser (1959) epsilon tr(S)^2 / (p tr(S^2)); Huynh-Feldt (1976)
  epsilon (N p e - 2) / (p (N - g - p e)) and Lecoutre's (1991) correction of it
  ((N - g + 1) in place of N), both capped at 1;
* the univariate F of W and of W x each between term with both df multiplied by an
  epsilon (the corrected p-values);
* the multivariate tests (optional): on the transformed scores Z = Y M_W, the linear
  model Z = X B + E over the between-subject design (sum-to-zero coding); W is the
  intercept, W x B the between term B. Wilks' lambda with Rao's F, Pillai's trace,
  Hotelling-Lawley trace (McKeon's 1974 F approximation, Pillai and Samson's when the
  error df are small) and Roy's largest root (an upper bound) with their F
  approximations (exact when s = 1).

References
----------
Mauchly, J. W. (1940). Ann. Math. Stat. 11, 204-209.
Greenhouse, S. W. and Geisser, S. (1959). Psychometrika 24, 95-112.
Huynh, H. and Feldt, L. S. (1976). J. Educ. Stat. 1, 69-82.
Lecoutre, B. (1991). A correction for the epsilon-tilde approximate test in repeated
measures designs with two or more independent groups. J. Educ. Stat. 16, 371-372.
Box, G. E. P. (1949). A general distribution theory for a class of likelihood criteria.
Biometrika 36, 317-346.
Anderson, T. W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed.,
sec. 10.7 (from memory).
McKeon, J. J. (1974). F approximations to the distribution of Hotelling's T^2_0.
Biometrika 61, 381-383.
Rencher, A. C. (2002). Methods of Multivariate Analysis, 2nd ed., ch. 6 (the four
multivariate statistics and their F approximations).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import combinations
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
from scipy import special

from ..engine.distributions import f_sf
from ..engine.errors import ExplorerError
from ..engine.tables import html_table
from ..rendering import html_repr

if TYPE_CHECKING:
    from ..engine.results import Results
    from ..engine.spec import ModelSpec
    from ..engine.tables import AnovaTable, TermRow

__all__ = ["MultivariateTest", "RepeatedMeasures", "SphericityTest", "repeated_measures"]


@dataclass(frozen=True, kw_only=True)
class SphericityTest:
    """Sphericity of one within term and the epsilon-corrected F tests that depend on it."""

    term: str
    df: int
    mauchly_w: float | None
    chi_square: float | None
    chi_df: int
    pvalue: float | None
    pvalue_first_order: float | None
    greenhouse_geisser: float
    huynh_feldt: float
    huynh_feldt_lecoutre: float
    lower_bound: float
    corrected: tuple[tuple[str, float, float, float | None, float | None], ...] = ()
    # (source, F, df numerator, p Greenhouse-Geisser, p Huynh-Feldt)


@dataclass(frozen=True, kw_only=True)
class MultivariateTest:
    """The four multivariate statistics for one within effect (or within x between)."""

    source: str
    hypothesis_df: int
    error_df: int
    statistics: tuple[tuple[str, float, float, float, float, float | None], ...]
    # (name, value, F, df1, df2, p)


@dataclass(frozen=True, kw_only=True, eq=False)
class RepeatedMeasures:
    """Sphericity tests, epsilons, corrected p-values and (optionally) multivariate tests."""

    subjects: int
    groups: int
    sphericity: tuple[SphericityTest, ...]
    multivariate: tuple[MultivariateTest, ...] = ()
    notes: tuple[str, ...] = field(default=())

    def sphericity_frame(self) -> pd.DataFrame:
        return pd.DataFrame([{
            "within term": s.term, "df": s.df, "Mauchly W": s.mauchly_w, "chi-square": s.chi_square,
            "chi-square df": s.chi_df, "p-value": s.pvalue, "Greenhouse-Geisser epsilon": s.greenhouse_geisser,
            "Huynh-Feldt epsilon": s.huynh_feldt, "Huynh-Feldt epsilon (Lecoutre)": s.huynh_feldt_lecoutre,
            "lower bound": s.lower_bound,
        } for s in self.sphericity])

    def corrected_frame(self) -> pd.DataFrame:
        rows = []
        for s in self.sphericity:
            for source, F, df1, p_gg, p_hf in s.corrected:
                rows.append({"source": source, "F": F, "df": df1, "epsilon (GG)": s.greenhouse_geisser,
                             "p-value (GG)": p_gg, "epsilon (HF)": s.huynh_feldt, "p-value (HF)": p_hf})
        return pd.DataFrame(rows)

    def multivariate_frame(self) -> pd.DataFrame:
        rows = []
        for m in self.multivariate:
            for name, value, F, df1, df2, p in m.statistics:
                rows.append({"source": m.source, "statistic": name, "value": value, "F": F,
                             "df numerator": df1, "df denominator": df2, "p-value": p})
        return pd.DataFrame(rows)

    @html_repr
    def _repr_html_(self) -> str:
        parts = [html_table(self.sphericity_frame(), "Sphericity of the within-subject terms (Mauchly)", self.notes),
                 html_table(self.corrected_frame(), "Within-subject F tests with epsilon-corrected df")]
        if self.multivariate:
            parts.append(html_table(self.multivariate_frame(), "Multivariate tests of the within-subject effects"))
        return "".join(parts)


def _helmert(k: int) -> np.ndarray:
    """k x (k-1) orthonormal contrasts (normalised Helmert)."""
    c = np.zeros((k, k - 1))
    for j in range(1, k):
        c[:j, j - 1] = 1.0
        c[j, j - 1] = -float(j)
        c[:, j - 1] /= np.sqrt(j * (j + 1))
    return c


@dataclass(frozen=True, kw_only=True, eq=False)
class _SubjectTable:
    """Each subject's cell means over the within cells (``y``, subjects x cells), its between-subject
    group (``code`` into ``groups``, tuples of between labels), the within factors with their level
    counts, and the subject labels."""

    y: np.ndarray
    code: np.ndarray
    within: list[str]
    sizes: list[int]
    groups: list[tuple[str, ...]]
    subjects: list[str]


def _subject_table(results: Results) -> _SubjectTable:
    """The subjects-by-within-cells table of ``results`` (see :class:`_SubjectTable`)."""
    spec = results.spec
    cells = results.cells
    if cells is None or spec.subject is None:
        raise ExplorerError("repeated-measures tests need a study with subject= and within= factors")
    frame = cells.to_frame()
    frame["n"] = cells.n
    within = list(spec.within)
    between = list(spec.between)
    if not within:
        raise ExplorerError("repeated-measures tests need within= factors (levels measured on every subject)")
    wide = frame.pivot_table(index=[spec.subject], columns=within, values="mean", aggfunc="mean", observed=True)
    if wide.isna().any().any():
        missing = wide.index[wide.isna().any(axis=1)].tolist()
        raise ExplorerError(
            f"subject(s) {missing[:6]} lack some combination of {', '.join(within)}; sphericity, the epsilons and "
            "the multivariate tests need every subject at every combination (the univariate table above does not)"
        )
    counts = frame.pivot_table(index=[spec.subject], columns=within, values="n", aggfunc="sum", observed=True)
    if counts.to_numpy().min() != counts.to_numpy().max():
        pass  # replicates are averaged per subject and cell (each subject's cell mean)
    levels = [list(dict.fromkeys(frame[w])) for w in within]
    wide = wide.reindex(columns=pd.MultiIndex.from_product(levels, names=within) if len(within) > 1 else levels[0])
    if between:
        grp = frame.groupby(spec.subject, observed=True)[between].first().reindex(wide.index)
        labels = [tuple(str(v) for v in row) for row in grp.itertuples(index=False)]
    else:
        labels = [()] * len(wide)
    uniq = list(dict.fromkeys(labels))
    code = np.array([uniq.index(lb) for lb in labels])
    return _SubjectTable(y=wide.to_numpy(float), code=code, within=within, sizes=[len(lv) for lv in levels],
                         groups=uniq, subjects=[str(s) for s in wide.index])


def _transform(within: list[str], sizes: list[int], term: tuple[str, ...]) -> np.ndarray:
    m = np.ones((1, 1))
    for w, k in zip(within, sizes):
        part = _helmert(k) if w in term else np.full((k, 1), 1.0 / np.sqrt(k))
        m = np.kron(m, part)
    return m


def _between_design(
    uniq: list[tuple[str, ...]], code: np.ndarray, between: list[str]
) -> tuple[np.ndarray, dict[tuple[str, ...], slice]]:
    """Sum-to-zero full factorial design of the between factors at subject level; slices per between term."""
    n = code.size
    cols = [np.ones((n, 1))]
    slices: dict[tuple[str, ...], slice] = {}
    start = 1
    per_factor = []
    for j, _factor in enumerate(between):
        labels = [u[j] for u in uniq]
        levels = list(dict.fromkeys(labels))
        k = len(levels)
        c = np.zeros((k, k - 1))
        c[: k - 1] = np.eye(k - 1)
        c[k - 1] = -1.0
        lv = np.array([levels.index(labels[g]) for g in code])
        per_factor.append(c[lv])
    for order in range(1, len(between) + 1):
        for combo in combinations(range(len(between)), order):
            block = np.ones((n, 1))
            for j in combo:
                block = (block[:, :, None] * per_factor[j][:, None, :]).reshape(n, -1)
            slices[tuple(between[j] for j in combo)] = slice(start, start + block.shape[1])
            start += block.shape[1]
            cols.append(block)
    return np.hstack(cols), slices


def _multivariate(z: np.ndarray, x: np.ndarray, rows: slice, source: str) -> MultivariateTest | None:
    n, p = z.shape
    xtx_inv = np.linalg.pinv(x.T @ x)
    b = xtx_inv @ x.T @ z
    resid = z - x @ b
    e = resid.T @ resid
    dfe = n - np.linalg.matrix_rank(x)
    idx = np.arange(rows.start, rows.stop)
    l_mat = np.zeros((idx.size, x.shape[1]))
    l_mat[np.arange(idx.size), idx] = 1.0
    lb = l_mat @ b
    h = lb.T @ np.linalg.solve(l_mat @ xtx_inv @ l_mat.T, lb)
    q = idx.size
    if dfe < p:
        return None
    eig = np.clip(np.real(np.linalg.eigvals(np.linalg.solve(e, h))), 0.0, None)
    s = min(p, q)
    m = (abs(p - q) - 1) / 2.0
    nn = (dfe - p - 1) / 2.0
    stats_out = []
    # Wilks' lambda, Rao's F
    wilks = float(np.prod(1.0 / (1.0 + eig)))
    if p * p + q * q - 5 > 0:
        t = np.sqrt((p * p * q * q - 4) / (p * p + q * q - 5))
    else:
        t = 1.0
    df1 = p * q
    df2 = (dfe - (p - q + 1) / 2.0) * t - (p * q - 2) / 2.0
    lam_t = wilks ** (1.0 / t)
    f_w = (1 - lam_t) / lam_t * df2 / df1
    stats_out.append(("Wilks' lambda", wilks, float(f_w), float(df1), float(df2), float(f_sf(f_w, df1, df2))))
    pillai = float(np.sum(eig / (1.0 + eig)))
    df1p, df2p = s * (2 * m + s + 1), s * (2 * nn + s + 1)
    f_p = (pillai / (s - pillai)) * (2 * nn + s + 1) / (2 * m + s + 1)
    stats_out.append(("Pillai's trace", pillai, float(f_p), float(df1p), float(df2p), float(f_sf(f_p, df1p, df2p))))
    hl = float(np.sum(eig))
    if nn > 1:  # McKeon (1974)
        b_ = (p + 2 * nn) * (q + 2 * nn) / (2 * (2 * nn + 1) * (nn - 1))
        df1h, df2h = float(p * q), 4 + (p * q + 2) / (b_ - 1)
        c_ = (df2h - 2) / (2 * nn)
        f_h = hl / c_ * df2h / df1h
    else:  # Pillai and Samson (1959)
        df1h, df2h = s * (2 * m + s + 1), 2 * (s * nn + 1)
        f_h = hl * df2h / (s * s * (2 * m + s + 1))
    stats_out.append(("Hotelling-Lawley trace", hl, float(f_h), float(df1h), float(df2h),
                      float(f_sf(f_h, df1h, df2h))))
    roy = float(np.max(eig)) if eig.size else 0.0
    r = max(p, q)
    df1r, df2r = float(r), float(dfe - r + q)
    f_r = roy * df2r / df1r
    stats_out.append(("Roy's largest root", roy, float(f_r), df1r, df2r, float(f_sf(f_r, df1r, df2r))))
    return MultivariateTest(source=source, hypothesis_df=q, error_df=int(dfe), statistics=tuple(stats_out))


def repeated_measures(results: Results, *, multivariate: bool = True) -> RepeatedMeasures:
    """Sphericity, epsilons, epsilon-corrected p-values and multivariate tests of a repeated-measures study.

    Parameters
    ----------
    results : Results
        The results of a study with ``subject=`` and ``within=``; the within-subject F
        statistics are read from its partition (each against its subject-by-within
        error term).
    multivariate : bool, default True
        Whether to add the four multivariate tests of each within term.

    Returns
    -------
    RepeatedMeasures
        For each within term Mauchly's W and its test, the Greenhouse-Geisser,
        Huynh-Feldt (and Lecoutre-corrected) epsilons with the corrected p-values, and
        the multivariate tests.

    References
    ----------
    Mauchly, J. W. (1940). Ann. Math. Stat. 11, 204-209.
    Greenhouse, S. W. and Geisser, S. (1959). Psychometrika 24, 95-112.
    Huynh, H. and Feldt, L. S. (1976). J. Educ. Stat. 1, 69-82.
    Rencher, A. C. (2002). Methods of Multivariate Analysis, 2nd ed., ch. 6.

    Examples
    --------
    >>> import explorer as ex
    >>> study = ex.Study(ex.example_data("cure"), "hardness", "time", subject="panel", within="time")
    >>> rm = ex.stats.repeated_measures(study.results)
    >>> test = rm.sphericity[0]
    >>> test.term, round(test.mauchly_w, 3), round(test.greenhouse_geisser, 3)
    ('time', 0.83, 0.854)
    """
    spec = results.spec
    subjects = _subject_table(results)
    y, code, within, sizes, uniq = subjects.y, subjects.code, subjects.within, subjects.sizes, subjects.groups
    n_sub, g = y.shape[0], len(uniq)
    between = list(spec.between)
    nu = n_sub - g
    if nu < 1:
        raise ExplorerError("repeated-measures tests need more subjects than between-subject groups")
    # pooled within-group covariance of the cell means
    centred = y - np.vstack([y[code == k].mean(axis=0) for k in range(g)])[code]
    sigma = centred.T @ centred / nu
    x_b, slices = _between_design(uniq, code, between)
    table = results.partition
    tests, mv = [], []
    notes: list[str] = []
    for order in range(1, len(within) + 1):
        for term in combinations(within, order):
            m = _transform(within, sizes, term)
            p = m.shape[1]
            s = m.T @ sigma @ m
            tr = float(np.trace(s))
            gg = tr * tr / (p * float(np.trace(s @ s))) if tr > 0 else 1.0
            hf_raw = (n_sub * p * gg - 2) / (p * (nu - p * gg))
            hf_lec = ((nu + 1) * p * gg - 2) / (p * (nu - p * gg))
            hf, hf_l = min(hf_raw, 1.0), min(hf_lec, 1.0)
            chi_df = p * (p + 1) // 2 - 1
            w, chi, pval, pval1 = _mauchly(s, p, nu, tr)
            if p > 1 and nu < p:
                notes.append(f"Mauchly's test of {' × '.join(term)} needs at least {p} df for the pooled covariance ({nu} here).")
            corrected = []
            base_name = " × ".join(term)
            sources = [base_name] + [" × ".join((*b, *term)) for b in slices]
            for src in sources:
                row = _row(table, src, spec)
                if row is None or row.statistic is None:
                    continue
                df1, df2 = float(row.df), float(row.df_error or 0)
                p_gg = float(f_sf(row.statistic, df1 * gg, df2 * gg))
                p_hf = float(f_sf(row.statistic, df1 * hf, df2 * hf))
                corrected.append((row.source, float(row.statistic), df1, p_gg, p_hf))
            tests.append(SphericityTest(
                term=base_name, df=p, mauchly_w=w, chi_square=chi, chi_df=chi_df, pvalue=pval, pvalue_first_order=pval1,
                greenhouse_geisser=gg, huynh_feldt=hf, huynh_feldt_lecoutre=hf_l, lower_bound=1.0 / p,
                corrected=tuple(corrected),
            ))
            if multivariate:
                z = y @ m
                for label, sl in [(base_name, slice(0, 1))] + [(" × ".join((*b, *term)), s_) for b, s_ in slices.items()]:
                    res = _multivariate(z, x_b, sl, label)
                    if res is not None:
                        mv.append(res)
    if any(t.df == 1 for t in tests):
        notes.append("Terms with one df satisfy sphericity trivially (epsilon = 1).")
    notes.append("Huynh-Feldt epsilon as in Huynh & Feldt (1976); the Lecoutre (1991) column corrects it for "
                 "several groups. Both are capped at 1.")
    return RepeatedMeasures(subjects=n_sub, groups=g, sphericity=tuple(tests), multivariate=tuple(mv),
                            notes=tuple(notes))


def _mauchly(s: np.ndarray, p: int, nu: int, tr: float) -> tuple[float | None, float | None, float | None, float | None]:
    """(W, chi-square, p with Box's second-order term, first-order p); W = 1 and no test for p = 1."""
    if p == 1:
        return 1.0, None, None, None
    if nu < p:
        return None, None, None, None
    sign, logdet = np.linalg.slogdet(s)
    if sign <= 0 or tr <= 0:
        return 0.0, None, None, None
    logw = logdet - p * np.log(tr / p)
    f = 1.0 - (2 * p * p + p + 2) / (6.0 * p * nu)
    chi = float(-nu * f * logw)
    r = p * (p + 1) // 2 - 1
    p1 = float(special.chdtrc(r, chi))
    p2 = float(special.chdtrc(r + 4, chi))
    w2 = (p + 2) * (p - 1) * (p - 2) * (2 * p**3 + 6 * p**2 + 3 * p + 2) / (288.0 * (nu * p * f) ** 2)
    return float(np.exp(logw)), chi, p1 + w2 * (p2 - p1), p1


def _row(table: AnovaTable, source: str, spec: ModelSpec) -> TermRow | None:
    """The partition row of a within term, whatever order its factors were written in."""
    wanted = set(source.split(" × "))
    for r in table.rows:
        if set(r.source.split(" × ")) == wanted:
            return r
    return None
