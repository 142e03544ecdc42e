"""Every ``>>>`` example in the package's docstrings runs and prints what it says.

The examples are part of the documentation (numpy-style ``Examples`` sections); this runs
them as doctests, module by module, so that a changed result or name breaks the suite.
Modules without examples are passed over; examples that need files or engines are marked
``+SKIP``. Not a statistical check: the statistics behind each example are checked against
outside references in their own test files.
"""

from __future__ import annotations

import doctest
import importlib
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "explorer"


def _modules_with_examples() -> list[str]:
    names = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if ">>> " not in path.read_text(encoding="utf-8"):
            continue
        rel = path.relative_to(PACKAGE.parent).with_suffix("")
        parts = list(rel.parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        names.append(".".join(parts))
    return names


MODULES = _modules_with_examples()


def test_the_public_module_has_examples():
    import explorer.stats

    assert "explorer.stats" in MODULES
    assert doctest.testmod(explorer.stats, verbose=False).attempted >= 5


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples_run(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE, verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples in {name} failed (run with -s to see)"
