"""The lint gate of ``.ci/run``, also in the test run: ruff finds nothing in the package and tests.

Not a statistical check; rules and import order are configured in ``pyproject.toml``.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_ruff_finds_nothing():
    pytest.importorskip("ruff")
    out = subprocess.run([sys.executable, "-m", "ruff", "check", "--output-format", "concise", "explorer", "tests"],
                         cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stdout[-4000:] + out.stderr[-2000:]
