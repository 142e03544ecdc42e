"""Planned analyses of a study: what the user asked for, kept with the study and recomputed after every edit.

A planned analysis is a question beyond "are all means equal?" - contrasts and trends,
equivalence against a margin, a robust or rank follow-up - asked once with its options
(a :class:`PlannedRequest`). The study keeps the requests in order, saves them in its
file (``"planned"``), replays them on load and in its replay code, and recomputes every
one on the current view (:meth:`PlannedAnalyses.planned`), so the widget and the report
always show them for the data as edited.

Trying several versions of one question (a second set of contrast weights on the same
factor, another margin, another robust test of the same means) is counted: the first
request of a question is free, each further distinct request adds one to the
alternatives the study discloses (``record_search``), so a tidy answer found by trying
variants is shown as the product of that search.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import TYPE_CHECKING, Any

from ..engine.errors import ExplorerError, ReplayError
from ..engine.tables import esc
from ..rendering import html_repr, note

if TYPE_CHECKING:
    from ..engine.results import Results

__all__ = ["KINDS", "PlannedAnalyses", "PlannedOutcome", "PlannedRequest", "check_options", "planned_from_doc"]


def _contrast(results: Results, factor: str, weights: Any, control: str | None = None, adjust: str | None = None,
              confidence: float | None = None) -> Any:
    from ..inference.contrasts import contrasts, control_contrasts, later_levels_contrasts

    if weights == "control":
        if control is None:
            raise ExplorerError("the 'control' set needs control=level")
        return control_contrasts(results, factor, control, adjust=adjust, confidence=confidence)
    if weights == "later":
        return later_levels_contrasts(results, factor, adjust=adjust, confidence=confidence)
    if isinstance(weights, str):
        raise ExplorerError(f"contrast weights are {{level: weight}}, or the sets 'control' and 'later'; not {weights!r}")
    return contrasts(results, factor, weights, adjust=adjust, confidence=confidence)


def _trend(results: Results, factor: str, **options: Any) -> Any:
    from ..inference.trends import trend

    return trend(results, factor, **options)


def _equivalence(results: Results, factor: str, **options: Any) -> Any:
    from ..inference.equivalence import equivalence

    return equivalence(results, factor, margin=options.pop("margin", None), **options)


def _simple(module: str, name: str) -> Callable[..., Any]:
    def run(results: Results, factor: str | None = None, **options: Any) -> Any:
        import importlib

        fn = getattr(importlib.import_module(f"explorer.inference.{module}"), name)
        return fn(results, **options)

    return run


def _box_cox(results: Results, factor: str | None = None, **options: Any) -> Any:
    from ..inference.box_cox import box_cox

    return box_cox(results, **options)


@dataclass(frozen=True)
class Kind:
    """How one kind of planned analysis is run, which options it takes and which question it answers."""

    run: Callable[..., Any]
    options: tuple[str, ...]
    question: str
    title: str
    needs_factor: bool = True


KINDS: dict[str, Kind] = {
    "contrast": Kind(_contrast, ("weights", "control", "adjust", "confidence"), "contrasts of the means", "Contrasts"),
    "trend": Kind(_trend, ("degree", "values", "weighting", "adjust", "confidence"), "contrasts of the means",
                  "Polynomial trend"),
    "equivalence": Kind(_equivalence, ("margin", "pairs", "control", "adjust", "alpha"), "equivalence",
                        "Equivalence"),
    "welch_t": Kind(_simple("two_levels", "welch_t"), ("confidence",), "other tests of the means", "Welch t",
                    needs_factor=False),
    "mann_whitney": Kind(_simple("two_levels", "mann_whitney"), (), "other tests of the means", "Mann-Whitney",
                         needs_factor=False),
    "trimmed_means": Kind(_simple("trimmed_means", "trimmed_means_test"), ("trim",), "other tests of the means",
                          "Trimmed means", needs_factor=False),
    "dunn": Kind(_simple("rank_followups", "dunn"), ("adjust",), "other tests of the means", "Dunn",
                 needs_factor=False),
    "friedman": Kind(_simple("rank_followups", "friedman"), (), "other tests of the means", "Friedman",
                     needs_factor=False),
    "hc3": Kind(_simple("robust_terms", "hc3_tests"), ("ss_type",), "other tests of the means", "HC3 tests",
                needs_factor=False),
    "box_cox": Kind(_box_cox, ("lambdas",), "transform of the response", "Box-Cox profile", needs_factor=False),
}


def _plain(value: Any, where: str, depth: int = 0) -> Any:
    """A JSON-safe copy of an option value (numbers, text, booleans, None, lists and text-keyed dicts)."""
    if depth > 6:
        raise ExplorerError(f"{where}: nested too deeply")
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float) or hasattr(value, "item"):
        try:
            x = value.item() if hasattr(value, "item") else value
        except (TypeError, ValueError):
            raise ExplorerError(f"{where}: not a plain value ({value!r})") from None
        if isinstance(x, bool) or not isinstance(x, (int, float)):
            return _plain(x, where, depth + 1)
        if isinstance(x, float) and not math.isfinite(x):
            raise ExplorerError(f"{where}: {x!r} is not a finite number")
        return x
    if isinstance(value, (list, tuple)):
        return [_plain(v, where, depth + 1) for v in value]
    if isinstance(value, Mapping):
        return {str(k): _plain(v, where, depth + 1) for k, v in value.items()}
    raise ExplorerError(f"{where}: a value of type {type(value).__name__} cannot be kept with the study")


def _share(x: Any, what: str, low: float, high: float, *, open_low: bool = True) -> None:
    if isinstance(x, bool) or not isinstance(x, (int, float)) or not (low < x < high if open_low else low <= x < high):
        raise ExplorerError(f"{what} must be between {low:g} and {high:g}, not {x!r}")


def check_options(kind: str, options: Mapping[str, Any]) -> None:
    """The checks on a request's options that need no data (margins, weights, degrees, shares).

    Run when a request is made and when it is read from a study file, so a broken request
    is refused before it is kept; checks against the data (level names, the number of
    levels) run when the request runs.
    """
    from ..inference.contrasts import check_weight_spec
    from ..inference.equivalence import parse_margin

    if kind == "equivalence":
        parse_margin(options.get("margin"))
    if kind == "contrast":
        weights = options.get("weights")
        if isinstance(weights, str):
            if weights not in ("control", "later"):
                raise ExplorerError(f"contrast weights are {{level: weight}}, or the sets 'control' and 'later'; "
                                    f"not {weights!r}")
            if weights == "control" and options.get("control") is None:
                raise ExplorerError("the 'control' set needs control=level")
        else:
            check_weight_spec(weights)
    degree = options.get("degree")
    if kind == "trend" and degree is not None and (isinstance(degree, bool) or not isinstance(degree, int)
                                                   or degree < 1):
        raise ExplorerError(f"the degree must be a whole number of at least 1, not {degree!r}")
    if "lambdas" in options:
        from ..inference.box_cox import check_lambdas

        check_lambdas(options["lambdas"])
    if "trim" in options:
        _share(options["trim"], "trim (the share cut from each end)", 0.0, 0.5, open_low=False)
    if "confidence" in options:
        _share(options["confidence"], "confidence", 0.0, 1.0)
    if "alpha" in options:
        _share(options["alpha"], "alpha", 0.0, 1.0)


@dataclass(frozen=True)
class PlannedRequest:
    """One planned analysis asked for: its kind, the factor it reads and its options (plain values)."""

    kind: str
    factor: str | None
    options: tuple[tuple[str, Any], ...] = ()

    @classmethod
    def make(cls, kind: str, factor: str | None, options: Mapping[str, Any]) -> PlannedRequest:
        if kind not in KINDS:
            raise ExplorerError(f"unknown planned analysis {kind!r}; kinds: {list(KINDS)}")
        allowed = KINDS[kind].options
        bad = [k for k in options if k not in allowed]
        if bad:
            raise ExplorerError(f"{kind}: unknown option(s) {bad}; options: {list(allowed)}")
        if factor is not None and not isinstance(factor, str):
            raise ExplorerError(f"{kind}: the factor is a column name (text), not {factor!r}")
        kept = tuple(sorted((k, _plain(v, f"{kind} option {k!r}")) for k, v in options.items() if v is not None))
        check_options(kind, dict(kept))
        return cls(kind=kind, factor=factor, options=kept)

    @property
    def key(self) -> str:
        return json.dumps([self.kind, self.factor, [list(o) for o in self.options]], sort_keys=True)

    @property
    def question(self) -> tuple[str, str | None]:
        return (KINDS[self.kind].question, self.factor)

    def option_dict(self) -> dict[str, Any]:
        return dict(self.options)

    def label(self) -> str:
        parts = [f"{k}={json.dumps(v, ensure_ascii=False)}" for k, v in self.options]
        on = f" of {self.factor}" if self.factor else ""
        return f"{KINDS[self.kind].title}{on}" + (f" ({', '.join(parts)})" if parts else "")

    def run(self, results: Results) -> Any:
        try:
            return KINDS[self.kind].run(results, self.factor, **self.option_dict())
        except TypeError as exc:  # an option of the wrong type (e.g. from a hand-edited file)
            raise ExplorerError(f"{self.kind}: {exc}") from None

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"kind": self.kind, "options": {k: v for k, v in self.options}}
        if self.factor is not None:
            d["factor"] = self.factor
        return d

    @classmethod
    def from_dict(cls, d: Any, where: str = "planned") -> PlannedRequest:
        if not isinstance(d, Mapping):
            raise ReplayError(f"{where}: must be an object with kind and options")
        extra = [k for k in d if k not in ("kind", "factor", "options", "at")]
        if extra:
            raise ReplayError(f"{where}: unknown key(s) {extra}")
        kind = d.get("kind")
        if not isinstance(kind, str) or kind not in KINDS:
            raise ReplayError(f"{where}.kind: must be one of {list(KINDS)}, not {kind!r}")
        options = d.get("options", {})
        if not isinstance(options, Mapping):
            raise ReplayError(f"{where}.options: must be an object")
        factor = d.get("factor")
        try:
            return cls.make(kind, factor, options)
        except ExplorerError as exc:
            raise ReplayError(f"{where}: {exc}") from None


@dataclass(frozen=True)
class PlannedOutcome:
    """A request and its value on the current view, or why it has none there."""

    request: PlannedRequest
    value: Any = None
    problem: str | None = None

    @html_repr
    def _repr_html_(self) -> str:
        head = f"<h4>{esc(self.request.label())}</h4>"
        if self.problem is not None:
            return head + note(f"Not available on this view: {self.problem}")
        body = self.value._repr_html_() if hasattr(self.value, "_repr_html_") else esc(str(self.value))
        return head + body

    def to_text(self) -> str:
        head = self.request.label()
        if self.problem is not None:
            return f"{head}\n  not available on this view: {self.problem}"
        text = self.value.to_text() if hasattr(self.value, "to_text") else str(self.value)
        return f"{head}\n{text}"


def planned_from_doc(doc: Mapping[str, Any]) -> list[tuple[PlannedRequest, str | None]]:
    """The planned analyses of a saved study with the time each was asked for (none without a ``planned`` list)."""
    from ..engine.edits import check_utc_time

    items = doc.get("planned", [])
    if not isinstance(items, list):
        raise ReplayError("planned: must be a list of planned analyses")
    if len(items) > 1000:
        raise ReplayError("planned: more than 1,000 planned analyses")
    out = []
    for i, d in enumerate(items):
        request = PlannedRequest.from_dict(d, f"planned[{i}]")
        at = d.get("at")
        out.append((request, None if at is None else check_utc_time(at, f"planned[{i}].at")))
    return out


_METHODS = {"hc3": "hc3_tests", "trimmed_means": "trimmed_means"}


def planned_call(request: PlannedRequest) -> tuple[str, list[Any], dict[str, Any]]:
    """``(method, args, kwargs)`` of the study call that asks for ``request`` (without recording it again)."""
    opts = request.option_dict()
    args: list[Any] = [request.factor] if KINDS[request.kind].needs_factor else []
    if request.kind == "contrast":
        args.append(opts.pop("weights"))
    return _METHODS.get(request.kind, request.kind), args, {**opts, "record": False}


class PlannedAnalyses:
    """Study methods for planned analyses (mixed into :class:`~explorer.study.study.Study`)."""

    _planned: list[tuple[PlannedRequest, str]]

    if TYPE_CHECKING:
        @property
        def results(self) -> Results: ...

    def record_search(self, what: str, count: int) -> None:  # pragma: no cover - provided by Study
        raise NotImplementedError

    # ----------------------------------------------------------------- bookkeeping
    @property
    def planned_requests(self) -> tuple[PlannedRequest, ...]:
        """The planned analyses asked for, in order (each once)."""
        return tuple(r for r, _ in getattr(self, "_planned", []))

    def _ask(self, kind: str, factor: str | None, options: Mapping[str, Any], record: bool) -> Any:
        if KINDS[kind].needs_factor and factor is None:
            factor = self.results.spec.factors[0]
        request = PlannedRequest.make(kind, factor, options)
        value = request.run(self.results)  # refuse bad input before anything is kept
        self._keep_request(request, record=record)
        return value

    def _keep_request(self, request: PlannedRequest, *, record: bool = True, at: str | None = None) -> None:
        planned = self.__dict__.setdefault("_planned", [])
        if any(r.key == request.key for r, _ in planned):
            return
        earlier = [r for r, _ in planned if r.question == request.question]
        planned.append((request, at or datetime.now(timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")))
        if record and earlier:
            q, f = request.question
            self.record_search(f"planned analyses: another version of {q}" + (f" of {f}" if f else "")
                               + f": {request.label()}", 1)

    def planned(self) -> tuple[PlannedOutcome, ...]:
        """Every planned analysis on the current view (recomputed after each edit; memoised per view)."""
        res = self.results
        requests = self.planned_requests
        cache = self.__dict__.get("_planned_cache")
        if cache is not None and cache[0] is res and cache[1] == requests:
            return cache[2]  # type: ignore[no-any-return]
        out = []
        for r in requests:
            try:
                out.append(PlannedOutcome(request=r, value=r.run(res)))
            except ExplorerError as exc:
                out.append(PlannedOutcome(request=r, problem=str(exc)))
        outcomes = tuple(out)
        self.__dict__["_planned_cache"] = (res, requests, outcomes)
        return outcomes

    def planned_call(self, request: PlannedRequest) -> tuple[str, list[Any], dict[str, Any]]:
        """The study method, positional and keyword arguments that ask for ``request`` again (for replay code)."""
        return planned_call(request)

    def planned_to_dict(self) -> list[dict[str, Any]]:
        return [{**r.to_dict(), "at": at} for r, at in getattr(self, "_planned", [])]

    # ----------------------------------------------------------------- the analyses
    def contrast(self, factor: str | None, weights: Any, *, control: str | None = None, adjust: str | None = None,
                 confidence: float | None = None, record: bool = True) -> Any:
        """Contrasts of ``factor``'s means: ``{level: weight}`` (weights sum to zero), ``{name: {level: weight}}``,
        a list of them, or the sets ``'control'`` (each level vs ``control=``) and ``'later'`` (each level vs the
        mean of the later levels). See :mod:`explorer.inference.contrasts`. Kept with the study and recomputed
        after every edit."""
        return self._ask("contrast", factor, {"weights": weights, "control": control, "adjust": adjust,
                                               "confidence": confidence}, record)

    def trend(self, factor: str | None = None, *, degree: int | None = None, values: Mapping[str, float] | None = None,
              weighting: str = "equal", adjust: str | None = None, confidence: float | None = None,
              record: bool = True) -> Any:
        """Orthogonal-polynomial trend of ``factor``'s means over its numeric levels
        (see :mod:`explorer.inference.trends`)."""
        opts = {"degree": degree, "values": values, "weighting": None if weighting == "equal" else weighting,
                "adjust": adjust, "confidence": confidence}
        return self._ask("trend", factor, opts, record)

    def equivalence(self, factor: str | None = None, *, margin: Any, pairs: Any = None, control: str | None = None,
                    adjust: str = "none", alpha: float | None = None, record: bool = True) -> Any:
        """Two one-sided tests against ``margin`` (response units, yours: the kit proposes none) for ``pairs`` of
        levels or each level vs ``control`` (see :mod:`explorer.inference.equivalence`)."""
        opts = {"margin": margin, "pairs": pairs, "control": control,
                "adjust": None if adjust == "none" else adjust, "alpha": alpha}
        return self._ask("equivalence", factor, opts, record)

    def welch_t(self, *, confidence: float | None = None, record: bool = True) -> Any:
        """Welch's two-sample t and interval (a factor with two levels)."""
        return self._ask("welch_t", None, {"confidence": confidence}, record)

    def mann_whitney(self, *, record: bool = True) -> Any:
        """The Mann-Whitney test (a factor with two levels)."""
        return self._ask("mann_whitney", None, {}, record)

    def trimmed_means(self, *, trim: float = 0.2, record: bool = True) -> Any:
        """Wilcox's one-way test of trimmed means (every row kept; extremes lose their pull)."""
        return self._ask("trimmed_means", None, {"trim": None if trim == 0.2 else trim}, record)

    def dunn(self, *, adjust: str = "holm", record: bool = True) -> Any:
        """Dunn's pairwise rank comparisons (after Kruskal-Wallis), Holm-adjusted by default."""
        return self._ask("dunn", None, {"adjust": None if adjust == "holm" else adjust}, record)

    def friedman(self, *, record: bool = True) -> Any:
        """Friedman's rank test of a randomized complete block design."""
        return self._ask("friedman", None, {}, record)

    def hc3_tests(self, *, ss_type: str | None = None, record: bool = True) -> Any:
        """Every model term tested with HC3 (heteroscedasticity-consistent) standard errors."""
        return self._ask("hc3", None, {"ss_type": ss_type}, record)
