"""The core must not pull in the widget stack: importing it leaves ipywidgets and altair unloaded."""

from __future__ import annotations

import subprocess
import sys


def test_core_imports_no_widget_stack():
    code = (
        "import sys, explorer, explorer.engine, explorer.inference, explorer.sensitivity, explorer.study\n"
        "s = explorer.Study(__import__('pandas').DataFrame({'g': list('aabb'), 'y': [1.0, 2.0, 4.0, 5.0]}), 'y', 'g')\n"
        "s.drop([0], reason='check'); s.results\n"
        "bad = sorted(m for m in ('ipywidgets', 'altair', 'anywidget', 'vl_convert') if m in sys.modules)\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"the core imported {out.stdout.strip()}"


def test_widget_is_loaded_lazily():
    code = "import sys, explorer\nexplorer.Explorer\nprint('ipywidgets' in sys.modules)\n"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "True"
