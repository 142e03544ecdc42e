"""Every public function documents its parameters, what it returns, its sources and an example.

Public functions: everything ``explorer.stats`` exports and the functions ``explorer``
exports. Each docstring has numpy-style ``Parameters``, ``Returns``, ``References`` and
``Examples`` sections; the examples run as doctests (``tests/test_doctests.py``). Not a
statistical check: the statistics are checked against outside references in their own
test files.
"""

from __future__ import annotations

import inspect

import pytest

import explorer
import explorer.stats

SECTIONS = ("Parameters", "Returns", "References", "Examples")


def _public_functions() -> list[tuple[str, object]]:
    found = [(f"explorer.stats.{name}", getattr(explorer.stats, name)) for name in explorer.stats.__all__]
    for name in explorer.__all__:
        obj = getattr(explorer, name, None) if name not in explorer.WIDGET else None
        if inspect.isfunction(obj):
            found.append((f"explorer.{name}", obj))
    found.append(("explorer.explore", explorer.explore))
    return found


@pytest.mark.parametrize("name, fn", _public_functions(), ids=lambda v: v if isinstance(v, str) else "")
def test_public_function_has_every_section(name, fn):
    doc = inspect.getdoc(fn) or ""
    missing = [s for s in SECTIONS if f"\n{s}\n{'-' * len(s)}\n" not in doc]
    assert missing == [], f"{name} lacks {missing}"
    example = doc.split("\nExamples\n--------\n", 1)[1]
    assert ">>> " in example, f"{name}: the Examples section has no runnable example"
