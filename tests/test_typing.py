"""The statistical layers' type hints hold: mypy finds no errors in engine, inference, sensitivity, study,
and ``mypy --strict`` none in engine and inference (the same commands ``.ci/run`` runs before the tests).

Not a statistical check; it keeps the public surface's annotations honest.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_core_type_checks(tmp_path):
    pytest.importorskip("mypy")
    out = subprocess.run(
        [sys.executable, "-m", "mypy", "explorer/engine", "explorer/inference", "explorer/sensitivity",
         "explorer/study", "explorer/core", "--ignore-missing-imports", "--no-error-summary",
         "--cache-dir", str(tmp_path / "mypy-cache")],
        cwd=ROOT, capture_output=True, text=True, timeout=600,
    )
    errors = [line for line in out.stdout.splitlines() if ": error:" in line]
    assert out.returncode == 0 and not errors, out.stdout[-3000:] + out.stderr[-2000:]


@pytest.mark.parametrize("layers", [("explorer/engine", "explorer/inference")])
def test_engine_and_inference_type_check_strictly(tmp_path, layers):
    pytest.importorskip("mypy")
    out = subprocess.run(
        [sys.executable, "-m", "mypy", "--strict", *layers, "--no-error-summary",
         "--cache-dir", str(tmp_path / "mypy-cache")],
        cwd=ROOT, capture_output=True, text=True, timeout=600,
    )
    errors = [line for line in out.stdout.splitlines() if ": error:" in line]
    assert out.returncode == 0 and not errors, out.stdout[-3000:] + out.stderr[-2000:]
