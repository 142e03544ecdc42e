"""variance explorer: analysis of variance you can edit, defend and hand off, in a notebook.

``Study`` is the core object; ``explore`` / ``Explorer`` (the notebook widget) load
lazily so that the core works without ipywidgets or altair installed.
"""

from __future__ import annotations

from typing import Any

from ._version import __version__
from .engine import *  # noqa: F403
from .engine import __all__ as _engine_all
from .inference import *  # noqa: F403
from .inference import __all__ as _inference_all
from .sensitivity import *  # noqa: F403
from .sensitivity import __all__ as _sensitivity_all
from .study import *  # noqa: F403
from .study import __all__ as _study_all

_core_all = [*_engine_all, *_inference_all, *_sensitivity_all, *(n for n in _study_all if n not in _engine_all)]
__all__ = list(_core_all) + ["explore", "Explorer", "SummaryStudy", "__version__"]  # noqa: F405


def __getattr__(name: str) -> Any:
    if name in ("explore", "Explorer"):
        from . import widget

        return getattr(widget, name)
    if name == "SummaryStudy":  # studies on cell summaries computed by DuckDB or Spark (engines load lazily)
        from .summaries import SummaryStudy

        return SummaryStudy
    raise AttributeError(f"module 'explorer' has no attribute {name!r}")
