"""The notebook widget: ``Explorer(study)`` and ``explore(df, response=..., factors=...)``.

Needs the ``widget`` extra (ipywidgets, altair, anywidget, vl-convert-python).
New result views plug in through :mod:`explorer.widget.panels`.
"""

from .explorer import Explorer, explore
from .panels import (
           PANELS,
           Panel,
           PanelContext,
           Settings,
           panel,
           register_panel,
           unregister_panel,
)

__all__ = [
           "PANELS",
           "Explorer",
           "Panel",
           "PanelContext",
           "Settings",
           "explore",
           "panel",
           "register_panel",
           "unregister_panel",
]
