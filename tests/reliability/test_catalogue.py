"""A catalogue of bad inputs: every one refused clearly, none changing anything.

Each row is one hostile or broken input - a data file, a study file, a condition, a
widget field, a command-line option or an API argument - with the class of the error
it must raise (for the command line: the documented exit code; for the widget, which
never raises into a notebook: the error the study raised, read from the status line)
and a fragment of the message. After each row the test checks that the caller's
table, the study (its saved form and its current results), the summary-backed study
and every file that existed before are exactly as they were, and that no file
appeared. The data are invented (nozzle readings of a coating line).
"""

from __future__ import annotations

import hashlib
import html
import json
import math
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

import explorer as ex
from explorer.cli import main as cli_main
from explorer.engine.errors import (
    ColumnError,
    DataError,
    DesignError,
    EditError,
    ExplorerError,
    PredicateError,
    ReplayError,
)
from explorer.engine.noncentral_f import noncentrality_interval
from explorer.engine.studentized_range import srange_ppf, srange_sf
from explorer.inference.comparisons import adjust_pvalues, dunnett
from explorer.study.output_files import OutputError
from explorer.summaries import SummaryStudy


@dataclass(frozen=True)
class Bad:
    """One bad input: where it enters, what it does, the error it must raise and a message fragment."""

    id: str
    where: str  # data file | API argument | study file | condition | widget field | CLI option
    run: Callable[[Any], Any]
    error: type[BaseException] | int  # an int is a command-line exit code
    fragment: str


# ---------------------------------------------------------------------- the shared scene
ROWS = [("N1", 10.2), ("N1", 10.9), ("N1", 10.4), ("N1", 11.0), ("N2", 11.8), ("N2", 12.4), ("N2", 11.9),
        ("N2", 12.6), ("N3", 10.1), ("N3", 9.7), ("N3", 10.6), ("N3", 10.0)]


def _frame() -> pd.DataFrame:
    """Invented coating thickness by nozzle, with a panel id, a note and a day."""
    return pd.DataFrame({
        "panel": [f"P{100 + i}" for i in range(len(ROWS))],
        "nozzle": [g for g, _ in ROWS],
        "y": [v for _, v in ROWS],
        "note": ["ok"] * 10 + ["rework ( line 2 )"] * 2,
        "day": pd.to_datetime("2026-03-01") + pd.to_timedelta(np.arange(len(ROWS)) % 4, unit="D"),
    })


class Scene:
    """The caller's table, a study with one edit, a summary-backed study, files on disk and a widget."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.frame = _frame()
        self.frame_copy = self.frame.copy(deep=True)
        self.data_csv = folder / "readings.csv"
        self.frame.drop(columns=["day"]).to_csv(self.data_csv, index=False)
        self.study = ex.Study(self.frame, "y", "nozzle", id_column="panel")
        self.study.drop(["P103"], reason="gauge slipped")
        self.study_file = self.study.save(folder / "readings.study.json")
        self.file_study = ex.Study(self.data_csv, "y", "nozzle")
        self.report = folder / "report.html"
        self.report.write_text("<html>an earlier report</html>")
        self.summary = SummaryStudy(self.frame, "y", "nozzle", sample_size=0)
        self.summary.drop_where("y > 12.5", reason="over the gauge range")
        self.inputs = folder / "inputs"  # where rows write their own bad input files
        self.inputs.mkdir()
        self._widget: Any = None

    @property
    def widget(self) -> Any:
        if self._widget is None:
            pytest.importorskip("ipywidgets")
            self._widget = ex.Explorer(ex.Study(self.frame, "y", "nozzle", id_column="panel"))
        return self._widget

    def file(self, name: str, content: bytes | str) -> Path:
        path = self.inputs / name
        path.write_bytes(content.encode() if isinstance(content, str) else content)
        return path

    def study_doc(self) -> dict:
        return json.loads(self.study_file.read_text())

    def study_variant(self, name: str, change: Callable[[dict], Any]) -> Path:
        doc = self.study_doc()
        change(doc)
        return self.file(name, json.dumps(doc))


def _files(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _state(study: Any) -> tuple:
    doc = study.to_dict()
    return json.dumps(doc, sort_keys=True, default=str), id(study.results), study.results.statistic()


def _widget_state(w: Any) -> tuple:
    return _state(w.study), w.picked, w.reason_box.value


@pytest.fixture(scope="module")
def scene(tmp_path_factory) -> Scene:
    return Scene(tmp_path_factory.mktemp("catalogue"))


# ---------------------------------------------------------------------- helpers for rows
def load(path_or_frame: Any, response: str = "y", factors: Any = "nozzle", **kw: Any) -> Any:
    return ex.Study(path_or_frame, response, factors, **kw)


def cond(case_id: str, text: Any, fragment: str, error: type[BaseException] | None = None) -> Bad:
    """A condition given to the summary-backed study's drop_where."""
    return Bad(case_id, "condition", lambda s: s.summary.drop_where(text, reason="x"), error or PredicateError,
               fragment)


def summary_variant(s: Scene, name: str, field: str, value: Any) -> Path:
    """The summary-backed study's saved form with one spec field changed, as a file of bad inputs."""
    doc = s.summary.to_dict()
    doc["spec"][field] = value
    return s.file(name, json.dumps(doc))


def frame_with(s: Scene, **cols: Any) -> pd.DataFrame:
    return s.frame.assign(**cols)


def cli(*argv: str) -> int:
    return cli_main(list(argv))


def widget_action(action: Callable[[Any], Any], *, reason: str = "", pick: tuple = ()) -> Callable[[Scene], Any]:
    """Run a widget action; raise what the study raised (or WidgetRefusal) so the row can check it."""
    def run(s: Scene) -> Any:
        w = s.widget
        caught: list[BaseException] = []
        study = w.study
        originals = {}
        for name in ("drop", "restore", "reassign", "merge_levels", "rename_level", "undo", "redo"):
            original = getattr(study, name)
            originals[name] = original

            def spy(*a: Any, _f: Any = original, **k: Any) -> Any:
                try:
                    return _f(*a, **k)
                except BaseException as exc:
                    caught.append(exc)
                    raise
            setattr(study, name, spy)
        w.reason_box.value = reason
        w.pick(pick)
        try:
            result = action(w)
        finally:
            for name, original in originals.items():
                setattr(study, name, original)
            w.reason_box.value = ""
            w.pick(())
        status = html.unescape(w.status.value)
        assert result in (False, None), "the widget said the action was done"
        if caught:
            assert str(caught[0]) in status
            raise type(caught[0])(status)
        assert "vx-status-error" in status, status
        raise WidgetRefusal(status)
    return run


class WidgetRefusal(Exception):
    """The widget refused an action itself (before asking the study), in its status line."""


def set_level_box(value: str) -> Callable[[Any], Any]:
    def act(w: Any) -> Any:
        box = next(iter(w._level_boxes["nozzle"].values()))
        old = box.value
        box.value = value
        try:
            return w.apply_regrouping()
        finally:
            box.value = old
    return act


def pick_model(response: str, factors: tuple[str, ...]) -> Callable[[Scene], Any]:
    def run(s: Scene) -> Any:
        w = s.widget
        before = (w.response_picker.value, tuple(w.factor_picker.value))
        try:
            w.response_picker.value = response
            w.factor_picker.value = factors
            status = html.unescape(w.status.value)
        finally:
            w.response_picker.value, w.factor_picker.value = before
        assert "vx-status-error" in status, status
        raise WidgetRefusal(status)
    return run


# ---------------------------------------------------------------------- the catalogue
L1 = "latin-1 caf\u00e9"

CATALOGUE: list[Bad] = [
    # ---------------- data files
    Bad("file-missing", "data file", lambda s: load(s.inputs / "nope.csv"), DataError, "no file at"),
    Bad("file-folder", "data file", lambda s: load(s.inputs), DataError, "is a folder"),
    Bad("file-unknown-type", "data file", lambda s: load(s.file("x.json", "{}")), DataError, "unknown file type"),
    Bad("file-empty", "data file", lambda s: load(s.file("empty.csv", b"")), DataError, "is empty"),
    Bad("file-blank-lines", "data file", lambda s: load(s.file("blank.csv", "\n\n  \n")), DataError, "no header row"),
    Bad("file-header-only", "data file", lambda s: load(s.file("head.csv", "nozzle,y\n")), DataError, "no data rows"),
    Bad("file-utf16-no-mark", "data file",
        lambda s: load(s.file("u16.csv", "nozzle,y\nN1,1\n".encode("utf-16-le"))), DataError, "NUL bytes"),
    Bad("file-latin1", "data file",
        lambda s: load(s.file("l1.csv", f"nozzle,y\n{L1},1\nN2,2\n".encode("latin-1"))), DataError,
        "not UTF-8 text: byte 0xe9 on line 2"),
    Bad("file-invalid-utf8", "data file", lambda s: load(s.file("bytes.csv", b"nozzle,y\n\x80\x81,1\n")), DataError,
        "not UTF-8 text"),
    Bad("file-truncated-utf16", "data file",
        lambda s: load(s.file("t16.csv", b"\xff\xfe" + "nozzle,y\nN1,1\n".encode("utf-16-le")[:-1])), DataError,
        "not valid utf-16 text"),
    Bad("file-repeated-header", "data file", lambda s: load(s.file("rep.csv", "nozzle,y,y\nN1,1,2\nN2,3,4\n")),
        ColumnError, "repeated column names ['y']"),
    Bad("file-decimal-comma", "data file",
        lambda s: load(s.file("dc.csv", "nozzle;y\nN1;1,5\nN1;2,5\nN2;3,5\nN2;4,25\n")), DataError, "decimal comma"),
    Bad("file-text-response", "data file",
        lambda s: load(s.file("txt.csv", "nozzle,y\nN1,1\nN1,thin\nN2,3\nN2,4\n")), DataError,
        "non-numeric values in rows 1"),
    Bad("file-infinite", "data file", lambda s: load(s.file("inf.csv", "nozzle,y\nN1,1\nN1,inf\nN2,3\nN2,4\n")),
        DataError, "infinite values"),
    Bad("file-overflowing-text", "data file",
        lambda s: load(s.file("big.csv", "nozzle,y\nN1,1\nN1,1e400\nN2,3\nN2,4\n")), DataError, "infinite values"),
    Bad("file-all-missing", "data file", lambda s: load(s.file("na.csv", "nozzle,y\nN1,\nN2,\n")), DataError,
        "every row has a missing"),
    Bad("file-one-level", "data file", lambda s: load(s.file("one.csv", "nozzle,y\nN1,1\nN1,2\nN1,3\n")),
        DesignError, "fewer than two levels"),
    Bad("file-no-residual-df", "data file", lambda s: load(s.file("df0.csv", "nozzle,y\nN1,1\nN2,2\nN3,3\n")),
        DesignError, "no residual degrees of freedom"),
    Bad("file-ragged", "data file", lambda s: load(s.file("rag.csv", "nozzle,y\nN1,1\nN1,2,9,9\nN2,3\n")),
        DataError, "Expected 2 fields in line 3"),
    Bad("file-tsv-with-commas", "data file", lambda s: load(s.file("c.tsv", "nozzle,y\nN1,1\nN2,2\n")),
        ColumnError, "is not in the table"),
    Bad("file-garbage-parquet", "data file", lambda s: load(s.file("g.parquet", b"PAR1 not really")), DataError,
        "as a Parquet file"),
    Bad("file-garbage-excel", "data file", lambda s: load(s.file("g.xlsx", b"PK\x03\x04 not a workbook")),
        DataError, "Excel"),
    Bad("file-unknown-response", "data file", lambda s: load(s.data_csv, "thicknes"), ColumnError,
        "response column 'thicknes' is not in the table"),
    Bad("file-unknown-factor", "data file", lambda s: load(s.data_csv, "y", "nozle"), ColumnError,
        "Did you mean 'nozzle'"),
    Bad("file-response-as-factor", "data file", lambda s: load(s.data_csv, "y", ["nozzle", "y"]), ColumnError,
        "both the response and a factor"),
    Bad("file-factor-twice", "data file", lambda s: load(s.data_csv, "y", ["nozzle", "nozzle"]), ExplorerError,
        "twice"),
    Bad("file-id-missing", "data file", lambda s: load(s.data_csv, id_column="panl"), ColumnError,
        "id column 'panl' is not in the table"),
    Bad("file-id-repeated", "data file",
        lambda s: load(s.file("idrep.csv", "panel,nozzle,y\nA,N1,1\nA,N1,2\nB,N2,3\nC,N2,4\n"), id_column="panel"),
        DataError, "repeats ids"),
    Bad("file-id-blank", "data file",
        lambda s: load(s.file("idblank.csv", "panel,nozzle,y\nA,N1,1\n\" \",N1,2\nB,N2,3\nC,N2,4\n"),
                       id_column="panel"), DataError, "is blank in rows (positions) 1"),
    Bad("file-unbalanced-quote", "data file", lambda s: load(s.file("q.csv", 'nozzle,y\n"N1,1\nN2,2\n')),
        DataError, "delimited text table"),
    # ---------------- API arguments: the table and the model
    Bad("api-data-none", "API argument", lambda s: load(None), DataError, "must be a pandas DataFrame"),
    Bad("api-data-list", "API argument", lambda s: load([1, 2, 3]), DataError, "not list"),
    Bad("api-data-dict", "API argument", lambda s: load({"y": [1, 2]}), DataError, "not dict"),
    Bad("api-response-int", "API argument", lambda s: load(s.frame, 0), ColumnError, "column names are text"),
    Bad("api-response-empty", "API argument", lambda s: load(s.frame, ""), ColumnError, "column names are text"),
    Bad("api-factors-empty", "API argument", lambda s: load(s.frame, "y", []), ColumnError, "at least one factor"),
    Bad("api-factors-int", "API argument", lambda s: load(s.frame, "y", 1), ColumnError, "column names are text"),
    Bad("api-factors-none-inside", "API argument", lambda s: load(s.frame, "y", ["nozzle", None]), ColumnError,
        "column names are text"),
    Bad("api-blocks-int", "API argument", lambda s: load(s.frame, blocks=5), ColumnError, "column names are text"),
    Bad("api-id-column-int", "API argument", lambda s: load(s.frame, id_column=3), ColumnError,
        "column names are text"),
    Bad("api-id-column-is-response", "API argument", lambda s: load(s.frame, id_column="y"), ColumnError,
        "cannot be both"),
    Bad("api-alpha-text", "API argument", lambda s: load(s.frame, alpha="0.05"), ExplorerError, "alpha must be"),
    Bad("api-alpha-one", "API argument", lambda s: load(s.frame, alpha=1), ExplorerError, "alpha must be between"),
    Bad("api-alpha-nan", "API argument", lambda s: load(s.frame, alpha=math.nan), ExplorerError,
        "alpha must be between"),
    Bad("api-alpha-negative", "API argument", lambda s: load(s.frame, alpha=-0.05), ExplorerError,
        "alpha must be between"),
    Bad("api-alpha-bool", "API argument", lambda s: load(s.frame, alpha=True), ExplorerError, "alpha must be"),
    Bad("api-ss-type", "API argument", lambda s: load(s.frame, ss_type="IV"), ExplorerError, "ss_type must be"),
    Bad("api-interactions-text", "API argument", lambda s: load(s.frame, interactions="no"), ExplorerError,
        "interactions must be True or False"),
    Bad("api-multiindex", "API argument",
        lambda s: load(s.frame.set_axis(pd.MultiIndex.from_product([["a"], s.frame.columns]), axis=1)),
        ColumnError, "header rows"),
    Bad("api-duplicate-columns", "API argument",
        lambda s: load(pd.concat([s.frame, s.frame[["y"]]], axis=1)), ColumnError, "repeated column names ['y']"),
    Bad("api-columns-collide", "API argument",
        lambda s: load(s.frame.assign(**{"1": 1.0}).rename(columns={"note": 1}), "y"), ColumnError,
        "read the same as text"),
    Bad("api-date-response", "API argument", lambda s: load(s.frame, "day"), DataError, "dates or times"),
    Bad("api-duration-response", "API argument",
        lambda s: load(frame_with(s, y=pd.to_timedelta(np.arange(12), unit="h"))), DataError, "dates or times"),
    Bad("api-complex-response", "API argument", lambda s: load(frame_with(s, y=np.arange(12) + 1j)), DataError,
        "complex"),
    Bad("api-categorical-response", "API argument",
        lambda s: load(frame_with(s, y=pd.Categorical(["1", "2", "3"] * 4))), DataError, "categorical"),
    Bad("api-bool-response", "API argument", lambda s: load(frame_with(s, y=[True, False] * 6)), DataError,
        "true/false"),
    Bad("api-list-values", "API argument", lambda s: load(frame_with(s, y=[[1.0]] * 12)), DataError,
        "values of type 'list'"),
    Bad("api-factor-int-and-text", "API argument",
        lambda s: load(frame_with(s, nozzle=[1, "1", 2, 2, 3, 3, 1, 1, 2, 2, 3, 3])), DataError,
        "read the same as text '1'"),
    Bad("api-factor-bool-and-text", "API argument",
        lambda s: load(frame_with(s, nozzle=[True, "True"] * 3 + ["x"] * 6)), DataError,
        "read the same as text 'True'"),
    Bad("api-ids-int-and-text", "API argument",
        lambda s: load(frame_with(s, panel=[1, "1"] + list(range(2, 12))), id_column="panel"), DataError,
        "read the same as text '1'"),
    Bad("api-decimal-comma-frame", "API argument", lambda s: load(frame_with(s, y=[f"{v:.1f}".replace(".", ",")
                                                                                  for _, v in ROWS])),
        DataError, "decimal comma"),
    # ---------------- API arguments: edits
    Bad("ledger-origin-number", "API argument",
        lambda s: s.study.apply(ex.DropRows(rows=("P100",), reason="x"), origin=5), EditError, "origin must be text"),
    Bad("ledger-search-negative", "API argument", lambda s: s.study.record_search("scan", -4), EditError,
        "whole number of alternatives"),
    Bad("ledger-search-fraction", "API argument", lambda s: s.study.record_search("scan", 2.5), EditError,
        "whole number of alternatives"),
    Bad("ledger-search-nan", "API argument", lambda s: s.study.record_search("scan", float("nan")), EditError,
        "whole number of alternatives"),
    Bad("ledger-restore-text", "API argument", lambda s: s.study.restore_ledger("all of it"), ReplayError,
        "must be an object"),
    Bad("ledger-restore-understated", "API argument", lambda s: s.study.restore_ledger({"entries": []}),
        ReplayError, "records 0 edit(s) made"),
    Bad("choice-comparisons-unknown", "API argument", lambda s: s.study.set_comparisons("by eye"), EditError,
        "comparison method"),
    Bad("choice-alpha-two", "API argument", lambda s: s.study.set_alpha(2), ExplorerError, "alpha"),
    Bad("choice-terms-unknown-column", "API argument", lambda s: s.study.set_terms(["nozzle", "line"]),
        ExplorerError, "line"),
    Bad("choice-respecify-unknown-response", "API argument", lambda s: s.study.respecify(response="thicknes"),
        ColumnError, "thicknes"),
    Bad("edit-unknown-row", "API argument", lambda s: s.study.drop(["P999"], reason="x"), EditError,
        "no rows with ids 'P999'"),
    Bad("edit-row-none", "API argument", lambda s: s.study.drop(None, reason="x"), EditError, "rows are row ids"),
    Bad("edit-row-bool", "API argument", lambda s: s.study.drop([True], reason="x"), EditError,
        "row ids are integers or text"),
    Bad("edit-row-float", "API argument", lambda s: s.study.drop(1.0, reason="x"), EditError, "rows are row ids"),
    Bad("edit-already-out", "API argument", lambda s: s.study.drop(["P103"], reason="again"), EditError,
        "already left out"),
    Bad("edit-restore-kept", "API argument", lambda s: s.study.restore(["P100"]), EditError, "nothing to restore"),
    Bad("edit-reason-number", "API argument", lambda s: s.study.drop(["P100"], reason=5), EditError,
        "reason must be text"),
    Bad("edit-merge-unknown", "API argument", lambda s: s.study.merge_levels("nozzle", ["N1", "N9"], into="M",
                                                                          reason="x"), EditError, "no level(s) 'N9'"),
    Bad("edit-merge-one", "API argument", lambda s: s.study.merge_levels("nozzle", ["N1"], into="M", reason="x"),
        EditError, "two or more distinct levels"),
    Bad("edit-merge-all", "API argument",
        lambda s: s.study.merge_levels("nozzle", ["N1", "N2", "N3"], into="M", reason="x"), EditError,
        "fewer than two levels"),
    Bad("edit-rename-empty", "API argument", lambda s: s.study.rename_level("nozzle", "N1", "  ", reason="x"),
        EditError, "cannot be empty"),
    Bad("edit-rename-unknown", "API argument", lambda s: s.study.rename_level("nozzle", "N9", "M", reason="x"),
        EditError, "no level(s) 'N9'"),
    Bad("edit-reassign-factor", "API argument", lambda s: s.study.reassign("P100", "nozle", "N2", reason="x"),
        EditError, "Did you mean 'nozzle'"),
    Bad("edit-reassign-empty", "API argument", lambda s: s.study.reassign("P100", "nozzle", "", reason="x"),
        EditError, "cannot be empty"),
    Bad("edit-redo-nothing", "API argument", lambda s: s.study.redo(), EditError, "nothing to redo"),
    Bad("edit-leaves-one-level", "API argument",
        lambda s: s.study.drop(["P100", "P101", "P102", "P104", "P105", "P106", "P107"], reason="x"), EditError,
        "fewer than two levels"),
    # ---------------- API arguments: battery and scans
    Bad("battery-letters-from", "API argument", lambda s: s.study.battery(letters_from="scheffe"), ExplorerError,
        "letters_from must be"),
    Bad("battery-control", "API argument", lambda s: s.study.battery(control="N9"), ExplorerError,
        "control level 'N9'"),
    Bad("battery-alpha", "API argument", lambda s: s.study.battery(alpha=2), ExplorerError, "alpha must be between"),
    Bad("battery-confidence", "API argument", lambda s: s.study.battery(confidence=1.5), ExplorerError,
        "confidence must be between"),
    Bad("battery-adjust", "API argument", lambda s: s.study.battery(pairwise_adjust="sidak"), ExplorerError,
        "must be 'holm', 'bonferroni' or 'none'"),
    Bad("battery-levene-center", "API argument", lambda s: s.study.battery(levene_center="mode"), ExplorerError,
        "center must be"),
    Bad("scan-case-deletion-alpha", "API argument", lambda s: s.study.case_deletion(alpha=-1), ExplorerError,
        "alpha must be between"),
    Bad("scan-influence-alpha", "API argument", lambda s: s.study.influence(alpha=3), ExplorerError,
        "alpha must be between"),
    Bad("scan-flip-max-size", "API argument", lambda s: s.study.flip_finder(max_size=0), ExplorerError,
        "max_size must be a whole number"),
    Bad("scan-flip-budget", "API argument", lambda s: s.study.flip_finder(budget=-1), ExplorerError,
        "budget must be a whole number"),
    Bad("scan-flip-method", "API argument", lambda s: s.study.flip_finder(method="random"), ExplorerError,
        "method must be"),
    Bad("scan-regroup-factor", "API argument", lambda s: s.study.regroup_scan(factor="line"), ExplorerError,
        "is not the factor"),
    Bad("scan-sweep-merge", "API argument", lambda s: s.study.robustness_sweep(merges=[("N9", "N1")]), ExplorerError,
        "has no level 'N9'"),
    Bad("equivalence-alpha", "API argument", lambda s: s.study.equivalence(margin=1.0, control="N1", alpha=5),
        ExplorerError, "alpha must be between"),
    Bad("srange-probability", "API argument", lambda s: srange_ppf(1.5, 3, 10), ExplorerError,
        "probability must be in [0.5, 1)"),
    Bad("srange-k", "API argument", lambda s: srange_sf(2.0, 1, 10), ExplorerError, "number of means k"),
    Bad("noncentral-negative-f", "API argument", lambda s: noncentrality_interval(-1.0, 2, 10), ExplorerError,
        "finite non-negative"),
    Bad("adjust-method", "API argument", lambda s: adjust_pvalues(np.array([0.1, 0.2]), "fdr"), ExplorerError,
        "adjustment must be"),
    Bad("dunnett-unknown-control", "API argument", lambda s: dunnett(s.study.results, "N9"), ExplorerError,
        "control level 'N9'"),
    Bad("summary-source-int", "API argument", lambda s: SummaryStudy(12, "y", "nozzle"), DataError,
        "summary-backed study are Parquet or CSV"),
    Bad("summary-sample-negative", "API argument", lambda s: SummaryStudy(s.frame, "y", "nozzle", sample_size=-5),
        DataError, "sample_size"),
    # ---------------- API arguments: the newer spec fields and planned analyses
    Bad("contrast-weights-not-zero", "API argument", lambda s: s.study.contrast("nozzle", {"N1": 1, "N2": 1}),
        ExplorerError, "the weights sum to 2, not zero"),
    Bad("contrast-unknown-level", "API argument", lambda s: s.study.contrast("nozzle", {"N1": 1, "N9": -1}),
        ExplorerError, "level 'N9' is not a level of 'nozzle'"),
    Bad("contrast-nan-weight", "API argument",
        lambda s: s.study.contrast("nozzle", {"N1": math.nan, "N2": 1}), ExplorerError, "nan is not a finite number"),
    Bad("contrast-text-weight", "API argument", lambda s: s.study.contrast("nozzle", {"N1": "-1", "N2": 1}),
        ExplorerError, "a weight must be a number, not '-1'"),
    Bad("contrast-all-zero", "API argument", lambda s: s.study.contrast("nozzle", {"N1": 0, "N2": 0}),
        ExplorerError, "has every weight zero"),
    Bad("contrast-too-many", "API argument",
        lambda s: s.study.contrast("nozzle", [{"N1": 1, "N2": -1}] * 1001), ExplorerError,
        "1,001 contrasts in one request; at most 1,000"),
    Bad("contrast-unknown-set", "API argument", lambda s: s.study.contrast("nozzle", "helmert"), ExplorerError,
        "the sets 'control' and 'later'"),
    Bad("contrast-control-unknown", "API argument", lambda s: s.study.contrast("nozzle", "control", control="N9"),
        ExplorerError, "control level 'N9'"),
    Bad("trend-text-levels", "API argument", lambda s: s.study.trend("nozzle"), ExplorerError,
        "are not numbers ('N1'); give their values"),
    Bad("trend-degree-zero", "API argument",
        lambda s: s.study.trend("nozzle", values={"N1": 1, "N2": 2, "N3": 4}, degree=0), ExplorerError,
        "the degree must be a whole number"),
    Bad("trend-degree-too-high", "API argument",
        lambda s: s.study.trend("nozzle", values={"N1": 1, "N2": 2, "N3": 4}, degree=5), ExplorerError,
        "the degree must be a whole number between 1 and 2"),
    Bad("trend-degree-fraction", "API argument",
        lambda s: s.study.trend("nozzle", values={"N1": 1, "N2": 2, "N3": 4}, degree=1.5), ExplorerError,
        "the degree must be a whole number"),
    Bad("trend-values-repeated", "API argument",
        lambda s: s.study.trend("nozzle", values={"N1": 1, "N2": 1, "N3": 4}), ExplorerError,
        "level values must be distinct"),
    Bad("equivalence-margin-nan", "API argument", lambda s: s.study.equivalence(margin=math.nan, control="N1"),
        ExplorerError, "nan is not a finite number"),
    Bad("equivalence-margin-negative", "API argument", lambda s: s.study.equivalence(margin=-1.0, control="N1"),
        ExplorerError, "the margin must be positive"),
    Bad("equivalence-margin-zero", "API argument", lambda s: s.study.equivalence(margin=0, control="N1"),
        ExplorerError, "the margin must be positive"),
    Bad("equivalence-margin-reversed", "API argument",
        lambda s: s.study.equivalence(margin=(1.0, -1.0), control="N1"), ExplorerError,
        "lower end below zero and its upper end above zero"),
    Bad("equivalence-margin-text", "API argument", lambda s: s.study.equivalence(margin="1", control="N1"),
        ExplorerError, "a finite number in response units"),
    Bad("equivalence-margin-missing", "API argument", lambda s: s.study.equivalence(margin=None, control="N1"),
        ExplorerError, "does not propose"),
    Bad("equivalence-unknown-pair", "API argument",
        lambda s: s.study.equivalence(margin=1.0, pairs=[("N1", "N9")]), ExplorerError, "level 'N9' is not a level"),
    Bad("equivalence-pair-twice", "API argument", lambda s: s.study.equivalence(margin=1.0, pairs=[("N1", "N1")]),
        ExplorerError, "names one level twice"),
    Bad("trimmed-means-trim", "API argument", lambda s: s.study.trimmed_means(trim=0.6), ExplorerError,
        "between 0 and 0.5, not 0.6"),
    Bad("welch-three-levels", "API argument", lambda s: s.study.welch_t(), DesignError, "compares two levels"),
    Bad("transform-log-negative", "API argument",
        lambda s: load(frame_with(s, y=s.frame.y - 11), transform="log"), DataError,
        "the log needs every value of 'y' above zero"),
    Bad("transform-log-zero", "API argument",
        lambda s: load(frame_with(s, y=s.frame.y.where(s.frame.index != 3, 0.0)), transform="log"), DataError,
        "1 row(s) are not (rows 3, smallest 0)"),
    Bad("transform-sqrt-negative", "API argument",
        lambda s: load(frame_with(s, y=s.frame.y - 11), transform="sqrt"), DataError,
        "the square root needs every value of 'y' at zero or above"),
    Bad("transform-power-zero", "API argument",
        lambda s: load(frame_with(s, y=s.frame.y.where(s.frame.index != 3, 0.0)), transform=0.5), DataError,
        "a Box-Cox power needs every value of 'y' above zero"),
    Bad("transform-unknown", "API argument", lambda s: load(s.frame, transform="logit"), ExplorerError,
        "transform must be one of ['none', 'log', 'sqrt'] or a Box-Cox power"),
    Bad("transform-nan", "API argument", lambda s: load(s.frame, transform=math.nan), ExplorerError,
        "a Box-Cox power must be a finite number"),
    Bad("transform-boolean", "API argument", lambda s: load(s.frame, transform=True), ExplorerError,
        "transform must be one of"),
    Bad("covariate-constant", "API argument", lambda s: load(frame_with(s, pre=3.0), covariates=["pre"]),
        DesignError, "covariate 'pre' takes one value on every kept row"),
    Bad("covariate-all-missing", "API argument", lambda s: load(frame_with(s, pre=math.nan), covariates=["pre"]),
        DataError, "missing 'pre' on all 12 rows"),
    Bad("covariate-mostly-missing", "API argument",
        lambda s: load(frame_with(s, pre=[math.nan] * 8 + [1.0, 2.0, 3.0, 4.0]), covariates=["pre"]), DesignError,
        "8 row(s) were set aside at load for missing values (missing pre: 8)"),
    Bad("covariate-text", "API argument", lambda s: load(frame_with(s, pre="thick"), covariates=["pre"]),
        DataError, "covariate 'pre' has non-numeric values"),
    Bad("covariate-infinite", "API argument",
        lambda s: load(frame_with(s, pre=np.where(np.arange(12) == 2, np.inf, 1.0 * np.arange(12))),
                       covariates=["pre"]), DataError, "covariate 'pre' has infinite values"),
    Bad("covariate-is-factor", "API argument", lambda s: load(s.frame, covariates=["nozzle"]), ExplorerError,
        "'nozzle' cannot be both a covariate and"),
    Bad("covariate-missing-column", "API argument", lambda s: load(s.frame, covariates=["pre"]), ColumnError,
        "covariate column 'pre' is not in the table"),
    Bad("covariate-listed-twice", "API argument",
        lambda s: load(frame_with(s, pre=np.arange(12.0)), covariates=["pre", "pre"]), ExplorerError,
        "a covariate is listed twice"),
    Bad("terms-a-number", "API argument",
        lambda s: load(frame_with(s, line=["A", "B"] * 6), factors=["nozzle", "line"], terms=[1, 2]), ExplorerError,
        "a model term is a column name or a list of column names, not 1"),
    Bad("terms-one-text", "API argument",
        lambda s: load(frame_with(s, line=["A", "B"] * 6), factors=["nozzle", "line"], terms="nozzle"), ExplorerError,
        "terms is a list of terms"),
    Bad("terms-unknown-column", "API argument",
        lambda s: load(frame_with(s, line=["A", "B"] * 6), factors=["nozzle", "line"],
                       terms=["nozzle", "line", "nozzle × bogus"]), ExplorerError, "names ['bogus'] column(s) outside"),
    Bad("sweep-no-transform-applies", "API argument",
        lambda s: load(frame_with(s, y=s.frame.y - 11)).robustness_sweep(transforms=["log", 0.5]), ExplorerError,
        "no analysis to run: Log transform left out"),
    Bad("trend-values-text", "API argument",
        lambda s: s.study.trend("nozzle", values={"N1": "thin", "N2": 2, "N3": 4}), ExplorerError,
        "the value of level 'N1' must be a number, not 'thin'"),
    Bad("box-cox-lambdas-text", "API argument", lambda s: s.study.box_cox(lambdas="x"), ExplorerError,
        "lambdas is a list of Box-Cox powers"),
    Bad("box-cox-lambdas-item", "API argument", lambda s: s.study.box_cox(lambdas=[1, "x"]), ExplorerError,
        "lambdas is a list of Box-Cox powers"),
    Bad("box-cox-lambdas-range", "API argument", lambda s: s.study.box_cox(lambdas=[0.5, 40]), ExplorerError,
        "between -10 and 10"),
    Bad("srange-df-zero", "API argument", lambda s: srange_sf(3.0, 3, 0), ExplorerError,
        "degrees of freedom must be positive"),
    Bad("srange-df-nan", "API argument", lambda s: srange_ppf(0.95, 3, [5.0, math.nan]), ExplorerError,
        "degrees of freedom must be positive"),
    # ---------------- outputs (files that exist must survive)
    Bad("save-into-folder", "API argument", lambda s: s.study.save(s.inputs), OutputError, "is a folder"),
    Bad("save-over-data", "API argument", lambda s: s.file_study.save(s.data_csv), OutputError,
        "will not write over the data file"),
    Bad("report-over-existing", "API argument", lambda s: s.study.report(s.report), OutputError, "exists"),
    Bad("save-missing-folder", "API argument", lambda s: s.study.save(s.inputs / "nope" / "x.json"), OutputError,
        "does not exist"),
    # ---------------- study files
    Bad("study-missing", "study file", lambda s: ex.Study.load(s.inputs / "none.json", s.frame), ReplayError,
        "no saved study at"),
    Bad("study-not-json", "study file", lambda s: ex.Study.load(s.file("nj.json", "{nope"), s.frame), ReplayError,
        "is not valid JSON"),
    Bad("study-array", "study file", lambda s: ex.Study.load(s.file("arr.json", "[1, 2]"), s.frame), ReplayError,
        "not a saved study"),
    Bad("study-wrong-format", "study file",
        lambda s: ex.Study.load(s.study_variant("fmt.json", lambda d: d.update(format="other/thing")), s.frame),
        ReplayError, "not a saved study"),
    Bad("study-no-spec", "study file",
        lambda s: ex.Study.load(s.study_variant("nospec.json", lambda d: d.pop("spec")), s.frame), ReplayError,
        "spec"),
    Bad("study-reason-number", "study file",
        lambda s: ex.Study.load(s.study_variant("rn.json", lambda d: d["edits"][0].update(reason=5)), s.frame),
        ReplayError, "reason"),
    Bad("study-unknown-kind", "study file",
        lambda s: ex.Study.load(s.study_variant("kind.json", lambda d: d["edits"][0].update(kind="explode")),
                                s.frame), ReplayError, "explode"),
    Bad("study-unknown-row", "study file",
        lambda s: ex.Study.load(s.study_variant("row.json", lambda d: d["edits"][0].update(rows=["P999"])),
                                s.frame), ReplayError, "P999"),
    Bad("study-newline-in-time", "study file",
        lambda s: ex.Study.load(s.study_variant("at.json", lambda d: d["edits"][0].update(at="2026\nimport os")),
                                s.frame), ReplayError, "ISO 8601"),
    Bad("study-other-data", "study file",
        lambda s: ex.Study.load(s.study_file, frame_with(s, y=[v + (i == 0) for i, (_, v) in enumerate(ROWS)])),
        ReplayError, "data differ"),
    Bad("study-null", "study file", lambda s: ex.Study.load(s.file("null.json", "null"), s.frame), ReplayError,
        "not a saved study"),
    Bad("study-binary", "study file", lambda s: ex.Study.load(s.file("bin.json", b"\x00\xff\xfe"), s.frame),
        ReplayError, "is not UTF-8 text"),
    Bad("study-deeply-nested", "study file",
        lambda s: ex.Study.load(s.file("deep.json", "[" * 100_000 + "]" * 100_000), s.frame), ReplayError,
        "nested too deeply"),
    Bad("study-folder", "study file", lambda s: ex.Study.load(s.inputs, s.frame), ReplayError, "is a folder"),
    Bad("study-edits-text", "study file",
        lambda s: ex.Study.load(s.study_variant("et.json", lambda d: d.update(edits="drop all")), s.frame),
        ReplayError, "edits: must be a list"),
    Bad("study-bad-base64", "study file",
        lambda s: ex.Study.load(s.study_variant("b64.json", lambda d: d["data"]["row_check"].update(digests="@@@")),
                                s.frame), ReplayError, "is not base64 text"),
    Bad("study-unknown-fingerprint-method", "study file",
        lambda s: ex.Study.load(s.study_variant("fm.json", lambda d: d["data"].update(fingerprint_method="md5")),
                                s.frame), ReplayError, "data.fingerprint_method"),
    Bad("study-fingerprint-method-swapped", "study file",  # a fingerprint checked by another definition never matches
        lambda s: ex.Study.load(s.study_variant("fm2.json", lambda d: d["data"].update(
            fingerprint_method="pandas-row-hash")), s.frame), ReplayError, "data differ"),
    Bad("study-negative-position", "study file",
        lambda s: ex.Study.load(s.study_variant("neg.json", lambda d: d.update(position=-1)), s.frame), ReplayError,
        "position: must be at least 0"),
    Bad("study-position-past-end", "study file",
        lambda s: ex.Study.load(s.study_variant("past.json", lambda d: d.update(position=9)), s.frame), ReplayError,
        "past the end of the edit log"),
    Bad("study-alpha-text", "study file",
        lambda s: ex.Study.load(s.study_variant("alpha.json", lambda d: d["spec"].update(alpha="0.05")), s.frame),
        ReplayError, "spec.alpha: must be a number"),
    Bad("study-unknown-field", "study file",
        lambda s: ex.Study.load(s.study_variant("evil.json", lambda d: d.update(evil="x")), s.frame), ReplayError,
        "evil: is not a field"),
    Bad("study-nested-row-id", "study file",
        lambda s: ex.Study.load(s.study_variant("rows.json", lambda d: d["edits"][0].update(rows=[["P100"]])),
                                s.frame), ReplayError, "edits[0].rows[0]"),
    Bad("study-ledger-missing", "study file",
        lambda s: ex.Study.load(s.study_variant("nol.json", lambda d: d.pop("ledger")), s.frame), ReplayError,
        "ledger"),
    Bad("study-ledger-time-newline", "study file",
        lambda s: ex.Study.load(s.study_variant("lat.json", lambda d: d["ledger"]["entries"][0].update(
            at="2026-03-01T09:30:00Z\nimport os")), s.frame), ReplayError, "ledger.entries[0].at"),
    Bad("study-ledger-count-negative", "study file",
        lambda s: ex.Study.load(s.study_variant("lcn.json", lambda d: d["ledger"]["entries"][0].update(count=-1)),
                                s.frame), ReplayError, "ledger.entries[0].count"),
    Bad("study-ledger-kind-unknown", "study file",
        lambda s: ex.Study.load(s.study_variant("lk.json", lambda d: d["ledger"]["entries"][0].update(kind="exec")),
                                s.frame), ReplayError, "ledger.entries[0].kind"),
    Bad("study-ledger-understated", "study file",
        lambda s: ex.Study.load(s.study_variant("lu.json", lambda d: d["ledger"].update(entries=[])), s.frame),
        ReplayError, "records 0 edit(s) made"),
    Bad("study-ledger-origin-number", "study file",
        lambda s: ex.Study.load(s.study_variant("lo.json", lambda d: d["ledger"]["entries"][0].update(origin=7)),
                                s.frame), ReplayError, "ledger.entries[0].origin"),
    Bad("study-comparisons-unknown", "study file",
        lambda s: ex.Study.load(s.study_variant("cmp.json", lambda d: d.update(comparisons="by eye")), s.frame),
        ReplayError, "comparisons"),
    Bad("study-newer-schema", "study file",
        lambda s: ex.Study.load(s.study_variant("v99.json", lambda d: d.update(schema=99)), s.frame), ReplayError,
        "newer than this kit reads"),
    Bad("study-spec-transform", "study file",
        lambda s: ex.Study.load(s.study_variant("tr.json", lambda d: d["spec"].update(transform="logit")), s.frame),
        ReplayError, "spec: transform must be one of"),
    Bad("study-spec-transform-power", "study file",
        lambda s: ex.Study.load(s.study_variant("trp.json", lambda d: d["spec"].update(transform=99)), s.frame),
        ReplayError, "spec: a Box-Cox power must be a finite number between -10 and 10, not 99"),
    Bad("study-spec-covariate-number", "study file",
        lambda s: ex.Study.load(s.study_variant("cv.json", lambda d: d["spec"].update(covariates=[3])), s.frame),
        ReplayError, "spec.covariates[0]: must be text"),
    Bad("study-spec-covariate-factor", "study file",
        lambda s: ex.Study.load(s.study_variant("cvf.json", lambda d: d["spec"].update(covariates=["nozzle"])),
                                s.frame), ReplayError, "spec: 'nozzle' cannot be both a covariate"),
    Bad("study-spec-terms-unknown", "study file",
        lambda s: ex.Study.load(s.study_variant("tu.json", lambda d: d["spec"].update(terms=[["nozzle"], ["bogus"]])),
                                s.frame), ReplayError, "spec: model term ['bogus'] names ['bogus'] column(s) outside"),
    Bad("study-planned-bad-margin", "study file",
        lambda s: ex.Study.load(s.study_variant("pm.json", lambda d: d.update(planned=[
            {"kind": "equivalence", "factor": "nozzle", "options": {"margin": -1, "control": "N1"}}])), s.frame),
        ReplayError, "planned[0]: the margin must be positive"),
    Bad("study-planned-bad-weights", "study file",
        lambda s: ex.Study.load(s.study_variant("pw.json", lambda d: d.update(planned=[
            {"kind": "contrast", "factor": "nozzle", "options": {"weights": {"N1": 1, "N2": 1}}}])), s.frame),
        ReplayError, "planned[0]: contrast 'contrast': the weights sum to 2"),
    Bad("study-other-columns", "study file",
        lambda s: ex.Study.load(s.study_file, s.frame.rename(columns={"nozzle": "head"})), ExplorerError,
        "nozzle"),
    Bad("study-levels-reordered", "study file",  # same values, so the same fingerprint; 'later' contrasts would differ
        lambda s: ex.Study.load(s.study_file, s.frame.assign(nozzle=pd.Categorical(
            s.frame["nozzle"], categories=["N3", "N2", "N1"]))), ReplayError,
        "data.level_order: factor 'nozzle' was analysed with its levels in the order ['N1', 'N2', 'N3']"),
    Bad("study-levels-reordered-allow-mismatch", "study file",
        lambda s: ex.Study.load(s.study_file, s.frame.assign(nozzle=pd.Categorical(
            s.frame["nozzle"], categories=["N2", "N1", "N3"])), allow_mismatch=True), ReplayError,
        "reorder_categories(['N1', 'N2', 'N3'])"),
    Bad("study-level-order-text", "study file",
        lambda s: ex.Study.load(s.study_variant("lo1.json", lambda d: d["data"].update(level_order={"nozzle": "N1"})),
                                s.frame), ReplayError, "data.level_order.nozzle: must be a list"),
    Bad("study-level-order-unknown-factor", "study file",
        lambda s: ex.Study.load(s.study_variant("lo2.json", lambda d: d["data"].update(level_order={"head": ["a"]})),
                                s.frame), ReplayError, "data.level_order: 'head' is not a factor of the model"),
    Bad("study-level-order-repeated", "study file",
        lambda s: ex.Study.load(s.study_variant("lo3.json", lambda d: d["data"].update(
            level_order={"nozzle": ["N1", "N2", "N1"]})), s.frame), ReplayError,
        "data.level_order.nozzle: level 'N1' appears twice"),
    Bad("study-level-order-huge", "study file",
        lambda s: ex.Study.load(s.study_variant("lo4.json", lambda d: d["data"].update(
            level_order={"nozzle": [f"N{i}" for i in range(5000)]})), s.frame), ReplayError,
        "data.level_order.nozzle: must have at most 1000 item(s)"),
    # ---------------- conditions (summary-backed study, DuckDB)
    cond("cond-text-vs-number", "nozzle > 5", "column 'nozzle' (text)"),
    cond("cond-bare-column", "nozzle", "must be true/false"),
    cond("cond-bad-date", "day = DATE '2026-13-45'", "not a valid date"),
    cond("cond-bad-date-text", "day > '2026-02-30'", "'2026-02-30' is not a valid timestamp for column 'day'"),
    cond("cond-date-vs-number", "day > 5", "column 'day' (a timestamp)"),
    cond("cond-deep-brackets", "(" * 3000 + "y > 0" + ")" * 3000, "nested too deep"),
    cond("cond-deep-not", "NOT " * 3000 + "y > 0", "nested too deep"),
    cond("cond-arabic-digit", "y > \u0663", "digits 0-9"),
    cond("cond-equals-null", "note = NULL", "IS NULL"),
    cond("cond-statement", "y > 1; DROP TABLE t", "one condition only"),
    cond("cond-comment", "y > 1 -- all", "comments"),
    cond("cond-subquery", "y > (SELECT 1)", "not a column"),
    cond("cond-backslash", "note = 'a\\'", "backslashes"),
    cond("cond-unknown-column", "nozle = 'N1'", "did you mean 'nozzle'"),
    cond("cond-not-text", 5, "a predicate is text"),
    cond("cond-empty", "   ", "it is empty"),
    cond("cond-no-column", "1 = 1", "names no column"),
    cond("cond-quote-inside", "note = 'O''Brien'", "single quote"),
    cond("cond-infinite-number", "y > 1e999", "not a finite number"),
    cond("cond-function-arity", "abs(y, 1) > 2", "takes 1 argument"),
    cond("cond-like-number", "y LIKE '1%'", "LIKE needs text"),
    cond("cond-catches-nothing", "note = 'rework (line 2)'", "holds for no kept row", EditError),
    Bad("cond-already-out", "condition", lambda s: s.summary.drop_where("y > 12.5", reason="again"), EditError,
        "already left out"),
    Bad("cond-restore-unknown", "condition", lambda s: s.summary.restore_where("y > 11", reason="x"), EditError,
        "no condition 'y > 11' is in effect"),
    Bad("cond-move-unknown-factor", "condition", lambda s: s.summary.move_where("y > 11", "head", "N1", reason="x"),
        EditError, "'head' is not a factor"),
    Bad("cond-drop-level-unknown", "condition", lambda s: s.summary.drop_level("nozzle", "N9", reason="x"),
        EditError, "no level(s) 'N9'"),
    Bad("cond-row-id-edit", "condition", lambda s: s.summary.drop([3], reason="x"), EditError, "drop_where"),
    # ---------------- specification choices a summary-backed study cannot compute from cell summaries
    Bad("summary-transform-log", "API argument", lambda s: s.summary.set_transform("log", reason="x"), EditError,
        "a transform needs every row"),
    Bad("summary-transform-power", "API argument", lambda s: s.summary.set_transform(0.5, reason="x"), EditError,
        "sum of squares of 'y' as read"),
    Bad("summary-test-kruskal", "API argument", lambda s: s.summary.set_test("kruskal"), ExplorerError,
        "the kruskal test needs every row"),
    Bad("summary-test-permutation", "API argument", lambda s: s.summary.set_test("permutation"), ExplorerError,
        "the permutation test needs every row"),
    Bad("summary-test-unknown", "API argument", lambda s: s.summary.set_test("median"), ExplorerError,
        "test must be one of"),
    Bad("summary-terms-unknown", "API argument", lambda s: s.summary.set_terms(["nozzle", "nozzle × day"]),
        ExplorerError, "names ['day'] column(s) outside the model"),
    Bad("summary-respecify", "API argument", lambda s: s.summary.respecify(factors=["note"]), EditError,
        "a summary-backed study keeps its model"),
    Bad("summary-box-cox", "API argument", lambda s: s.summary.box_cox(), DesignError,
        "every kept row is needed for the Box-Cox profile"),
    Bad("summary-trimmed-means", "API argument", lambda s: s.summary.trimmed_means(), DesignError,
        "every kept row is needed for the trimmed-means test"),
    Bad("summary-dunn", "API argument", lambda s: s.summary.dunn(), DesignError,
        "every kept row is needed for Dunn's test"),
    Bad("summary-hc3", "API argument", lambda s: s.summary.hc3_tests(), DesignError,
        "every kept row is needed for HC3 tests"),
    Bad("summary-row-deletion", "API argument", lambda s: s.summary.row_deletion(), DesignError,
        "leaving out each row in turn needs every row"),
    Bad("summary-unit-deletion", "API argument", lambda s: s.summary.unit_deletion("nozzle"), DesignError,
        "use study.set_aside_scan()"),
    Bad("summary-file-transform", "study file",
        lambda s: SummaryStudy.load(summary_variant(s, "st.json", "transform", "log"), s.frame), ReplayError,
        "a transform needs every row"),
    Bad("summary-file-covariate", "study file",
        lambda s: SummaryStudy.load(summary_variant(s, "sc.json", "covariates", ["day"]), s.frame), ReplayError,
        "cross-products"),
    Bad("summary-file-random", "study file",
        lambda s: SummaryStudy.load(summary_variant(s, "sr.json", "random", ["nozzle"]), s.frame), ReplayError,
        "crossed fixed factors and blocks only"),
    Bad("summary-file-rank-test", "study file",
        lambda s: SummaryStudy.load(summary_variant(s, "sk.json", "test", "kruskal"), s.frame), ReplayError,
        "the kruskal test needs every row"),
    # ---------------- widget fields (the widget shows refusals; it never raises into the notebook)
    Bad("widget-no-reason", "widget field",
        widget_action(lambda w: w.leave_out_picked(), pick=("P100",)), WidgetRefusal, "Write a reason"),
    Bad("widget-blank-reason", "widget field",
        widget_action(lambda w: w.leave_out_picked(), reason="   ", pick=("P100",)), WidgetRefusal,
        "Write a reason"),
    Bad("widget-nothing-picked", "widget field", widget_action(lambda w: w.leave_out_picked(), reason="x"),
        WidgetRefusal, "Pick a row first"),
    Bad("widget-unknown-row", "widget field",
        widget_action(lambda w: w.leave_out_picked(), reason="x", pick=("P999",)), EditError, "no rows with ids"),
    Bad("widget-move-empty-level", "widget field",
        widget_action(lambda w: w.move_picked("   "), reason="x", pick=("P100",)), WidgetRefusal,
        "type or choose the level"),
    Bad("widget-restore-kept", "widget field",
        widget_action(lambda w: w.restore_picked(), pick=("P100",)), EditError, "nothing to restore"),
    Bad("widget-restore-none-chosen", "widget field", widget_action(lambda w: w.restore_chosen()), WidgetRefusal,
        "Choose rows"),
    Bad("widget-undo-at-start", "widget field", widget_action(lambda w: w.undo()), EditError, "nothing to undo"),
    Bad("widget-level-blank", "widget field", widget_action(set_level_box("  "), reason="x"), WidgetRefusal,
        "needs a name"),
    Bad("widget-level-no-reason", "widget field", widget_action(set_level_box("M")), WidgetRefusal,
        "Write a reason"),
    Bad("widget-id-as-factor", "widget field", pick_model("y", ("panel",)), WidgetRefusal,
        "cannot be both the row id"),
    Bad("widget-no-factor", "widget field", pick_model("y", ()), WidgetRefusal, "Pick at least one factor"),
    # ---------------- command-line options (exit codes: 2 bad input, 3 edit file, 4 output)
    Bad("cli-missing-data", "CLI option", lambda s: cli("check", str(s.inputs / "none.csv"), "--response", "y",
                                                         "--factor", "nozzle"), 2, "no data file"),
    Bad("cli-no-response", "CLI option", lambda s: cli("check", str(s.data_csv), "--factor", "nozzle"), 2,
        "name the --response"),
    Bad("cli-unknown-column", "CLI option", lambda s: cli("check", str(s.data_csv), "--response", "y",
                                                           "--factor", "nozle"), 2, "Did you mean"),
    Bad("cli-alpha-text", "CLI option", lambda s: cli("check", str(s.data_csv), "--response", "y", "--factor",
                                                       "nozzle", "--alpha", "five"), 2, "invalid float value"),
    Bad("cli-alpha-range", "CLI option", lambda s: cli("check", str(s.data_csv), "--response", "y", "--factor",
                                                        "nozzle", "--alpha", "1.5"), 2, "alpha must be between"),
    Bad("cli-latin1-data", "CLI option",
        lambda s: cli("check", str(s.file("cl1.csv", f"nozzle,y\n{L1},1\n".encode("latin-1"))), "--response", "y",
                      "--factor", "nozzle"), 2, "not UTF-8 text"),
    Bad("cli-edits-missing", "CLI option", lambda s: cli("check", str(s.data_csv), "--edits",
                                                          str(s.inputs / "none.json")), 3, "no edit file"),
    Bad("cli-edits-folder", "CLI option", lambda s: cli("check", str(s.data_csv), "--edits", str(s.inputs)), 3,
        "is a folder"),
    Bad("cli-edits-not-json", "CLI option",
        lambda s: cli("check", str(s.data_csv), "--edits", str(s.file("cnj.json", "{"))), 3, "not valid JSON"),
    Bad("cli-edits-other-model", "CLI option",
        lambda s: cli("check", str(s.data_csv), "--edits", str(s.study_file), "--response", "note"), 3,
        "saved for another model"),
    Bad("cli-report-over-data", "CLI option",
        lambda s: cli("report", str(s.data_csv), "--response", "y", "--factor", "nozzle", "-o", str(s.data_csv)), 4,
        "will not write over the data file"),
    Bad("cli-report-existing", "CLI option",
        lambda s: cli("report", str(s.data_csv), "--response", "y", "--factor", "nozzle", "-o", str(s.report)), 4,
        "exists"),
    Bad("cli-report-folder", "CLI option",
        lambda s: cli("report", str(s.data_csv), "--response", "y", "--factor", "nozzle", "-o", str(s.inputs)), 4,
        "is a folder"),
    Bad("cli-report-missing-folder", "CLI option",
        lambda s: cli("report", str(s.data_csv), "--response", "y", "--factor", "nozzle", "-o",
                      str(s.inputs / "nope" / "r.html")), 4, "nope"),
    Bad("cli-unknown-command", "CLI option", lambda s: cli("explode"), 2, "invalid choice"),
    Bad("cli-id-column-missing", "CLI option",
        lambda s: cli("check", str(s.data_csv), "--response", "y", "--factor", "nozzle", "--id-column", "serial"), 2,
        "id column 'serial'"),
]


def test_the_catalogue_is_large_and_covers_every_entry_point():
    by_where: dict[str, int] = {}
    for case in CATALOGUE:
        by_where[case.where] = by_where.get(case.where, 0) + 1
    assert len(CATALOGUE) >= 120 and len({c.id for c in CATALOGUE}) == len(CATALOGUE)
    assert set(by_where) == {"data file", "API argument", "study file", "condition", "widget field", "CLI option"}


@pytest.mark.parametrize("case", CATALOGUE, ids=[c.id for c in CATALOGUE])
def test_bad_input_is_refused_and_changes_nothing(case: Bad, scene: Scene, capsys) -> None:
    if case.where == "widget field":
        scene.widget  # noqa: B018  built before the snapshot
    files = _files(scene.folder)
    states = _state(scene.study), _state(scene.summary), _state(scene.file_study)
    widget = _widget_state(scene.widget) if case.where == "widget field" else None

    if isinstance(case.error, int):
        try:
            code = case.run(scene)
        except SystemExit as exc:  # argparse refuses before the command runs
            code = exc.code
        err = capsys.readouterr().err
        assert code == case.error, err
        assert case.fragment in err, err
        assert "Traceback" not in err
    else:
        with pytest.raises(case.error) as info:
            case.run(scene)
        assert type(info.value) is case.error or case.error in (ExplorerError, PredicateError)
        assert case.fragment in str(info.value), str(info.value)

    after = _files(scene.folder)
    new = sorted(set(after) - set(files))
    made = [n for n in new if not n.startswith("inputs" + os.sep)]
    assert not made, f"files appeared: {made}"
    assert {k: v for k, v in after.items() if k in files} == files, "an existing file changed"
    pd.testing.assert_frame_equal(scene.frame, scene.frame_copy)
    assert (_state(scene.study), _state(scene.summary), _state(scene.file_study)) == states
    if widget is not None:
        assert _widget_state(scene.widget) == widget
