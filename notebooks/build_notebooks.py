"""Regenerate notebooks/demo.ipynb from explorer.notebooks (safe to import: writes only when run).

    python notebooks/build_notebooks.py
"""

from __future__ import annotations

from pathlib import Path

HERE = Path(__file__).resolve().parent


def build(folder: Path = HERE) -> Path:
    from explorer.notebooks import demo_notebook, write_notebook

    return write_notebook(demo_notebook(), folder / "demo.ipynb")


if __name__ == "__main__":
    print(f"wrote {build()}")
