"""The cautions every hand-off carries; their one source of text is :mod:`explorer.study.cautions`
(the same words as the README's "Cautions" section, checked by a test)."""

from __future__ import annotations

from ..study.cautions import CAUTIONS, cautions_html, cautions_text

__all__ = ["CAUTIONS", "cautions_html", "cautions_text"]
