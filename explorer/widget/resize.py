"""Charts that take their width from their card need to hear when the card changes size.

Vega measures a ``width="container"`` chart when it is drawn and again on the window's
``resize`` event only. Inside a notebook a card also changes size without the window
doing so: a tab is opened, JupyterLab's side panel is opened or closed, the explorer
switches to one column. :class:`ResizeRelay` is a small invisible widget that watches the
explorer and its cards (a ``ResizeObserver`` in the browser) and, once per animation
frame at most, tells the page that its size changed, so every chart measures its card
again. It holds no state and sends nothing to the kernel.
"""

from __future__ import annotations

import anywidget

__all__ = ["ResizeRelay"]

_ESM = """
function render({ el }) {
  el.style.display = "none";
  let frame = 0, widths = new WeakMap(), observer = null, tries = 0;
  const changed = (entries) => {
    let moved = false;
    for (const e of entries) {
      const w = Math.round(e.contentRect.width), h = Math.round(e.contentRect.height);
      const before = widths.get(e.target);
      if (!before || before[0] !== w || before[1] !== h) { widths.set(e.target, [w, h]); moved = true; }
    }
    if (moved && !frame) {
      frame = requestAnimationFrame(() => { frame = 0; window.dispatchEvent(new Event("resize")); });
    }
  };
  const attach = () => {
    const root = el.closest(".vx-explorer");
    if (!root) { if (tries++ < 200) setTimeout(attach, 100); return; }
    observer = new ResizeObserver(changed);
    observer.observe(root);
    for (const card of root.querySelectorAll(".vx-card, .vx-tab-grid")) observer.observe(card);
  };
  attach();
  return () => { if (observer) observer.disconnect(); if (frame) cancelAnimationFrame(frame); };
}
export default { render };
"""


class ResizeRelay(anywidget.AnyWidget):
    """Invisible: re-measures the explorer's charts when the explorer or one of its cards changes size."""

    _esm = _ESM
