"""Arrows point down: no module of the kit imports a layer above its own.

The layers, lowest first: ``engine`` <- ``inference`` <- ``sensitivity`` <- ``study`` <-
the shells (``charts`` and ``summaries``, then ``report`` and ``widget``, then ``app``,
``cli`` and ``notebooks``). Every import is read from the source with :mod:`ast`, the
ones inside functions (lazy imports) and under ``TYPE_CHECKING`` included, so a lazy
import cannot hide an upward arrow. Sibling packages on one rank do not import each
other. Not a statistical check: it keeps the package layout honest.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "explorer"

#: rank of each top-level part of ``explorer``; a module may import its own part and lower ranks
RANKS: dict[str, int] = {
    "engine": 0,
    "inference": 1,
    "sensitivity": 2,
    "study": 3,
    "charts": 4,
    "summaries": 4,
    "report": 5,
    "widget": 5,
    "app": 6,
    "cli": 6,
    "app_server": 5,  # Voila with the app's locks; imports no kit module, the cli starts it
    "notebooks": 5,  # builds notebooks whose cells import the kit (as text, not as imports)
    "_version": 0,  # the version string, readable by every layer
    "formatting": -1,  # the one number formatter: imports only the renderer's leaf, below the engine
    "rendering": -2,  # the one HTML renderer and its stylesheet: imports nothing of the kit
    "__main__": 7,
    "__init__": 8,  # ``explorer`` itself re-exports the public surface
    "stats": 8,  # the documented public module of statistical functions, a facade over the layers
    "core": 8,  # the deprecated aliases of the old flat package point at every layer
}

#: the documented exceptions (lazy imports of the hand-off by a study's own hand-off methods):
#: (importing module, imported part) -> why
EXCEPTIONS: dict[tuple[str, str], str] = {
    ("explorer.study.study", "report"): (
        "Study.report() and Study.to_code() hand the study to the report package, imported lazily "
        "inside those two methods so that the statistical layers load without altair"
    ),
    ("explorer.summaries.study", "report"): (
        "SummaryStudy.to_code() writes user text through the report's one literal writer "
        "(python_literal), imported lazily inside that method"
    ),
}


def _module_name(path: Path) -> str:
    rel = path.relative_to(PACKAGE.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _part(module: str) -> str | None:
    """The top-level part of ``explorer`` a dotted name belongs to (None outside the package)."""
    parts = module.split(".")
    if parts[0] != "explorer":
        return None
    return parts[1] if len(parts) > 1 else "__init__"


def _imports(path: Path) -> list[tuple[int, str]]:
    """Every module named by an import in ``path`` (absolute dotted names), with its line."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    here = _module_name(path)
    package = here if path.name == "__init__.py" else here.rpartition(".")[0]
    found: list[tuple[int, str]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            # ``from explorer import charts`` / ``from . import widget``: a name is a module or an attribute
            found += [(node.lineno, f"{target}.{alias.name}" if _is_module(f"{target}.{alias.name}") else target)
                      for alias in node.names]
    return found


def _is_module(dotted: str) -> bool:
    path = PACKAGE.parent.joinpath(*dotted.split("."))
    return path.with_suffix(".py").is_file() or (path / "__init__.py").is_file()


def _sources() -> list[Path]:
    return sorted(PACKAGE.rglob("*.py"))


def upward_imports() -> list[str]:
    bad = []
    for path in _sources():
        here = _module_name(path)
        own = _part(here)
        assert own in RANKS, f"{here}: part {own!r} has no layer; add it to RANKS"
        for line, target in _imports(path):
            other = _part(target)
            if other is None or other == own or (here, other) in EXCEPTIONS:
                continue
            assert other in RANKS, f"{here} imports {target}: part {other!r} has no layer"
            if RANKS[other] > RANKS[own]:
                bad.append(f"{path.relative_to(PACKAGE.parent)}:{line}: {here} ({own}) imports {target} ({other}), "
                           "a layer above")
            elif RANKS[other] == RANKS[own] and own not in ("__init__", "core"):
                bad.append(f"{path.relative_to(PACKAGE.parent)}:{line}: {here} ({own}) imports its sibling "
                           f"{target} ({other})")
    return bad


def test_no_import_points_up_a_layer():
    bad = upward_imports()
    assert not bad, "imports that point up a layer:\n" + "\n".join(bad)


def test_every_exception_is_still_needed():
    """A documented exception that the code no longer uses is removed from the list."""
    used = set()
    for path in _sources():
        here = _module_name(path)
        for _, target in _imports(path):
            if (here, _part(target)) in EXCEPTIONS:
                used.add((here, _part(target)))
    assert used == set(EXCEPTIONS)


def test_the_walker_sees_lazy_and_relative_imports(tmp_path, monkeypatch):
    """The walker reads imports inside functions and resolves relative ones (checked on a made-up file)."""
    pkg = tmp_path / "explorer" / "engine"
    pkg.mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "bad.py").write_text("def f():\n    from ..study.study import Study\n    from . import dataset\n")
    (pkg / "dataset.py").write_text("")
    monkeypatch.setattr(__import__(__name__), "PACKAGE", tmp_path / "explorer")
    found = _imports(pkg / "bad.py")
    assert [t for _, t in found] == ["explorer.study.study", "explorer.engine.dataset"]
    assert upward_imports() == [
        "explorer/engine/bad.py:2: explorer.engine.bad (engine) imports explorer.study.study (study), a layer above"
    ]


@pytest.mark.parametrize("layer", ["engine", "inference", "sensitivity", "study"])
def test_statistical_layers_import_no_shell(layer):
    """The four statistical packages never name charts, widget, report, app or cli (but the one exception)."""
    for path in sorted((PACKAGE / layer).rglob("*.py")):
        here = _module_name(path)
        for line, target in _imports(path):
            other = _part(target)
            if other is not None and RANKS.get(other, 0) >= RANKS["charts"]:
                assert (here, other) in EXCEPTIONS, f"{here}:{line} imports the shell {target}"
