"""Old home of the engine, inference, sensitivity and study modules (deprecated).

``explorer.core`` was split into layered packages: :mod:`explorer.engine`,
:mod:`explorer.inference`, :mod:`explorer.sensitivity` and :mod:`explorer.study`.
For one release the old import paths keep working: ``import explorer.core.X`` and
``from explorer.core import Name`` give the objects at their new homes (the very same
module objects, not copies) and emit a :class:`DeprecationWarning` naming the new path.
This file is the only one left here; the mapping below is the whole of the old layout.
"""

from __future__ import annotations

import importlib
import importlib.abc
import importlib.machinery
import sys
import warnings
from types import ModuleType
from typing import Any

#: old module name under ``explorer.core`` -> its new dotted path
MOVED: dict[str, str] = {
    "aliasing": "explorer.engine.aliasing",
    "analysis": "explorer.engine.analysis",
    "blocking": "explorer.engine.blocking",
    "cellfit": "explorer.engine.cellfit",
    "cells": "explorer.engine.cells",
    "dataset": "explorer.engine.dataset",
    "decimal_shift": "explorer.engine.decimal_shift",
    "design": "explorer.engine.design",
    "design_checks": "explorer.engine.design_checks",
    "design_layout": "explorer.engine.design_layout",
    "distributions": "explorer.engine.distributions",
    "edits": "explorer.engine.edits",
    "ems": "explorer.engine.ems",
    "errors": "explorer.engine.errors",
    "factorial": "explorer.engine.factorial",
    "fitrows": "explorer.engine.fitrows",
    "groupstats": "explorer.engine.groupstats",
    "loading": "explorer.engine.loading",
    "marginal_means": "explorer.engine.marginal_means",
    "mixed_partition": "explorer.engine.mixed_partition",
    "moves": "explorer.engine.moves",
    "noncentral_f": "explorer.engine.noncentral_f",
    "oneway": "explorer.engine.oneway",
    "reml": "explorer.engine.reml",
    "response_unit": "explorer.engine.response_unit",
    "results": "explorer.engine.results",
    "spec": "explorer.engine.spec",
    "studentized_range": "explorer.engine.studentized_range",
    "table_checks": "explorer.engine.table_checks",
    "tables": "explorer.engine.tables",
    "term_effects": "explorer.engine.term_effects",
    "variance_components": "explorer.engine.variance_components",
    "view": "explorer.engine.view",
    "assumptions": "explorer.inference.assumptions",
    "battery": "explorer.inference.battery",
    "comparisons": "explorer.inference.comparisons",
    "effect_sizes": "explorer.inference.effect_sizes",
    "letters": "explorer.inference.letters",
    "measurement_system": "explorer.inference.measurement_system",
    "omnibus": "explorer.inference.omnibus",
    "oneway_inputs": "explorer.inference.oneway_inputs",
    "outliers": "explorer.inference.outliers",
    "power": "explorer.inference.power",
    "repeated_measures": "explorer.inference.repeated_measures",
    "alternatives": "explorer.sensitivity.alternatives",
    "case_deletion": "explorer.sensitivity.case_deletion",
    "cell_deletion": "explorer.sensitivity.cell_deletion",
    "cell_regroup": "explorer.sensitivity.cell_regroup",
    "flip": "explorer.sensitivity.flip",
    "influence": "explorer.sensitivity.influence",
    "mixed_guard": "explorer.sensitivity.mixed_guard",
    "regroup": "explorer.sensitivity.regroup",
    "sweep": "explorer.sensitivity.sweep",
    "sweep_coincide": "explorer.sensitivity.sweep_coincide",
    "output_files": "explorer.study.output_files",
    "persistence": "explorer.study.persistence",
    "study": "explorer.study.study",
}

#: names the old ``explorer.core`` package exported -> the package that exports them now

def _warn(old: str, new: str) -> None:
    warnings.warn(f"{old} is deprecated and will be removed in the next release; use {new}",
                  DeprecationWarning, stacklevel=3)


class _MovedModuleLoader(importlib.abc.Loader):
    """Loads ``explorer.core.X`` as the module object of its new home (after a warning)."""

    def __init__(self, target: str) -> None:
        self.target = target
        self._spec: Any = None

    def create_module(self, spec: importlib.machinery.ModuleSpec) -> ModuleType:
        _warn(spec.name, self.target)
        module = importlib.import_module(self.target)
        self._spec = module.__spec__
        return module

    def exec_module(self, module: ModuleType) -> None:
        # the import system stamped the alias's spec on the shared module: give it back its own
        module.__spec__ = self._spec


class _MovedModuleFinder(importlib.abc.MetaPathFinder):
    """The one import hook: finds ``explorer.core.X`` for every X in :data:`MOVED`."""

    def find_spec(self, fullname: str, path: Any = None, target: Any = None) -> importlib.machinery.ModuleSpec | None:
        prefix, _, leaf = fullname.rpartition(".")
        if prefix != __name__ or leaf not in MOVED:
            return None
        return importlib.machinery.ModuleSpec(fullname, _MovedModuleLoader(MOVED[leaf]))


if not any(isinstance(f, _MovedModuleFinder) for f in sys.meta_path):
    sys.meta_path.insert(0, _MovedModuleFinder())


_PACKAGES = ("explorer.engine", "explorer.inference", "explorer.sensitivity", "explorer.study")


def _home_of(name: str) -> str | None:
    for package in _PACKAGES:
        module = importlib.import_module(package)
        if name in getattr(module, "__all__", ()):
            return package
    return None


def __getattr__(name: str) -> Any:
    """``from explorer.core import Study`` and ``explorer.core.Study``: the object at its new home."""
    if name == "__all__":  # ``from explorer.core import *``: the names the old package exported
        return [n for package in _PACKAGES for n in importlib.import_module(package).__all__]
    if name in MOVED:
        _warn(f"{__name__}.{name}", MOVED[name])
        return importlib.import_module(MOVED[name])
    home = _home_of(name) if not name.startswith("__") else None
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    _warn(f"{__name__}.{name}", f"{home}.{name}")
    return getattr(importlib.import_module(home), name)
