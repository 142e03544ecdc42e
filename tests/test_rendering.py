"""One HTML renderer with one stylesheet: every result's markup goes through explorer.rendering.

Every class of the kit with a ``_repr_html_`` is found by walking the package, and one
value of each is built from invented data (several designs: one factor, two crossed
factors, blocks, random factors, repeated measures, a covariate, a summary-table study).
Its HTML must use only the renderer's class names and no ``style`` attribute, and carry
the stylesheet once, first; nested inside another output or in a page that carries the
stylesheet (:func:`explorer.rendering.styled`), none. The text a reader sees is unchanged
by the renderer: table cells are the formatter's cells of the value's ``to_frame()``, and
the partition of the nozzle example reads as it read before the renderer existed
(captured from the earlier markup). Not a statistical check: the numbers are the
formatter's, checked in tests/test_formatting.py.
"""

from __future__ import annotations

import dataclasses
import importlib
import inspect
import pkgutil
import re
import warnings
from html.parser import HTMLParser
from typing import Any

import numpy as np
import pandas as pd
import pytest

import explorer
import explorer as ex
from explorer import rendering
from explorer.engine.example_data import example_data
from explorer.formatting import format_frame

#: Parts of the package not rendered here: the deprecated aliases and the shells (widget, app,
#: command line, notebooks) write pages, not results; the Spark engine needs a cluster.
_SKIP = ("explorer.core", "explorer.widget", "explorer.app", "explorer.cli", "explorer.notebooks",
         "explorer.__main__", "explorer.summaries.engine_spark")


def _types_with_html() -> set[type]:
    found: set[type] = set()
    for info in pkgutil.walk_packages(explorer.__path__, "explorer."):
        if info.name.startswith(_SKIP):
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            module = importlib.import_module(info.name)
        for obj in vars(module).values():
            if inspect.isclass(obj) and obj.__module__ == module.__name__ and "_repr_html_" in obj.__dict__:
                found.add(obj)
    return found


def _gather(value: Any, into: dict[type, Any], depth: int = 0) -> None:
    """``value`` and the results inside it (dataclass fields, dict values, tuples), one per type."""
    if depth > 4 or value is None or type(value) is pd.DataFrame:  # a plain frame field: pandas' own display
        return
    if hasattr(value, "_repr_html_") and not isinstance(value, type):
        into.setdefault(type(value), value)
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        for f in dataclasses.fields(value):
            try:
                _gather(getattr(value, f.name), into, depth + 1)
            except Exception:  # noqa: BLE001  a deferred part that does not apply to this design
                continue
    elif isinstance(value, dict):
        for v in value.values():
            _gather(v, into, depth + 1)
    elif isinstance(value, (tuple, list)):
        for v in value[:20]:
            _gather(v, into, depth + 1)


def _covariate_frame() -> pd.DataFrame:
    """Invented: film thickness of 15 panels from three nozzles, with the panel's surface temperature."""
    rng = np.random.default_rng(5)
    temp = np.round(rng.uniform(18, 26, 15), 1)
    nozzle = ["A", "B", "C"] * 5
    y = np.round(50 + 0.2 * temp + np.array([0.0, 0.8, -0.4] * 5) + rng.normal(0, 0.3, 15), 2)
    return pd.DataFrame({"nozzle": nozzle, "surface_temp": temp, "thickness_um": y})


@pytest.fixture(scope="module")
def results_by_type() -> dict[type, Any]:
    from explorer import stats as st
    from explorer.report.sensitivity_summary import sensitivity_summary
    from explorer.summaries import SummaryStudy
    from explorer.summaries.scan import set_aside_scan

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        one = ex.Study(example_data("coating"), response="thickness_um", factors="nozzle")
        pair = ex.Study(example_data("coating").iloc[:8], response="thickness_um", factors="nozzle")
        two = ex.Study(example_data("lines"), response="thickness_um", factors=["nozzle", "speed"])
        gauge = ex.Study(example_data("gauge"), response="diameter_mm", factors=["part", "operator"],
                         random=["part", "operator"])
        cure = ex.Study(example_data("cure"), response="hardness", factors="time", subject="panel", within="time")
        blocked = ex.Study(example_data("cure"), response="hardness", factors="time", blocks="panel")
        covariate = ex.Study(_covariate_frame(), response="thickness_um", factors="nozzle",
                             covariates="surface_temp")
        one.contrast("nozzle", {"A": -1, "B": 1})
        one.drop([0], reason="invented: a smeared panel")  # the card then shows a change
        one.equivalence("nozzle", margin=1.0, pairs=[("A", "C")])
        colleague = ex.Study(example_data("coating"), response="thickness_um", factors="nozzle")
        colleague.merge_levels("nozzle", ["A", "B"], into="A+B", reason="invented: one supplier")
        summary = SummaryStudy(example_data("lines"), "thickness_um", ["nozzle", "speed"], sample_size=0)
        values = [
            one, one.results, one.decision, one.decision_card(), one.battery(), one.influence(),
            one.case_deletion(), one.flip_finder(),
            one.regroup_scan(), one.robustness_sweep(), one.box_cox(record=False), one.planned(),
            one.results.partition.to_frame(), sensitivity_summary(one),
            st.dunn(one.results), st.trimmed_means_test(one.results), st.hc3_tests(two.results),
            pair.results, st.welch_t(pair.results), st.mann_whitney(pair.results),
            two.results, two.decision, two.simple_effects("nozzle", within="speed"),
            two.simple_effects("nozzle", within="speed").pairs(adjust="tukey"),
            gauge.results, gauge.measurement_system("part", "operator"), gauge.unit_deletion("part"),
            cure.results, cure.repeated_measures(), blocked.results, st.friedman(blocked.results),
            covariate.results, set_aside_scan(summary, record=False),
            one.compare(colleague),
        ]
    found: dict[type, Any] = {}
    for v in values:
        _gather(v, found)
    return found


def test_every_result_type_is_rendered_here(results_by_type):
    missing = sorted(f"{t.__module__}.{t.__qualname__}" for t in _types_with_html() - set(results_by_type))
    assert not missing, f"result types with _repr_html_ not built by this test: {missing}"


class _Markup(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.styles: list[tuple[str, str]] = []  # (tag, style attribute)
        self.classes: list[str] = []
        self.style_elements = 0
        self.first_tag: str | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.first_tag = self.first_tag or tag
        self.style_elements += tag == "style"
        for name, value in attrs:
            if name == "style":
                self.styles.append((tag, value or ""))
            elif name == "class":
                self.classes += (value or "").split()


def _foreign_classes(classes: list[str]) -> list[str]:
    return [c for c in classes if c not in rendering.CLASSES
            and not any(p.fullmatch(c) for p in rendering.CLASS_PATTERNS)]


def test_every_result_uses_only_the_stylesheet(results_by_type):
    bad = {}
    for t, value in results_by_type.items():
        markup = value._repr_html_()
        parsed = _Markup()
        parsed.feed(markup)
        problems = [f"style={s!r} on <{tag}>" for tag, s in parsed.styles] + _foreign_classes(parsed.classes)
        if parsed.style_elements != 1 or not markup.startswith(rendering.style_block()):
            problems.append(f"{parsed.style_elements} <style> element(s); the stylesheet must come once, first")
        if problems:
            bad[t.__qualname__] = problems
    assert not bad, bad


def test_nested_and_styled_outputs_carry_no_stylesheet(results_by_type):
    for value in results_by_type.values():
        with rendering.styled():
            markup = value._repr_html_()
        assert "<style" not in markup, type(value).__qualname__
    battery = next(v for t, v in results_by_type.items() if t.__name__ == "Battery")
    assert battery._repr_html_().count("<style") == 1  # its tables and tests, nested, add none


class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.text: list[str] = []
        self.cells: list[str] = []
        self._in: list[str] = []

    def handle_starttag(self, tag: str, attrs: Any) -> None:
        self._in.append(tag)

    def handle_endtag(self, tag: str) -> None:
        if self._in:
            self._in.pop()

    def handle_data(self, data: str) -> None:
        if "style" in self._in or not data.strip():
            return
        self.text.append(" ".join(data.split()))
        if self._in and self._in[-1] == "td":
            self.cells.append(data)


def _text(markup: str) -> _Text:
    parser = _Text()
    parser.feed(markup)
    return parser


#: The nozzle example's partition as it read in the markup written before the renderer (every
#: text node, in order).
BEFORE = ["Partition of the sum of squares (one term: types I, II and III sums of squares coincide)", "source",
          "df", "sum of squares", "mean square", "F", "p-value", "nozzle", "2", "4.3517", "2.1758", "33.47",
          "6.79e-05", "residual", "9", "0.58500", "0.065000", "—", "—", "total (corrected)", "11", "4.9367", "—",
          "—", "—"]


def test_text_is_unchanged_by_the_renderer(results_by_type):
    one = ex.Study(example_data("coating"), response="thickness_um", factors="nozzle")
    assert _text(one.results.partition._repr_html_()).text == BEFORE
    assert _text(one.results.partition.to_frame()._repr_html_()).text == BEFORE[1:]
    # table cells are the formatter's cells of to_frame(), row by row
    for name in ("LevelTable", "PairwiseTable", "EffectSizes", "LetterDisplay", "VarianceComponents"):
        value = next(v for t, v in results_by_type.items() if t.__name__ == name)
        cells = _text(value._repr_html_()).cells
        expected = [str(c) for row in format_frame(value.to_frame()).itertuples(index=False) for c in row]
        assert cells and cells == [c for c in expected if c.strip()], name


def test_escaping_goes_through_the_one_helper():
    from explorer import formatting
    from explorer.engine import tables

    assert formatting.esc is rendering.esc is tables.esc
    markup = rendering.table(["a"], [[("1", True)]], caption="<b>x</b>", notes=("<i>y</i>",),
                             spanning=(("<u>z</u>", "w"),))
    assert "<b>" not in markup and "<i>" not in markup and "<u>" not in markup and "&lt;b&gt;x" in markup
    with pytest.raises(ValueError, match="kind"):
        rendering.block("x' onload='y", [])


def test_pages_carry_the_one_stylesheet(tmp_path):
    from explorer.report.html_report import report_html
    from explorer.widget.stylesheet import STYLESHEET as WIDGET

    assert rendering.STYLESHEET in WIDGET and WIDGET.count("<style") == 1
    study = ex.Study(example_data("coating"), response="thickness_um", factors="nozzle")
    page = report_html(study, charts=False)
    assert page.count(rendering.STYLESHEET) == 1 and page.count("<style") == 1
    body = page.split("</head>", 1)[1]
    assert not re.search(r"<(?!svg|path|rect|line|text|circle|g\b|polyline|polygon)[a-z]+[^>]*\sstyle=", body)


def test_no_module_writes_its_own_styles():
    """Read from the source: no string of the kit holds a ``style`` attribute, and only the renderer and
    the two pages that carry its stylesheet (the explorer's, the report's) write a ``<style>`` element."""
    import io
    import tokenize
    from pathlib import Path

    root = Path(explorer.__file__).parent
    pages = {"rendering.py", "widget/stylesheet.py", "report/html_report.py"}
    found = []
    for path in sorted(root.rglob("*.py")):
        rel = path.relative_to(root).as_posix()
        for tok in tokenize.generate_tokens(io.StringIO(path.read_text(encoding="utf-8")).readline):
            if tok.type != tokenize.STRING and tok.type != getattr(tokenize, "FSTRING_MIDDLE", -1):
                continue
            if re.search(r"\sstyle\s*=\s*['\"\\{]", tok.string):
                found.append(f"{rel}:{tok.start[0]}: style attribute")
            if "<style" in tok.string and rel not in pages:
                found.append(f"{rel}:{tok.start[0]}: <style> element")
    assert not found, found
