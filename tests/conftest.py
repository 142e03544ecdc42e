"""Shared fixtures and helpers for the test suite."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))  # lets tests import helper modules such as nist_strd

ROOT = Path(__file__).resolve().parents[1]
DEMO_CSV = ROOT / "data" / "coating_thickness.csv"


@pytest.fixture
def demo_csv() -> Path:
    return DEMO_CSV
