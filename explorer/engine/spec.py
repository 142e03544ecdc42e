"""What to fit: the response, the factors, their roles and how they enter the model."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from .errors import ExplorerError
from .table_checks import column_names
from .transforms import check_transform

__all__ = ["ModelSpec", "ONE_FACTOR_TESTS", "OVERALL_TESTS", "TEST_LABELS", "alpha_or", "check_alpha", "parse_term"]

SSType = Literal["I", "II", "III"]

#: The overall tests a study's decision can be read from: name -> what it is.
OVERALL_TESTS: dict[str, str] = {
    "classic": "classic F (equal variances)",
    "welch": "Welch F (unequal variances)",
    "brown-forsythe": "Brown-Forsythe F* (unequal variances, Mehrotra df)",
    "kruskal": "Kruskal-Wallis H (ranks)",
    "permutation": "permutation F (up to 9999 seeded orderings, sequential)",
}
#: Short names of the overall tests, as a decision states them.
TEST_LABELS: dict[str, str] = {
    "classic": "classic F",
    "welch": "Welch F",
    "brown-forsythe": "Brown-Forsythe F*",
    "kruskal": "Kruskal-Wallis H",
    "permutation": "permutation F",
}
#: Tests defined for one fixed factor without blocks only.
ONE_FACTOR_TESTS = ("welch", "brown-forsythe", "kruskal", "permutation")
VarianceMethod = Literal["auto", "moments", "reml"]
VARIANCE_METHODS = ("auto", "moments", "reml")

#: Separators accepted in a term written as text: ``"A × B"``, ``"A:B"`` or ``"A*B"``.
_TERM_SEPARATORS = ("×", ":", "*")


def parse_term(term: str | Sequence[str], columns: Sequence[str]) -> tuple[str, ...]:
    """A model term as a tuple of column names.

    ``term`` is a tuple/list of column names, one column name, or text that joins
    column names with ``×``, ``:`` or ``*`` (a whole column name is matched first, so a
    column whose name contains a separator is still found).
    """
    if not isinstance(term, str):
        if not isinstance(term, (list, tuple)) or not all(isinstance(t, str) for t in term):
            raise ExplorerError(f"a model term is a column name or a list of column names, not {term!r}; "
                                "e.g. terms=['N', 'P', 'N × P'] or [('N',), ('P',), ('N', 'P')]")
        parts = tuple(term)
    elif term in columns:
        parts = (term,)
    else:
        text = term
        for sep in _TERM_SEPARATORS[1:]:
            text = text.replace(sep, _TERM_SEPARATORS[0])
        parts = tuple(p.strip() for p in text.split(_TERM_SEPARATORS[0]))
    unknown = [p for p in parts if p not in columns]
    if not parts or unknown:
        raise ExplorerError(
            f"model term {term!r} names {unknown or 'no'} column(s) outside the model; "
            f"terms combine the model's columns {list(columns)}"
        )
    if len(set(parts)) != len(parts):
        raise ExplorerError(f"model term {term!r} names a column twice")
    return parts


def check_alpha(alpha: object) -> float:
    """A level at which decisions are read: a number strictly between 0 and 1, else refused."""
    if isinstance(alpha, (bool, np.bool_)) or not isinstance(alpha, (int, float, np.integer, np.floating)):
        raise ExplorerError(f"alpha must be a number between 0 and 1 (e.g. 0.05), not {alpha!r}")
    a = float(alpha)
    if not 0 < a < 1:
        raise ExplorerError(f"alpha must be between 0 and 1, not {alpha!r}")
    return a


def alpha_or(alpha: object, default: float) -> float:
    """``alpha`` checked by :func:`check_alpha`, or ``default`` when it is ``None`` (the spec's level)."""
    return float(default) if alpha is None else check_alpha(alpha)


@dataclass(frozen=True, kw_only=True)
class ModelSpec:
    """Response, factors and their roles, model terms, SS type and alpha.

    Crossed fixed factors (the default): ``interactions=True`` crosses all treatment
    factors (full factorial); ``max_order`` keeps interactions up to that many factors
    (1 = additive); ``terms`` lists the treatment terms explicitly (tuples of column
    names or text such as ``"N × P"``), overriding both. Blocks always enter
    additively and first (no block-by-treatment term unless a term names one).

    Roles beyond crossed fixed factors:

    * ``random``: factors (or blocks) whose levels are a sample of many (operators,
      days, lots); every term that contains one is random.
    * ``nested``: ``{"lot": "supplier"}`` - each level of ``lot`` belongs to one level
      of ``supplier`` (the same label under two suppliers means two different lots);
      the term is shown as ``lot (within supplier)``.
    * ``subject`` with ``within``: repeated measures. ``subject`` names the unit
      measured repeatedly (panel, animal, whole plot); it is random and nested in the
      between-subject factors (``factors`` not listed in ``within``); the subject-by-
      within terms are random and carry the within-subject tests.

    ``alpha`` is the level at which decisions are read and ``test`` the overall test
    they are read from (a key of :data:`OVERALL_TESTS`; the tests other than
    ``"classic"`` compare the levels of one fixed factor, so they need a one-way spec).
    """

    response: str
    factors: tuple[str, ...]
    blocks: tuple[str, ...] = field(default=())
    interactions: bool = True
    ss_type: SSType = "II"
    alpha: float = 0.05
    terms: tuple[tuple[str, ...], ...] | None = None
    max_order: int | None = None
    random: tuple[str, ...] = field(default=())
    nested: tuple[tuple[str, tuple[str, ...]], ...] = field(default=())
    subject: str | None = None
    within: tuple[str, ...] = field(default=())
    variance_method: VarianceMethod = "auto"
    test: str = "classic"
    transform: str | float = "none"
    covariates: tuple[str, ...] = field(default=())
    units: str = ""  # units of the response (e.g. "µm"), for axis titles and table headings only

    def __post_init__(self) -> None:
        setf = object.__setattr__
        if not isinstance(self.units, str):
            raise ExplorerError(f"units must be text such as 'µm' or 'mg/L', not {self.units!r}")
        units = self.units.strip()
        if len(units) > 24 or any(ord(ch) < 32 or ch in "<>&\"'" for ch in units):
            raise ExplorerError(f"units {self.units!r}: give a short unit such as 'µm' or 'mg/L' "
                                "(at most 24 characters, no markup or control characters)")
        setf(self, "units", units)
        setf(self, "response", column_names(self.response, "response")[0])
        for name in ("factors", "blocks", "random", "within", "covariates"):
            value = getattr(self, name)
            setf(self, name, column_names(value, name) if isinstance(value, str) or value else ())
        ss = str(self.ss_type).upper()
        ss = {"1": "I", "2": "II", "3": "III"}.get(ss, ss)
        if ss not in ("I", "II", "III"):
            raise ExplorerError(f"ss_type must be 'I', 'II' or 'III' (or 1, 2, 3), not {self.ss_type!r}")
        setf(self, "ss_type", ss)
        setf(self, "alpha", check_alpha(self.alpha))
        if not isinstance(self.interactions, (bool, np.bool_)):
            raise ExplorerError(f"interactions must be True or False, not {self.interactions!r}")
        setf(self, "interactions", bool(self.interactions))
        setf(self, "nested", _normalise_nested(self.nested))
        if self.variance_method not in VARIANCE_METHODS:
            raise ExplorerError(f"variance_method must be one of {VARIANCE_METHODS}, not {self.variance_method!r}")
        self._check_roles()
        if self.max_order is not None:
            if isinstance(self.max_order, bool) or int(self.max_order) != self.max_order or self.max_order < 1:
                raise ExplorerError(f"max_order must be a whole number of 1 or more, not {self.max_order!r}")
            setf(self, "max_order", int(self.max_order))
        if self.terms is not None:
            if self.max_order is not None:
                raise ExplorerError("give either terms or max_order, not both")
            if isinstance(self.terms, str):
                raise ExplorerError("terms is a list of terms, e.g. ['N', 'P', 'N × P']")
            parsed = tuple(parse_term(t, self.columns) for t in self.terms)
            self._check_terms(parsed)
            setf(self, "terms", parsed)
        _check_covariates(self)
        _check_test(self)
        setf(self, "transform", check_transform(self.transform))

    # ----------------------------------------------------------------- validation
    def _check_roles(self) -> None:
        cols = self.factors + self.blocks
        if len(set(cols)) != len(cols):
            raise ExplorerError(f"a column is listed twice among factors and blocks: {list(cols)}")
        if self.subject is not None:
            if not isinstance(self.subject, str) or not self.subject:
                raise ExplorerError(f"subject names one column, not {self.subject!r}")
            if self.subject in cols:
                raise ExplorerError(
                    f"subject {self.subject!r} is also listed as a factor or block; the subject column is "
                    "given only as subject="
                )
        elif self.within:
            raise ExplorerError("within factors need subject= (the column that names the unit measured repeatedly)")
        bad_within = [w for w in self.within if w not in self.factors]
        if bad_within:
            raise ExplorerError(f"within factors {bad_within} are not among the factors {list(self.factors)}")
        all_cols = self.columns
        bad_random = [r for r in self.random if r not in all_cols]
        if bad_random:
            raise ExplorerError(f"random {bad_random} are not among the model's columns {list(all_cols)}")
        if self.subject is not None and self.subject in self.random:
            raise ExplorerError(f"subject {self.subject!r} is random already; leave it out of random=")
        bad_within_random = [w for w in self.within if w in self.random]
        if bad_within_random:
            raise ExplorerError(f"within factors {bad_within_random} cannot also be random")
        for inner, parents in self.nested:
            for c in (inner, *parents):
                if c not in all_cols:
                    raise ExplorerError(f"nested names {c!r}, which is not among the model's columns {list(all_cols)}")
            if inner in parents:
                raise ExplorerError(f"{inner!r} cannot be nested in itself")
            if inner == self.subject:
                raise ExplorerError(
                    f"the subject {inner!r} is nested in the between-subject factors automatically; "
                    "leave it out of nested="
                )
        inners = [i for i, _ in self.nested]
        if len(set(inners)) != len(inners):
            raise ExplorerError(f"a column is nested twice: {inners}; give all its parents in one entry")
        # no cycles: follow parents
        graph = dict(self.nested)
        for start in graph:
            seen = {start}
            stack = list(graph[start])
            while stack:
                c = stack.pop()
                if c in seen:
                    raise ExplorerError(f"nested relations form a cycle through {c!r}")
                seen.add(c)
                stack.extend(graph.get(c, ()))

    def _check_terms(self, terms: tuple[tuple[str, ...], ...]) -> None:
        seen: set[frozenset[str]] = set()
        for t in terms:
            key = frozenset(t)
            if key in seen:
                raise ExplorerError(f"model term {' × '.join(t)!r} is listed twice")
            seen.add(key)
            if self.subject is not None and self.subject in t:
                raise ExplorerError(
                    f"term {' × '.join(t)!r} names the subject; the subject terms are added automatically"
                )
            nesting = self.nesting
            for c in t:
                clash = [p for p in nesting.get(c, ()) if p in t]
                if clash:
                    raise ExplorerError(
                        f"term {' × '.join(t)!r} crosses {c!r} with {clash[0]!r}, in which it is nested; "
                        f"write {c!r} alone (it is shown as '{c} (within {clash[0]})')"
                    )
        missing = [f for f in self.factors if (f,) not in terms]
        if missing:
            raise ExplorerError(
                f"every factor needs its main effect among the terms; missing: {missing} "
                "(a factor without its own term belongs out of factors=)"
            )

    # ----------------------------------------------------------------- derived
    @property
    def columns(self) -> tuple[str, ...]:
        """Every grouping column: treatment factors, blocks, then the subject."""
        extra = (self.subject,) if self.subject is not None else ()
        return self.factors + self.blocks + extra

    @property
    def between(self) -> tuple[str, ...]:
        """Factors that do not vary within a subject (all factors when there is no subject)."""
        return tuple(f for f in self.factors if f not in self.within)

    @property
    def nesting(self) -> dict[str, tuple[str, ...]]:
        """Each nested column and the columns it is nested in (the subject included)."""
        out = {inner: parents for inner, parents in self.nested}
        if self.subject is not None:
            out[self.subject] = self.between
        return out

    @property
    def is_mixed(self) -> bool:
        """True when the model has random factors, nested factors or subjects."""
        return bool(self.random or self.nested or self.subject is not None)

    @property
    def random_columns(self) -> tuple[str, ...]:
        """Columns whose levels are a sample (``random`` plus the subject)."""
        return self.random + ((self.subject,) if self.subject is not None else ())

    @property
    def is_oneway(self) -> bool:
        return (len(self.factors) == 1 and not self.blocks and not self.is_mixed and self.terms is None
                and not self.covariates)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "response": self.response,
            "factors": list(self.factors),
            "blocks": list(self.blocks),
            "interactions": self.interactions,
            "ss_type": self.ss_type,
            "alpha": self.alpha,
        }
        # New roles are written only when used, so files of plain designs stay as they were.
        if self.terms is not None:
            d["terms"] = [list(t) for t in self.terms]
        if self.max_order is not None:
            d["max_order"] = self.max_order
        if self.random:
            d["random"] = list(self.random)
        if self.nested:
            d["nested"] = {inner: list(parents) for inner, parents in self.nested}
        if self.subject is not None:
            d["subject"] = self.subject
            d["within"] = list(self.within)
        if self.variance_method != "auto":
            d["variance_method"] = self.variance_method
        if self.test != "classic":
            d["test"] = self.test
        if self.transform != "none":
            d["transform"] = self.transform
        if self.covariates:
            d["covariates"] = list(self.covariates)
        if self.units:
            d["units"] = self.units
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "ModelSpec":
        terms = d.get("terms")
        return cls(
            response=d["response"],
            factors=tuple(d["factors"]),
            blocks=tuple(d.get("blocks", ())),
            interactions=bool(d.get("interactions", True)),
            ss_type=d.get("ss_type", "II"),
            alpha=float(d.get("alpha", 0.05)),
            terms=None if terms is None else tuple(terms),
            max_order=d.get("max_order"),
            random=tuple(d.get("random", ())),
            nested=d.get("nested", ()),
            subject=d.get("subject"),
            within=tuple(d.get("within", ())),
            test=d.get("test", "classic"),
            transform=d.get("transform", "none"),
            covariates=tuple(d.get("covariates", ())),
            units=d.get("units", ""),
            variance_method=d.get("variance_method", "auto"),
        )


def _normalise_nested(nested: Any) -> tuple[tuple[str, tuple[str, ...]], ...]:
    """``{"lot": "supplier"}`` or pairs -> ``(("lot", ("supplier",)),)``."""
    if not nested:
        return ()
    if isinstance(nested, Mapping):
        items = list(nested.items())
    else:
        try:
            items = [tuple(x) for x in nested]
        except TypeError:
            raise ExplorerError(f"nested is a mapping such as {{'lot': 'supplier'}}, not {nested!r}") from None
    out = []
    for item in items:
        if len(item) != 2 or not isinstance(item[0], str):
            raise ExplorerError(f"nested is a mapping such as {{'lot': 'supplier'}}, not {nested!r}")
        inner, parents = item
        parents_t = (parents,) if isinstance(parents, str) else tuple(str(p) for p in parents)
        if not parents_t:
            raise ExplorerError(f"{inner!r} is nested in nothing; give the column it is nested in")
        out.append((inner, parents_t))
    return tuple(out)


def _check_covariates(spec: ModelSpec) -> None:
    """Covariates are numeric columns of their own: not the response, not a grouping column; fixed models only."""
    cov = spec.covariates
    if len(set(cov)) != len(cov):
        raise ExplorerError(f"a covariate is listed twice: {list(cov)}")
    clash = [c for c in cov if c == spec.response or c in spec.columns]
    if clash:
        raise ExplorerError(f"{clash[0]!r} cannot be both a covariate and the response, a factor, a block or the subject")
    if cov and spec.is_mixed:
        raise ExplorerError("covariates are supported in fixed-effects models (factors and blocks); this model has "
                            "random, nested or subject terms")


def _check_test(spec: ModelSpec) -> None:
    """Refuse an unknown test name, or a one-factor test on a design other than one fixed factor."""
    test = spec.test
    if not isinstance(test, str) or test not in OVERALL_TESTS:
        raise ExplorerError(f"test must be one of {list(OVERALL_TESTS)}, not {test!r}")
    if test in ONE_FACTOR_TESTS and not spec.is_oneway:
        raise ExplorerError(
            f"the {OVERALL_TESTS[test]} test compares the levels of one fixed factor; this design has factors "
            f"{list(spec.factors)}" + (f" and blocks {list(spec.blocks)}" if spec.blocks else "")
            + (" with other roles or terms" if (spec.is_mixed or spec.terms is not None) else "")
            + ". Use test='classic' (the F tests of the model's terms), or a one-factor study of the factor of interest."
        )
