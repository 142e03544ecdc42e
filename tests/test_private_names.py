"""Private by name: each module's ``__all__`` is what other modules of the kit may import from it.

The rule (DEVELOPERS.md, "Public surface"): every module lists its shared names in
``__all__``; another module imports only those (never a ``_name``); a helper used in one
module only stays out of ``__all__`` and starts with an underscore. Read with ``ast``,
lazy imports inside functions included. Not a statistical check.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "explorer"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}
TREES = {name: ast.parse(path.read_text(encoding="utf-8")) for name, path in MODULES.items()}


def _declared_all(tree: ast.Module) -> set[str] | None:
    for node in tree.body:
        targets = node.targets if isinstance(node, ast.Assign) else [node.target] if isinstance(node, ast.AnnAssign) else []
        if any(isinstance(t, ast.Name) and t.id == "__all__" for t in targets) and node.value is not None:
            try:
                return set(ast.literal_eval(node.value))
            except ValueError:  # built from lists (the package root): checked by test_public_surface
                return None
    return None


def _imports(name: str, tree: ast.Module) -> list[tuple[str, str, int]]:
    """(source module, imported name, line) of every ``from explorer... import name`` in ``tree``."""
    package = name.split(".") if MODULES[name].name == "__init__.py" else name.split(".")[:-1]
    found = []
    for node in ast.walk(tree):
        if not isinstance(node, ast.ImportFrom):
            continue
        if node.level:
            base = package[: len(package) - node.level + 1]
            source = ".".join(base + ([node.module] if node.module else []))
        else:
            source = node.module or ""
        if source.split(".")[0] != "explorer":
            continue
        found += [(source, a.name, node.lineno) for a in node.names if f"{source}.{a.name}" not in MODULES]
    return found


def test_every_module_declares_what_it_shares():
    missing = [name for name, tree in TREES.items()
               if not any(isinstance(n, (ast.Assign, ast.AnnAssign)) and "__all__" in ast.unparse(n).split("=")[0]
                          for n in tree.body)]
    assert missing == [] or set(missing) <= {"explorer.__main__", "explorer._version", "explorer.core"}, missing


@pytest.mark.parametrize("name", sorted(MODULES))
def test_modules_import_only_what_others_share(name):
    bad = []
    for source, imported, line in _imports(name, TREES[name]):
        if imported.startswith("__") or source not in TREES:
            continue  # dunders (__version__) and names of packages' lazy attributes
        if imported.startswith("_"):
            bad.append(f"line {line}: private {source}.{imported}")
            continue
        shared = _declared_all(TREES[source])
        if shared is not None and imported not in shared:
            bad.append(f"line {line}: {source}.{imported} is not in that module's __all__")
    assert bad == [], f"{name}: " + "; ".join(bad)
