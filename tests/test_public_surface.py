"""The public surface: what ``import explorer`` offers, and what ``explorer.stats`` holds.

``explorer`` exports the study types, the widget's entry points, the errors, ModelSpec,
the result types and the ``stats`` module; names it exported before resolve for one
release with a DeprecationWarning naming their new home. Not a statistical check.
"""

from __future__ import annotations

import importlib
import inspect
import subprocess
import sys

import pytest

import explorer
import explorer.stats


def test_top_level_exports_only_the_public_surface():
    expected = {*explorer.STUDY_TYPES, *explorer.DATA, *explorer.WIDGET, *explorer.ERRORS, "ModelSpec", *explorer.RESULT_TYPES,
                "stats", "__version__"}
    assert set(explorer.__all__) == expected
    assert len(explorer.__all__) < 75  # was 101 names, engine internals included
    for name in explorer.__all__:
        if name not in explorer.WIDGET and name != "SummaryStudy":
            assert hasattr(explorer, name), name


def test_errors_share_one_base():
    for name in explorer.ERRORS:
        assert issubclass(getattr(explorer, name), explorer.ExplorerError)


def test_result_types_are_frozen_values():
    import dataclasses

    for name in explorer.RESULT_TYPES:
        cls = getattr(explorer, name)
        assert dataclasses.is_dataclass(cls), name
        params = cls.__dataclass_params__  # type: ignore[attr-defined]
        assert params.frozen, f"{name} is not frozen"


def test_stats_functions_are_documented_and_callable():
    for name in explorer.stats.__all__:
        fn = getattr(explorer.stats, name)
        assert callable(fn) and inspect.getdoc(fn), name
        assert f":func:`{name}`" in explorer.stats.__doc__, f"{name} is not in the module's table"


@pytest.mark.parametrize("name, home", [("tukey", "explorer.stats"), ("welch_f", "explorer.stats"),
                                         ("run_battery", "explorer.stats"), ("analyze", "explorer.engine"),
                                         ("fit_cells", "explorer.engine"),
                                         ("evaluate_alternatives", "explorer.sensitivity")])
def test_old_top_level_names_warn_and_resolve(name, home):
    with pytest.warns(DeprecationWarning, match=f"use {home}.{name}"):
        obj = getattr(explorer, name)
    assert obj is getattr(importlib.import_module(home), name)


def test_unknown_names_fail_plainly():
    with pytest.raises(AttributeError, match="no attribute 'nonexistent'"):
        explorer.nonexistent  # noqa: B018


def test_importing_the_kit_warns_about_nothing():
    out = subprocess.run([sys.executable, "-W", "error", "-c", "import explorer, explorer.stats; explorer.Study"],
                         capture_output=True, text=True)
    assert out.returncode == 0, out.stderr[-2000:]
