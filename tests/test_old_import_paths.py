"""Old import paths of the flat ``explorer.core`` package keep working for one release.

``import explorer.core.X`` and ``from explorer.core import Name`` give the very objects
at their new homes (:mod:`explorer.engine`, :mod:`explorer.inference`,
:mod:`explorer.sensitivity`, :mod:`explorer.study`) and warn with the new path. Each
check runs in a fresh interpreter, so no module is already imported.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

from explorer.core import MOVED

OLD_NAMES = {
    "Study": "explorer.study", "Results": "explorer.engine", "tukey": "explorer.inference",
    "flip_finder": "explorer.sensitivity", "Disclosure": "explorer.engine", "ModelSpec": "explorer.engine",
}


def _run(code: str) -> str:
    out = subprocess.run([sys.executable, "-W", "error::DeprecationWarning", "-c", code],
                         capture_output=True, text=True)
    return out.stderr


def test_old_module_paths_are_the_new_modules():
    """Every old module path, in one fresh interpreter: the same module object, its own spec, a warning."""
    code = (
        "import warnings, importlib\n"
        "from explorer.core import MOVED\n"
        "for old, new in MOVED.items():\n"
        "    with warnings.catch_warnings(record=True) as w:\n"
        "        warnings.simplefilter('always')\n"
        "        m = importlib.import_module('explorer.core.' + old)\n"
        "    n = importlib.import_module(new)\n"
        "    assert m is n, (m, n)\n"
        "    assert m.__spec__.name == new and m.__name__ == new, (old, m.__spec__)\n"
        "    msgs = [str(x.message) for x in w if issubclass(x.category, DeprecationWarning)]\n"
        "    assert any(('explorer.core.' + old) in s and new in s for s in msgs), (old, msgs)\n"
        "print(len(MOVED))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr[-2000:]
    assert out.stdout.strip() == str(len(MOVED)) and len(MOVED) == 57


def test_old_module_import_warns():
    """Under ``-W error::DeprecationWarning`` the old path raises, naming the new one."""
    err = _run("import explorer.core.comparisons")
    assert "DeprecationWarning" in err and "explorer.inference.comparisons" in err


@pytest.mark.parametrize("name", sorted(OLD_NAMES))
def test_old_package_names_resolve_with_a_warning(name):
    home = OLD_NAMES[name]
    with pytest.warns(DeprecationWarning, match=f"{home}.{name}"):
        import explorer.core as core

        obj = getattr(core, name)
    import importlib

    assert obj is getattr(importlib.import_module(home), name)


def test_from_import_and_star_import():
    code = (
        "import warnings\n"
        "warnings.simplefilter('ignore')\n"
        "from explorer.core import Study, run_battery\n"
        "from explorer.core.study import Study as S2\n"
        "from explorer.core.comparisons import simultaneous_pairs, tukey\n"
        "import explorer, explorer.study\n"
        "assert Study is S2 is explorer.study.Study is explorer.Study\n"
        "ns = {}\n"
        "exec('from explorer.core import *', ns)\n"
        "assert ns['Study'] is Study and ns['tukey'] is tukey and 'run_battery' in ns\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr[-2000:]


def test_unknown_old_names_fail_plainly():
    import explorer.core as core

    with pytest.raises(AttributeError, match="no attribute 'nonexistent'"):
        core.nonexistent  # noqa: B018
    with pytest.raises(ModuleNotFoundError):
        __import__("explorer.core.nonexistent")


def test_the_kit_itself_uses_no_old_path():
    """Importing the whole kit emits no deprecation warning (nothing inside uses explorer.core)."""
    err = _run("import explorer, explorer.engine, explorer.inference, explorer.sensitivity, explorer.study, "
               "explorer.report, explorer.summaries, explorer.cli")
    assert err == "", err[-2000:]
