"""variance explorer: analysis of variance you can edit, defend and hand off, in a notebook.

``Study`` is the core object; ``explore`` / ``Explorer`` (the notebook widget) load
lazily so that the core works without ipywidgets or altair installed.
"""

from __future__ import annotations

from typing import Any

from .core import *  # noqa: F403
from .core import __all__ as _core_all

__version__ = "0.1.0"
__all__ = list(_core_all) + ["explore", "Explorer", "SummaryStudy", "__version__"]


def __getattr__(name: str) -> Any:
    if name in ("explore", "Explorer"):
        from . import widget

        return getattr(widget, name)
    if name == "SummaryStudy":  # studies on cell summaries computed by DuckDB or Spark (engines load lazily)
        from .summaries import SummaryStudy

        return SummaryStudy
    raise AttributeError(f"module 'explorer' has no attribute {name!r}")
